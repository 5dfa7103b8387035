"""Sync between a device's log and an office (schema 017, 018): the rows a
push sends and a pull returns, and applying either, all-or-nothing, by uuid.

Portable SQL only (the office may run on PostgreSQL): ``?`` placeholders,
``INSERT ... ON CONFLICT ... DO NOTHING/DO UPDATE``, "check then insert"
inside the caller's transaction (a push holds ``sync_lock`` first, so two
pushes never interleave), timestamps as ISO text made in Python.

The exchange logic (batches, cursors, HTTP) is ``fieldapp/sync.py``.
"""
from __future__ import annotations

import json
import math
import re
import uuid as uuidlib

from .core import (COMPUTED_FIELDS, INPUT_FIELDS, SITE_NAME_MAX, StoreError,
                   dialect, readings_insert_sql, transaction, utc_now)
from .sites import SITE_SETTINGS, _history_text, clean_site_name, get_site

# ---------------------------------------------------------------- settings

#: Keys of sync_settings.
LOG_UUID = "log_uuid"
DEVICE_NAME = "device_name"
PERSON = "person"
OFFICE_URL = "office_url"
OFFICE_TOKEN = "office_token"
OFFICE_CA_FILE = "office_ca_file"
PUSH_CURSOR = "push_cursor"
PERSON_MAX = 80


def get_setting(conn, key: str, default: str | None = None) -> str | None:
    row = conn.execute("SELECT value FROM sync_settings WHERE key = ?", (key,)).fetchone()
    return default if row is None else row[0]


def set_setting(conn, key: str, value: str | None) -> None:
    """Set (or, with None, remove) one setting, inside or outside a transaction."""
    with transaction(conn):
        if value is None:
            conn.execute("DELETE FROM sync_settings WHERE key = ?", (key,))
        else:
            conn.execute("INSERT INTO sync_settings (key, value) VALUES (?, ?) "
                         "ON CONFLICT (key) DO UPDATE SET value = excluded.value",
                         (key, str(value)))


def log_uuid(conn) -> str:
    """This log's identity, made on first use (a device, an office)."""
    found = get_setting(conn, LOG_UUID)
    if found:
        return found
    with transaction(conn):
        conn.execute("INSERT INTO sync_settings (key, value) VALUES (?, ?) "
                     "ON CONFLICT (key) DO NOTHING", (LOG_UUID, str(uuidlib.uuid4())))
    return get_setting(conn, LOG_UUID)


def clean_person(text) -> str:
    """A person's or device's name as kept: one line, at most PERSON_MAX characters."""
    name = " ".join(str(text or "").split())
    if len(name) > PERSON_MAX:
        raise StoreError(f"A name is at most {PERSON_MAX} characters; shorten it.", "person")
    if any(ord(c) < 32 for c in name):
        raise StoreError("A name cannot contain control characters.", "person")
    return name


def note_reading_origin(conn, reading_id: int, person: str | None = None) -> None:
    """Remember that this log took a new reading, and who did (``person``, or
    the person set for this log), inside the caller's transaction."""
    # a visit's "visited by" may be longer than a person's name here: shortened, never refused
    who = " ".join(str(person).split())[:PERSON_MAX] if person else None
    who = who or get_setting(conn, PERSON) or None
    conn.execute("INSERT INTO reading_origin (reading_id, log_uuid, device_name, person) "
                 "VALUES (?, ?, ?, ?) ON CONFLICT (reading_id) DO NOTHING",
                 (reading_id, log_uuid(conn), get_setting(conn, DEVICE_NAME) or "", who))


# ---------------------------------------------------------------- follows

def follow_site(conn, name: str) -> str:
    name = clean_site_name(name)
    with transaction(conn):
        if not any(f["site_name"].lower() == name.lower() for f in list_follows(conn)):
            conn.execute("INSERT INTO sync_follows (site_name, cursor, added_at) "
                         "VALUES (?, '{}', ?) ON CONFLICT (site_name) DO NOTHING",
                         (name, utc_now()))
    return name


def unfollow_site(conn, name: str) -> int:
    name = " ".join(str(name or "").split()).lower()
    with transaction(conn):
        gone = [f["site_name"] for f in list_follows(conn) if f["site_name"].lower() == name]
        for n in gone:
            conn.execute("DELETE FROM sync_follows WHERE site_name = ?", (n,))
    return len(gone)


def list_follows(conn) -> list[dict]:
    return [{"site_name": r["site_name"], "cursor": json.loads(r["cursor"] or "{}"),
             "added_at": r["added_at"]}
            for r in conn.execute("SELECT * FROM sync_follows ORDER BY site_name")]


# ---------------------------------------------------------------- office devices

def insert_office_device(conn, token_sha256: str, log_uuid_: str, name: str, person: str,
                         address: str, code_id: int | None) -> dict:
    """A device paired for sync; an earlier pairing of the same log is revoked."""
    now = utc_now()
    with transaction(conn):
        conn.execute("UPDATE office_devices SET revoked_at = ? WHERE log_uuid = ? AND "
                     "revoked_at IS NULL", (now, log_uuid_))
        row = conn.execute(
            "INSERT INTO office_devices (token_sha256, log_uuid, name, person, address, code_id,"
            " paired_at, last_seen_at) VALUES (?,?,?,?,?,?,?,?) RETURNING id",
            (token_sha256, log_uuid_, name, person, address, code_id, now, now)).fetchone()
    return office_device(conn, row[0])


