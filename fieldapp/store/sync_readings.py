"""Readings, voids and flag acknowledgements that arrive in a batch, by
uuid: a resend changes nothing, a clash is reported, two corrections of one
version are kept for review."""
from __future__ import annotations

from .core import dialect, readings_insert_sql, utc_now
from .sites import clean_site_name
from .sync import PERSON_MAX
from .sync_items import (ITEM_TEXT_MAX, READING_ITEM_FIELDS, _bad,
                         _check_reading_item)
from .sync_sites import _site_id

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


def _stored_briefs(conn, uuids) -> dict:
    """uuid -> (uuid, value, unit, site name) of readings stored here."""
    uuids = list(uuids)
    brief = {}
    for k in range(0, len(uuids), 500):
        part = uuids[k:k + 500]
        for r in conn.execute(
                "SELECT r.uuid, r.value, r.unit, s.name FROM readings r JOIN sites s "
                f"ON s.id = r.site_id WHERE r.uuid IN ({','.join('?' * len(part))})", part):
            brief[r[0]] = r
    return brief


def _sort_fresh(conn, checked: list) -> tuple[list, int, list]:
    """(the readings new here, how many are resends, the uuids refused: a
    uuid stored here already whose value or unit differs)."""
    have = _uuid_ids(conn, [d["uuid"] for d in checked])
    brief = _stored_briefs(conn, have) if have else {}
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
    return fresh, dup, refused


def _targets_taken(conn, fresh: list) -> tuple[dict, set]:
    """The versions the corrections name (uuid -> id here), and the ids of
    those another correction here replaces already."""
    targets = {d["supersedes_uuid"] for d in fresh if d.get("supersedes_uuid")}
    target_ids = _uuid_ids(conn, targets)
    taken = set()
    ids = list(target_ids.values())
    for k in range(0, len(ids), 500):
        part = ids[k:k + 500]
        taken.update(r[0] for r in conn.execute(
            f"SELECT supersedes_id FROM readings WHERE supersedes_id IN "
            f"({','.join('?' * len(part))})", part))
    return target_ids, taken


#: Columns of the readings INSERT, in order (supersedes_id follows by uuid).
_INSERT_COLS = ("site_id", "visit_id") + READING_ITEM_FIELDS


def _row_values(d: dict, site_id: int, visit_id: int) -> list:
    cols = _INSERT_COLS
    vals = [site_id, visit_id] + [d.get(c) for c in READING_ITEM_FIELDS]
    vals[cols.index("compensated")] = 1 if d.get("compensated") else 0
    vals[cols.index("note")] = d.get("note") or ""
    vals[cols.index("flags")] = d.get("flags") or ""
    vals[cols.index("app_version")] = d.get("app_version") or "unknown"
    vals[cols.index("recorded_at")] = d.get("recorded_at") or utc_now()
    return vals


def _insert_rows(conn, sites: dict, fresh: list) -> list:
    """Insert the new readings; a correction is linked to the version it
    corrects only while that version is still current (here or earlier in
    the batch). Returns (uuid, supersedes uuid) of those kept for review."""
    target_ids, taken = _targets_taken(conn, fresh)
    by_uuid_in_batch = {d["uuid"] for d in fresh}
    claimed: set[str] = set()
    rows, review = [], []
    visits: dict = {}
    for d in fresh:
        sid = _site_id(conn, sites, clean_site_name(d["site"]))
        vid = _visit_id(conn, visits, sid, d["taken_at"], d.get("visited_by") or "")
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
        rows.append(_row_values(d, sid, vid) + [link])
    n = len(_INSERT_COLS)
    conn.executemany(readings_insert_sql(_INSERT_COLS, ", supersedes_id",
                                         f", (SELECT id FROM readings WHERE uuid = ?{n + 1})",
                                         dialect=dialect(conn)),
                     rows)
    return review


def _insert_origins(conn, fresh: list, new_ids: dict, default_origin: dict | None) -> None:
    """Who took each new reading: the item's origin, else ``default_origin``."""
    origins = []
    for d in fresh:
        o = d.get("origin") or default_origin
        if o:
            origins.append((new_ids[d["uuid"]], str(o["log_uuid"])[:80],
                            str(o.get("device_name") or "")[:PERSON_MAX],
                            (str(o["person"])[:PERSON_MAX] if o.get("person") else None)))
    conn.executemany("INSERT INTO reading_origin (reading_id, log_uuid, device_name, person) "
                     "VALUES (?, ?, ?, ?) ON CONFLICT (reading_id) DO NOTHING", origins)


def apply_readings(conn, sites: dict, readings: list, default_origin: dict | None = None
                   ) -> dict:
    """New readings by uuid (a uuid here already is a resend: nothing
    changes; one that names another reading is refused item by item and
    reported). A correction of a version that another correction replaced
    already (two devices corrected the same reading) is kept without its
    supersedes link and marked for review with the version it was made to
    correct. Returns counts, the uuids refused and the new readings' ids."""
    checked = [_check_reading_item(d, i) for i, d in enumerate(readings or [])]
    fresh, dup, refused = _sort_fresh(conn, checked)
    if not fresh:
        return {"new": 0, "duplicate": dup, "refused": refused, "review": 0, "ids": []}
    review = _insert_rows(conn, sites, fresh)
    new_ids = _uuid_ids(conn, [d["uuid"] for d in fresh])
    now = utc_now()
    conn.executemany("INSERT INTO reading_review (reading_id, supersedes_uuid, noted_at) "
                     "VALUES (?, ?, ?) ON CONFLICT (reading_id) DO NOTHING",
                     [(new_ids[u], s, now) for u, s in review])
    _insert_origins(conn, fresh, new_ids, default_origin)
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