def office_device(conn, device_id: int) -> dict | None:
    row = conn.execute("SELECT * FROM office_devices WHERE id = ?", (device_id,)).fetchone()
    return None if row is None else dict(row)


def office_device_by_token(conn, token_sha256: str) -> dict | None:
    """The device holding this token: revoked ones too (the caller says why it refuses)."""
    row = conn.execute("SELECT * FROM office_devices WHERE token_sha256 = ?",
                       (token_sha256,)).fetchone()
    return None if row is None else dict(row)


def touch_office_device(conn, device_id: int, address: str, person: str | None = None,
                        name: str | None = None, readings_in: int = 0,
                        synced: bool = False) -> None:
    """Last seen now (inside or outside the caller's transaction)."""
    now = utc_now()
    with transaction(conn):
        conn.execute(
            "UPDATE office_devices SET last_seen_at = ?, address = ?, "
            "readings_in = readings_in + ?, person = COALESCE(?, person), "
            "name = COALESCE(?, name), last_sync_at = COALESCE(?, last_sync_at) WHERE id = ?",
            (now, address, readings_in, person, name, now if synced else None, device_id))


def list_office_devices(conn) -> list[dict]:
    return [dict(r) for r in conn.execute(
        "SELECT * FROM office_devices ORDER BY CASE WHEN revoked_at IS NULL THEN 0 ELSE 1 END, "
        "last_seen_at DESC, id DESC")]


def revoke_office_device(conn, device_id: int) -> int:
    with transaction(conn):
        cur = conn.execute("UPDATE office_devices SET revoked_at = ? WHERE id = ? AND "
                           "revoked_at IS NULL", (utc_now(), device_id))
    return cur.rowcount


def count_office_devices_of_code(conn, code_id: int) -> int:
    return conn.execute("SELECT COUNT(*) FROM office_devices WHERE code_id = ?",
                        (code_id,)).fetchone()[0]


# ---------------------------------------------------------------- rows as items

#: Reading columns a sync item carries, as stored.
READING_ITEM_FIELDS = ("uuid",) + INPUT_FIELDS + COMPUTED_FIELDS + (
    "result_json", "app_version", "recorded_at")
_CURSOR_KEYS = ("h", "m", "c", "r", "v", "a")

_READING_ITEM_SELECT = """
    SELECT r.id, r.uuid, {cols}, s.name AS site, v.visited_by,
           COALESCE(p.uuid, rv.supersedes_uuid) AS supersedes_uuid,
           o.log_uuid AS origin_log, o.device_name AS origin_device, o.person AS origin_person
    FROM readings r
    JOIN sites s ON s.id = r.site_id
    JOIN visits v ON v.id = r.visit_id
    LEFT JOIN readings p ON p.id = r.supersedes_id
    LEFT JOIN reading_review rv ON rv.reading_id = r.id
    LEFT JOIN reading_origin o ON o.reading_id = r.id""".format(
    cols=", ".join(f"r.{c}" for c in READING_ITEM_FIELDS if c != "uuid"))


def _reading_item(row) -> dict:
    d = {c: row[c] for c in READING_ITEM_FIELDS}
    d["compensated"] = bool(d["compensated"])
    d["site"] = row["site"]
    d["visited_by"] = row["visited_by"] or ""
    d["supersedes_uuid"] = row["supersedes_uuid"]
    d["origin"] = ({"log_uuid": row["origin_log"], "device_name": row["origin_device"] or "",
                    "person": row["origin_person"]} if row["origin_log"] else None)
    return d


def site_names(conn, site_id: int) -> list[str]:
    """A site's name now, then the names it had before (newest first)."""
    now = conn.execute("SELECT name FROM sites WHERE id = ?", (site_id,)).fetchone()[0]
    names = [now]
    for r in conn.execute("SELECT old_value FROM site_history WHERE site_id = ? AND "
                          "field = 'name' AND old_value IS NOT NULL ORDER BY id DESC",
                          (site_id,)):
        if r[0].lower() not in {n.lower() for n in names}:
            names.append(r[0])
    return names


def _not_received(kind: str, alias: str) -> str:
    return (f"NOT EXISTS (SELECT 1 FROM sync_received x WHERE x.kind = '{kind}' "
            f"AND x.row_id = {alias}.id)")


def push_batch(conn, cursor: dict, max_items: int = 500, max_bytes: int = 700_000
               ) -> tuple[dict, dict, bool]:
    """What a device sends next: (items, the cursor once the office confirms
    them, whether more is waiting). Rows that came from the office are left
    out. Each kind is read in id order from its cursor; a void or an
    acknowledgement waits for the batch that carries its reading, so no
    cursor ever steps over a row that was not sent."""
    cur = {k: int(cursor.get(k, 0)) for k in _CURSOR_KEYS}
    items: dict = {"sites": [], "history": [], "meters": [], "calibrations": [],
                   "readings": [], "voids": [], "acks": []}
    more = False
    budget = max_bytes

    hist = conn.execute(
        "SELECT h.id, h.site_id, s.name AS site, h.changed_at, h.action, h.field, "
        "h.old_value, h.new_value FROM site_history h JOIN sites s ON s.id = h.site_id "
        f"WHERE h.id > ? AND {_not_received('history', 'h')} ORDER BY h.id LIMIT ?",
        (cur["h"], max_items + 1)).fetchall()
    if len(hist) > max_items:
        hist, more = hist[:max_items], True
    for h in hist:
        items["history"].append({k: h[k] for k in ("site", "changed_at", "action", "field",
                                                   "old_value", "new_value")})
        cur["h"] = h["id"]

    for m in conn.execute("SELECT * FROM meters WHERE id > ? ORDER BY id", (cur["m"],)):
        items["meters"].append({k: m[k] for k in m.keys() if k != "id"})
        cur["m"] = m["id"]
    cals = conn.execute(
        "SELECT c.*, m.name AS meter FROM calibrations c JOIN meters m ON m.id = c.meter_id "
        "WHERE c.id > ? ORDER BY c.id LIMIT ?", (cur["c"], max_items + 1)).fetchall()
    if len(cals) > max_items:
        cals, more = cals[:max_items], True
    for c in cals:
        items["calibrations"].append({k: c[k] for k in c.keys() if k not in ("id", "meter_id")})
        cur["c"] = c["id"]

    rows = conn.execute(_READING_ITEM_SELECT + f" WHERE r.id > ? AND {_not_received('reading', 'r')}"
                        " ORDER BY r.id LIMIT ?", (cur["r"], max_items + 1)).fetchall()
    if len(rows) > max_items:
        rows, more = rows[:max_items], True
    sent_through = math.inf
    for i, r in enumerate(rows):
        item = _reading_item(r)
        size = len(json.dumps(item, ensure_ascii=False))
        if items["readings"] and size > budget:
            more = True
            break
        budget -= size
        items["readings"].append(item)
        cur["r"] = r["id"]
    if more:
        sent_through = cur["r"]

    for kind, table, cols in (("void", "voids", "reason, voided_at"),
                              ("ack", "flag_acks", "code, note, acked_at")):
        key = "v" if kind == "void" else "a"
        out = items["voids" if kind == "void" else "acks"]
        q = conn.execute(
            f"SELECT t.id, t.reading_id, r.uuid AS reading_uuid, {', '.join('t.' + c.strip() for c in cols.split(','))} "
            f"FROM {table} t JOIN readings r ON r.id = t.reading_id "
            f"WHERE t.id > ? AND {_not_received(kind, 't')} ORDER BY t.id LIMIT ?",
            (cur[key], max_items + 1)).fetchall()
        if len(q) > max_items:
            q, more = q[:max_items], True
        for row in q:
            if row["reading_id"] > sent_through:
                more = True
                break
            out.append({k: row[k] for k in row.keys() if k not in ("id", "reading_id")})
            cur[key] = row["id"]

    names_needed = {i["site"] for i in items["readings"]} | {h["site"] for h in items["history"]}
    for name in sorted(names_needed):
        site = get_site(conn, name, former_names=False)
        if site is not None:
            items["sites"].append({"name": site["name"], "names": site_names(conn, site["id"])})
    return items, cur, more


def is_empty(items: dict) -> bool:
    return not any(items.get(k) for k in ("history", "meters", "calibrations", "readings",
                                          "voids", "acks"))


# ---------------------------------------------------------------- applying items

_UUID_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.:-]{7,63}$")
_NUMBER_COLS = ("depth_cm", "value", "temp_c", "sp_pct", "tds_factor", "theta_g_pct",
                "matric_MPa", "ec25_dS_m", "ece_dS_m", "psi_s_MPa")
_TEXT_COLS = ("sample", "unit", "ratio", "texture", "meter", "replicate_group", "note",
              "taken_at", "ece_method", "psi_s_method", "flags", "app_version", "recorded_at")
ITEM_TEXT_MAX = 4000
RESULT_JSON_MAX = 64_000


def _bad(what: str, i: int, why: str):
    raise StoreError(f"The batch was refused whole, nothing of it was kept: {what} {i + 1} "
                     f"{why}.", "batch", 400)


def _check_reading_item(d, i: int) -> dict:
    if not isinstance(d, dict):
        _bad("reading", i, "is not an object")
    if not isinstance(d.get("uuid"), str) or not _UUID_RE.match(d["uuid"]):
        _bad("reading", i, "has no valid uuid")
    for c in _NUMBER_COLS:
        v = d.get(c)
        if v is not None and (isinstance(v, bool) or not isinstance(v, (int, float))
                              or not math.isfinite(v)):
            _bad("reading", i, f"has a {c} that is not a number")
    if d.get("value") is None:
        _bad("reading", i, "has no value")
    for c in _TEXT_COLS + ("site", "visited_by", "supersedes_uuid"):
        v = d.get(c)
        if v is not None and (not isinstance(v, str) or len(v) > ITEM_TEXT_MAX):
            _bad("reading", i, f"has a {c} that is not short text")
    for c in ("sample", "unit", "taken_at", "site"):
        if not d.get(c):
            _bad("reading", i, f"has no {c}")
    rj = d.get("result_json")
    if not isinstance(rj, str) or len(rj) > RESULT_JSON_MAX:
        _bad("reading", i, "has no result")
    try:
        if not isinstance(json.loads(rj), dict):
            raise ValueError
    except ValueError:
        _bad("reading", i, "has a result that is not a JSON object")
    o = d.get("origin")
    if o is not None and (not isinstance(o, dict) or not isinstance(o.get("log_uuid"), str)):
        _bad("reading", i, "has an origin without a log")
    return d


def _text_or_none(v, what, i):
    if v is not None and (not isinstance(v, str) or len(v) > ITEM_TEXT_MAX):
        _bad(what, i, "holds something that is not short text")
    return v


def resolve_sites(conn, site_items: list) -> dict[str, int]:
    """Site name (lower case) -> site id here, for the sites a batch names:
    by the name it has now, else by a name it had before, else made new."""
    out: dict[str, int] = {}
    for i, s in enumerate(site_items or []):
        if not isinstance(s, dict) or not isinstance(s.get("name"), str):
            _bad("site", i, "has no name")
        names = [n for n in (s.get("names") or []) if isinstance(n, str)][:50] or [s["name"]]
        found = None
        for n in [s["name"]] + names:
            found = get_site(conn, clean_site_name(n), former_names=False)
            if found is not None:
                break
        if found is None:
            found = get_site(conn, clean_site_name(s["name"]))     # renamed here since
        out[s["name"].lower()] = found["id"] if found is not None else _make_site(conn, s["name"])
    return out


def _make_site(conn, name: str) -> int:
    """A site this log did not have, named by a batch: made with no history
    of its own, so that the settings changes the batch carries (its creation
    among them) are its history, and none competes with a change made here."""
    found = get_site(conn, clean_site_name(name))
    if found is not None:
        return found["id"]
    return conn.execute("INSERT INTO sites (name, kind, notes, created_at) VALUES (?, ?, ?, ?) "
                        "RETURNING id", (clean_site_name(name), "field", "", utc_now())).fetchone()[0]


def _site_id(conn, sites: dict, name: str) -> int:
    key = name.lower()
    if key not in sites:
        sites[key] = _make_site(conn, name)
    return sites[key]


def _setting_value(field: str, text):
    if text is None:
        return {"kind": "field", "notes": ""}.get(field)
    if field in ("sp_pct", "latitude", "longitude"):
        try:
            x = float(text)
        except ValueError:
            return None
        return x if math.isfinite(x) else None
    return text


def apply_history(conn, sites: dict, hist: list) -> dict:
    """Site settings changes made elsewhere: each kept in this log's history
    (once: the same site, field, time and value again is a resend), and the
    setting itself takes the latest change by change time (ties: the larger
    value, so every log picks the same)."""
    new = dup = 0
    change_nos: dict = {}
    for i, h in enumerate(hist or []):
        if not isinstance(h, dict) or h.get("field") not in SITE_SETTINGS \
                or not isinstance(h.get("changed_at"), str) or not isinstance(h.get("site"), str):
            _bad("settings change", i, "is not a change of a known setting")
        old = _text_or_none(h.get("old_value"), "settings change", i)
        val = _text_or_none(h.get("new_value"), "settings change", i)
        sid = _site_id(conn, sites, h["site"])
        field, when = h["field"], h["changed_at"]
        if conn.execute("SELECT 1 FROM site_history WHERE site_id = ? AND field = ? AND "
                        "changed_at = ? AND COALESCE(new_value, '') = COALESCE(?, '')",
                        (sid, field, when, val)).fetchone():
            dup += 1
            continue
        latest = conn.execute(
            "SELECT changed_at, new_value FROM site_history WHERE site_id = ? AND field = ? "
            "ORDER BY changed_at DESC, COALESCE(new_value, '') DESC LIMIT 1",
            (sid, field)).fetchone()
        site = get_site(conn, sid)
        wins = latest is None or (when, val or "") > (latest[0], latest[1] or "")
        if wins and _history_text(site[field]) != val:
            value = _setting_value(field, val)
            if field == "name":
                value = clean_site_name(val) if val else site["name"]
                other = get_site(conn, value, former_names=False)
                if other is not None and other["id"] != sid:
                    wins = False          # another site holds that name here: kept in history
            if wins:
                conn.execute(f"UPDATE sites SET {field} = ? WHERE id = ?", (value, sid))
                if field == "name":
                    sites[value.lower()] = sid
        key = (sid, when, h.get("action"))
        if key in change_nos:       # the other settings of the same change
            no, action = change_nos[key]
        else:
            no = conn.execute("SELECT COALESCE(MAX(change_no), 0) + 1 FROM site_history "
                              "WHERE site_id = ?", (sid,)).fetchone()[0]
            action = h.get("action") if no == 1 and h.get("action") in ("created", "existing") \
                else "changed"
            change_nos[key] = (no, action)
        conn.execute("INSERT INTO site_history (site_id, change_no, changed_at, action, field, "
                     "old_value, new_value) VALUES (?,?,?,?,?,?,?)",
                     (sid, no, when, action, field, old, val))
        new += 1
    return {"new": new, "duplicate": dup}


_METER_COLS = ("name", "units", "ranges_json", "accuracy_pct", "atc", "atc_coeff_pct",
               "ref_temp_c", "atc_min_c", "atc_max_c", "tds_factor", "notes", "created_at")
_CAL_COLS = ("standard", "standard_uS_cm", "value", "unit", "temp_c", "compensated",
             "expected_uS_cm", "measured_uS_cm", "deviation_pct", "tolerance_pct", "passed",
             "checked_at", "note")


def apply_meters(conn, meters: list, cals: list) -> dict:
    """Meter profiles by name (one made elsewhere under a name taken here is
    left as it is here), calibration checks by meter, time, standard and value."""
    new_m = new_c = dup = 0
    for i, m in enumerate(meters or []):
        if not isinstance(m, dict) or not isinstance(m.get("name"), str) or not m["name"].strip():
            _bad("meter", i, "has no name")
        for c in ("units", "ranges_json", "created_at"):
            if not isinstance(m.get(c), str):
                _bad("meter", i, f"has no {c}")
        if conn.execute("SELECT 1 FROM meters WHERE lower(name) = lower(?)",
                        (m["name"],)).fetchone():
            dup += 1
            continue
        conn.execute(f"INSERT INTO meters ({', '.join(_METER_COLS)}) VALUES "
                     f"({', '.join('?' * len(_METER_COLS))})",
                     [m.get(c) if c not in ("notes",) else (m.get(c) or "") for c in _METER_COLS])
        new_m += 1
    for i, c in enumerate(cals or []):
        if not isinstance(c, dict) or not isinstance(c.get("meter"), str):
            _bad("calibration check", i, "names no meter")
        meter = conn.execute("SELECT id FROM meters WHERE lower(name) = lower(?)",
                             (c["meter"],)).fetchone()
        if meter is None:
            _bad("calibration check", i, "is of a meter the batch does not carry")
        if conn.execute("SELECT 1 FROM calibrations WHERE meter_id = ? AND checked_at = ? AND "
                        "standard = ? AND value = ? AND unit = ?",
                        (meter[0], c.get("checked_at"), c.get("standard"), c.get("value"),
                         c.get("unit"))).fetchone():
            dup += 1
            continue
        try:
            conn.execute(f"INSERT INTO calibrations (meter_id, {', '.join(_CAL_COLS)}) VALUES "
                         f"(?, {', '.join('?' * len(_CAL_COLS))})",
                         [meter[0]] + [c.get(k) if k != "note" else (c.get(k) or "")
                                       for k in _CAL_COLS])
        except Exception as e:            # a NOT NULL column missing: the item is not a check
            if "constraint" not in str(e).lower():
                raise
            _bad("calibration check", i, f"is incomplete ({e})")
        new_c += 1
    return {"meters": new_m, "calibrations": new_c, "duplicate": dup}


def _visit_id(conn, cache: dict, site_id: int, taken_at: str, visited_by: str) -> int:
    key = (site_id, taken_at[:10], visited_by)
    if key not in cache:
        conn.execute("INSERT INTO visits (site_id, visit_date, visited_by) VALUES (?,?,?) "
                     "ON CONFLICT (site_id, visit_date, visited_by) DO NOTHING", key)
        cache[key] = conn.execute("SELECT id FROM visits WHERE site_id = ? AND visit_date = ? "
                                  "AND visited_by = ?", key).fetchone()[0]
    return cache[key]


def _uuid_ids(conn, uuids) -> dict[str, int]:
    uuids = list(uuids)
    out: dict[str, int] = {}
    for k in range(0, len(uuids), 500):
        part = uuids[k:k + 500]
        out.update((r[0], r[1]) for r in conn.execute(
            f"SELECT uuid, id FROM readings WHERE uuid IN ({','.join('?' * len(part))})", part))
    return out


def apply_readings(conn, sites: dict, readings: list, default_origin: dict | None = None
                   ) -> dict:
    """New readings by uuid (a uuid here already is a resend: nothing
    changes; one that names another reading is refused item by item and
    reported). A correction of a version that another correction replaced
    already (two devices corrected the same reading) is kept without its
    supersedes link and marked for review with the version it was made to
    correct. Returns counts, the uuids refused and the new readings' ids."""
    checked = [_check_reading_item(d, i) for i, d in enumerate(readings or [])]
    have = _uuid_ids(conn, [d["uuid"] for d in checked])
    brief = {}
    if have:
        for k in range(0, len(have), 500):
            part = list(have)[k:k + 500]
            for r in conn.execute(
                    "SELECT r.uuid, r.value, r.unit, s.name FROM readings r JOIN sites s "
                    f"ON s.id = r.site_id WHERE r.uuid IN ({','.join('?' * len(part))})", part):
                brief[r[0]] = r
    fresh, refused, seen = [], [], set()
    dup = 0
    for d in checked:
        if d["uuid"] in have:
            b = brief[d["uuid"]]
            if b[1] == d["value"] and b[2] == d["unit"]:
                dup += 1
            else:
                refused.append(d["uuid"])
            continue
        if d["uuid"] in seen:
            dup += 1
            continue
        seen.add(d["uuid"])
        fresh.append(d)
    if not fresh:
        return {"new": 0, "duplicate": dup, "refused": refused, "review": 0, "ids": []}
    # which corrections find their target still current
    targets = {d["supersedes_uuid"] for d in fresh if d.get("supersedes_uuid")}
    target_ids = _uuid_ids(conn, targets)
    taken = set()
    ids = list(target_ids.values())
    for k in range(0, len(ids), 500):
        part = ids[k:k + 500]
        taken.update(r[0] for r in conn.execute(
            f"SELECT supersedes_id FROM readings WHERE supersedes_id IN "
            f"({','.join('?' * len(part))})", part))
    by_uuid_in_batch = {d["uuid"] for d in fresh}
    claimed: set[str] = set()
    cols = ("site_id", "visit_id") + READING_ITEM_FIELDS
    rows, review = [], []
    visits: dict = {}
    for d in fresh:
        sid = _site_id(conn, sites, clean_site_name(d["site"]))
        vid = _visit_id(conn, visits, sid, d["taken_at"], d.get("visited_by") or "")
        vals = [sid, vid] + [d.get(c) for c in READING_ITEM_FIELDS]
        vals[cols.index("compensated")] = 1 if d.get("compensated") else 0
        vals[cols.index("note")] = d.get("note") or ""
        vals[cols.index("flags")] = d.get("flags") or ""
        vals[cols.index("app_version")] = d.get("app_version") or "unknown"
        vals[cols.index("recorded_at")] = d.get("recorded_at") or utc_now()
        sup = d.get("supersedes_uuid")
        link = None
        if sup:
            known = sup in target_ids or sup in by_uuid_in_batch
            free = sup not in claimed and (sup not in target_ids
                                           or target_ids[sup] not in taken)
            if known and free:
                link = sup
                claimed.add(sup)
            else:
                review.append((d["uuid"], sup))
        rows.append(vals + [link])
    conn.executemany(readings_insert_sql(cols, ", supersedes_id",
                                         f", (SELECT id FROM readings WHERE uuid = ?{len(cols) + 1})",
                                         dialect=dialect(conn)),
                     rows)
    new_ids = _uuid_ids(conn, [d["uuid"] for d in fresh])
    now = utc_now()
    conn.executemany("INSERT INTO reading_review (reading_id, supersedes_uuid, noted_at) "
                     "VALUES (?, ?, ?) ON CONFLICT (reading_id) DO NOTHING",
                     [(new_ids[u], s, now) for u, s in review])
    origins = []
    for d in fresh:
        o = d.get("origin") or default_origin
        if o:
            origins.append((new_ids[d["uuid"]], str(o["log_uuid"])[:80],
                            str(o.get("device_name") or "")[:PERSON_MAX],
                            (str(o["person"])[:PERSON_MAX] if o.get("person") else None)))
    conn.executemany("INSERT INTO reading_origin (reading_id, log_uuid, device_name, person) "
                     "VALUES (?, ?, ?, ?) ON CONFLICT (reading_id) DO NOTHING", origins)
    return {"new": len(fresh), "duplicate": dup, "refused": refused, "review": len(review),
            "ids": list(new_ids.values())}


def apply_voids_acks(conn, voids: list, acks: list) -> tuple[dict, list, list]:
    """Voids and flag acknowledgements by reading uuid (one void per reading,
    one acknowledgement per reading and flag: a resend changes nothing).
    Returns counts and the new rows' ids (voids, acks)."""
    new_v, new_a, dup = [], [], 0
    uuids = {x.get("reading_uuid") for x in (voids or []) + (acks or []) if isinstance(x, dict)}
    ids = _uuid_ids(conn, [u for u in uuids if isinstance(u, str)])
    for i, v in enumerate(voids or []):
        if not isinstance(v, dict) or v.get("reading_uuid") not in ids \
                or not isinstance(v.get("reason"), str) or not isinstance(v.get("voided_at"), str):
            _bad("void", i, "names no reading of this log or gives no reason")
        row = conn.execute("INSERT INTO voids (reading_id, reason, voided_at) VALUES (?,?,?) "
                           "ON CONFLICT (reading_id) DO NOTHING RETURNING id",
                           (ids[v["reading_uuid"]], v["reason"][:ITEM_TEXT_MAX],
                            v["voided_at"])).fetchone()
        if row is None:
            dup += 1
        else:
            new_v.append(row[0])
    for i, a in enumerate(acks or []):
        if not isinstance(a, dict) or a.get("reading_uuid") not in ids \
                or not isinstance(a.get("code"), str) or not isinstance(a.get("acked_at"), str):
            _bad("acknowledgement", i, "names no reading of this log or no flag")
        row = conn.execute("INSERT INTO flag_acks (reading_id, code, note, acked_at) "
                           "VALUES (?,?,?,?) ON CONFLICT (reading_id, code) DO NOTHING "
                           "RETURNING id",
                           (ids[a["reading_uuid"]], a["code"][:200],
                            str(a.get("note") or "")[:ITEM_TEXT_MAX], a["acked_at"])).fetchone()
        if row is None:
            dup += 1
        else:
            new_a.append(row[0])
    return {"voids": len(new_v), "acks": len(new_a), "duplicate": dup}, new_v, new_a


def lock_for_sync(conn) -> None:
    """First statement of a push's transaction: pushes apply one at a time."""
    conn.execute("UPDATE sync_lock SET n = n + 1 WHERE id = 1")


def apply_push(conn, items: dict, device: dict) -> dict:
    """A device's batch at the office, in one transaction: all of it or none."""
    if not isinstance(items, dict):
        raise StoreError("The batch is not an object.", "batch", 400)
    origin = {"log_uuid": device["log_uuid"], "device_name": device["name"], "person": None}
    with transaction(conn):
        lock_for_sync(conn)
        sites = resolve_sites(conn, items.get("sites"))
        h = apply_history(conn, sites, items.get("history"))
        m = apply_meters(conn, items.get("meters"), items.get("calibrations"))
        r = apply_readings(conn, sites, items.get("readings"), origin)
        va, _, _ = apply_voids_acks(conn, items.get("voids"), items.get("acks"))
    r.pop("ids")
    return {"history": h, "meters": m, "readings": r, "voids_acks": va}


# ---------------------------------------------------------------- pull

def pull_site(conn, site_name: str, cursor: dict, exclude_log: str | None,
              max_items: int = 500, max_bytes: int = 700_000) -> dict:
    """What the office sends a device that follows this site, from its
    cursor: the site's names, its settings changes, readings (not those the
    device itself took), voids and acknowledgements (a void or an
    acknowledgement waits for the batch carrying its reading)."""
    cur = {k: int(cursor.get(k, 0)) if isinstance(cursor, dict) else 0 for k in ("h", "r", "v", "a")}
    site = get_site(conn, clean_site_name(site_name))
    out = {"site": None, "history": [], "readings": [], "voids": [], "acks": [],
           "cursor": cur, "more": False}
    if site is None:
        return out
    sid = site["id"]
    out["site"] = {"name": site["name"], "names": site_names(conn, sid)}
    hist = conn.execute("SELECT id, changed_at, action, field, old_value, new_value FROM "
                        "site_history WHERE site_id = ? AND id > ? ORDER BY id LIMIT ?",
                        (sid, cur["h"], max_items + 1)).fetchall()
    if len(hist) > max_items:
        hist, out["more"] = hist[:max_items], True
    for h in hist:
        out["history"].append({"site": site["name"], **{k: h[k] for k in h.keys() if k != "id"}})
        cur["h"] = h["id"]
    where = "r.site_id = ? AND r.id > ?"
    args: list = [sid, cur["r"]]
    if exclude_log:
        where += (" AND NOT EXISTS (SELECT 1 FROM reading_origin xo WHERE "
                  "xo.reading_id = r.id AND xo.log_uuid = ?)")
        args.append(exclude_log)
    rows = conn.execute(_READING_ITEM_SELECT + f" WHERE {where} ORDER BY r.id LIMIT ?",
                        args + [max_items + 1]).fetchall()
    if len(rows) > max_items:
        rows, out["more"] = rows[:max_items], True
    budget = max_bytes
    for r in rows:
        item = _reading_item(r)
        item["site"] = site["name"]
        size = len(json.dumps(item, ensure_ascii=False))
        if out["readings"] and size > budget:
            out["more"] = True
            break
        budget -= size
        out["readings"].append(item)
        cur["r"] = r["id"]
    through = cur["r"] if out["more"] else math.inf
    for key, table, cols in (("v", "voids", ("reason", "voided_at")),
                             ("a", "flag_acks", ("code", "note", "acked_at"))):
        q = conn.execute(
            f"SELECT t.id, t.reading_id, r.uuid AS reading_uuid, "
            f"{', '.join('t.' + c for c in cols)} FROM {table} t JOIN readings r "
            f"ON r.id = t.reading_id WHERE r.site_id = ? AND t.id > ? ORDER BY t.id LIMIT ?",
            (sid, cur[key], max_items + 1)).fetchall()
        if len(q) > max_items:
            q, out["more"] = q[:max_items], True
        dest = out["voids" if key == "v" else "acks"]
        for row in q:
            if row["reading_id"] > through:
                out["more"] = True
                break
            dest.append({k: row[k] for k in row.keys() if k not in ("id", "reading_id")})
            cur[key] = row["id"]
    return out


def apply_pull(conn, follow_name: str, batch: dict) -> dict:
    """A pulled batch on the device, in one transaction with its cursor: the
    rows it adds are marked as received, so they are never pushed back."""
    with transaction(conn):
        counts = {"readings": 0, "voids": 0, "acks": 0, "history": 0, "review": 0}
        if batch.get("site"):
            before = conn.execute("SELECT COALESCE(MAX(id), 0) FROM site_history").fetchone()[0]
            sites = resolve_sites(conn, [batch["site"]])
            h = apply_history(conn, sites, batch.get("history"))
            counts["history"] = h["new"]
            r = apply_readings(conn, sites, batch.get("readings"))
            counts["readings"], counts["review"] = r["new"], r["review"]
            va, new_v, new_a = apply_voids_acks(conn, batch.get("voids"), batch.get("acks"))
            counts["voids"], counts["acks"] = va["voids"], va["acks"]
            marks = [("reading", i) for i in r["ids"]] + [("void", i) for i in new_v] \
                + [("ack", i) for i in new_a]
            marks += [("history", row[0]) for row in conn.execute(
                "SELECT id FROM site_history WHERE id > ?", (before,))]
            conn.executemany("INSERT INTO sync_received (kind, row_id) VALUES (?, ?) "
                             "ON CONFLICT (kind, row_id) DO NOTHING", marks)
        conn.execute("UPDATE sync_follows SET cursor = ? WHERE site_name = ?",
                     (json.dumps(batch.get("cursor") or {}), follow_name))
    return counts


# ---------------------------------------------------------------- office views

def review_pairs(conn, site_id: int | None = None) -> list[dict]:
    """Readings corrected twice (by two devices): the version linked as the
    correction and each version marked for review, per original."""
    where, args = "", []
    if site_id is not None:
        where, args = " WHERE r.site_id = ?", [site_id]
    out = []
    for row in conn.execute(
            "SELECT rv.supersedes_uuid, r.uuid AS rival, r.taken_at, o.person, o.device_name, "
            "(SELECT n.uuid FROM readings n JOIN readings t ON t.id = n.supersedes_id "
            " WHERE t.uuid = rv.supersedes_uuid) AS linked "
            "FROM reading_review rv JOIN readings r ON r.id = rv.reading_id "
            "LEFT JOIN reading_origin o ON o.reading_id = r.id" + where +
            " ORDER BY rv.supersedes_uuid, r.id", args):
        out.append(dict(row))
    return out


def device_names(conn) -> dict[str, str]:
    """log uuid -> the name its device goes by now (its latest pairing; this
    log's own name for itself)."""
    out = {r[0]: r[1] for r in conn.execute(
        "SELECT log_uuid, name FROM office_devices WHERE name <> '' ORDER BY id")}
    me, name = get_setting(conn, LOG_UUID), get_setting(conn, DEVICE_NAME)
    if me and name:
        out.setdefault(me, name)
    return out


def _name(names: dict, log: str | None, stored: str | None) -> str:
    return names.get(log or "", "") or (stored or "")


def sites_across_devices(conn) -> list[dict]:
    """Every site with its reading count, latest current reading and who
    (person, device) sent its newest reading."""
    from .sites import list_sites
    names = device_names(conn)
    last = {r[0]: (r[1], _name(names, r[4], r[2]), r[3]) for r in conn.execute(
        "SELECT r.site_id, o.person, o.device_name, r.recorded_at, o.log_uuid FROM readings r "
        "LEFT JOIN reading_origin o ON o.reading_id = r.id "
        "WHERE r.id IN (SELECT MAX(id) FROM readings GROUP BY site_id)")}
    out = []
    for s in list_sites(conn):
        d = dict(s)
        p = last.get(s["id"])
        d["last_person"], d["last_device"], d["last_recorded_at"] = p if p else (None, None, None)
        out.append(d)
    return out


def scout_activity(conn) -> list[dict]:
    """Per person and device: readings (every version), the latest taken,
    and when the device was last seen at the office."""
    seen = {}
    for d in conn.execute("SELECT log_uuid, MAX(last_seen_at) FROM office_devices GROUP BY log_uuid"):
        seen[d[0]] = d[1]
    names = device_names(conn)
    out = []
    for r in conn.execute(
            "SELECT o.person, o.log_uuid, MAX(o.device_name) AS device_name, COUNT(*) AS n, "
            "MAX(r.taken_at) AS last_taken_at FROM reading_origin o "
            "JOIN readings r ON r.id = o.reading_id GROUP BY o.person, o.log_uuid "
            "ORDER BY MAX(r.taken_at) DESC"):
        d = dict(r)
        d["device_name"] = _name(names, r["log_uuid"], r["device_name"])
        d["last_seen_at"] = seen.get(r["log_uuid"])
        out.append(d)
    return out


def site_readings_by(conn, site_id: int, person: str | None = None, log: str | None = None,
                     limit: int = 200) -> list[dict]:
    """A site's readings (newest first), only those of a person and/or a device."""
    where, args = ["r.site_id = ?"], [site_id]
    if person:
        where.append("o.person = ?")
        args.append(person)
    if log:
        where.append("o.log_uuid = ?")
        args.append(log)
    names = device_names(conn)
    rows = [dict(r) for r in conn.execute(
        "SELECT r.uuid, r.taken_at, r.sample, r.value, r.unit, r.ec25_dS_m, r.ece_dS_m, "
        "r.flags, st.status, o.person, o.device_name, o.log_uuid FROM readings r "
        "JOIN reading_status st ON st.id = r.id LEFT JOIN reading_origin o "
        "ON o.reading_id = r.id WHERE " + " AND ".join(where) +
        " ORDER BY r.taken_at DESC, r.id DESC LIMIT ?", args + [limit])]
    for r in rows:
        r["device_name"] = _name(names, r["log_uuid"], r["device_name"])
    return rows


def people_and_devices(conn, site_id: int) -> tuple[list[str], list[tuple[str, str]]]:
    """Who and which devices took readings at a site (for its filter)."""
    people = [r[0] for r in conn.execute(
        "SELECT DISTINCT o.person FROM reading_origin o JOIN readings r ON r.id = o.reading_id "
        "WHERE r.site_id = ? AND o.person IS NOT NULL ORDER BY o.person", (site_id,))]
    names = device_names(conn)
    devices = sorted(((r[0], _name(names, r[0], r[1])) for r in conn.execute(
        "SELECT o.log_uuid, MAX(o.device_name) FROM reading_origin o JOIN readings r "
        "ON r.id = o.reading_id WHERE r.site_id = ? GROUP BY o.log_uuid", (site_id,))),
        key=lambda x: x[1])
    return people, devices


def log_fingerprint(conn) -> dict:
    """What two logs must share once they have converged: every reading by
    uuid with its values and the version it corrects, the voids, the
    acknowledgements, and the site settings."""
    readings = {r[0]: tuple(r[1:]) for r in conn.execute(
        "SELECT r.uuid, s.name, r.value, r.unit, r.taken_at, r.flags, r.result_json, "
        "COALESCE(p.uuid, rv.supersedes_uuid) FROM readings r JOIN sites s ON s.id = r.site_id "
        "LEFT JOIN readings p ON p.id = r.supersedes_id "
        "LEFT JOIN reading_review rv ON rv.reading_id = r.id")}
    voids = {r[0]: r[1] for r in conn.execute(
        "SELECT r.uuid, v.reason FROM voids v JOIN readings r ON r.id = v.reading_id")}
    acks = {(r[0], r[1]) for r in conn.execute(
        "SELECT r.uuid, a.code FROM flag_acks a JOIN readings r ON r.id = a.reading_id")}
    return {"readings": readings, "voids": voids, "acks": acks}
