"""SQLite storage: schema, migrations, queries. The only module that speaks SQL.

The database is one file in WAL mode with foreign keys on and
``synchronous=FULL``, so a save that was acknowledged survives a crash or a
dead battery. Every write runs in an explicit transaction. Readings are
append-only (triggers refuse UPDATE and DELETE); a correction is a new row
pointing at the one it replaces, a void is a row in ``voids``.
"""
from __future__ import annotations

import datetime as dt
import json
import os
import sqlite3
from importlib import resources
from pathlib import Path
from typing import Iterator

DB_NAME = "fieldapp.sqlite3"
SITE_NAME_MAX = 120

#: Columns of a stored reading that come from the person (as entered).
INPUT_FIELDS = ("sample", "depth_cm", "value", "unit", "temp_c", "compensated", "ratio",
                "sp_pct", "texture", "salt_type", "tds_factor", "theta_g_pct", "matric_MPa",
                "meter", "replicate_group", "note", "taken_at")
#: Columns computed by science.convert, stored beside the input.
COMPUTED_FIELDS = ("ec25_dS_m", "ece_dS_m", "ece_method", "psi_s_MPa", "psi_s_method", "flags")
#: Values the site views read, kept as columns (schema 015) beside the result
#: JSON they are copied from, by the INSERT itself (:func:`readings_insert_sql`): the
#: interpretation of a site reads columns, never each reading's JSON.
VIEW_COLUMNS = {
    "ece_uncertainty_pct": "$.ece_uncertainty_pct",
    "ec_fc_dS_m": "$.soil_solution.ec_fc_dS_m",
    "psi_s_fc_MPa": "$.soil_solution.psi_s_fc_MPa",
    "ec_sw_dS_m": "$.soil_solution.ec_sw_dS_m",
    "psi_s_sw_MPa": "$.soil_solution.psi_s_sw_MPa",
    "psi_total_MPa": "$.soil_solution.psi_total_MPa",
    "margin_to_pwp_MPa": "$.soil_solution.margin_to_pwp_MPa",
}


def _view_values_sql(result_json: str) -> str:
    """The VIEW_COLUMNS values as SQL expressions over ``result_json`` (an
    expression: a column or a bound parameter)."""
    return ", ".join(f"json_extract({result_json}, '{p}')" for p in VIEW_COLUMNS.values())


def readings_insert_sql(cols: tuple, extra_cols: str = "", extra_vals: str = "") -> str:
    """INSERT INTO readings for these columns (``result_json`` among them) plus
    the VIEW_COLUMNS, computed in the same statement from the same JSON.
    Numbered parameters ?1..?n follow ``cols``; ``extra_vals`` may use ?n+1..."""
    params = ", ".join(f"?{i}" for i in range(1, len(cols) + 1))
    rj = f"?{cols.index('result_json') + 1}"
    return (f"INSERT INTO readings ({', '.join(cols)}, {', '.join(VIEW_COLUMNS)}{extra_cols}) "
            f"VALUES ({params}, {_view_values_sql(rj)}{extra_vals})")


class StoreError(Exception):
    """A storage problem the user must hear about (corrupt file, conflict...)."""

    def __init__(self, message: str, field: str | None = None, status: int = 400):
        super().__init__(message)
        self.message = message
        self.field = field
        self.status = status


def utc_now() -> str:
    return dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds")


def _migrations() -> list[tuple[int, str]]:
    files = sorted(p for p in resources.files("fieldapp").joinpath("schema").iterdir()
                   if p.name.endswith(".sql"))
    return [(int(p.name.split("_", 1)[0]), p.read_text(encoding="utf-8")) for p in files]


def connect(path: str | Path, upgrade: bool = True, check: bool = True) -> sqlite3.Connection:
    """Open (creating if needed) the database and bring its schema up to date.

    ``upgrade=False`` skips the checks and migrations (per-request connections
    of a server that already ran them at start-up).

    A file that is not a SQLite database, or a SQLite database of another
    program, raises StoreError and is left untouched.
    """
    path = Path(path)
    if upgrade and check and path.exists():
        state = inspect_log(path)            # an empty or damaged log is never written
        if state["state"] != "ok":
            raise StoreError(state["problem"], status=503)
    existed = path.exists() and path.stat().st_size > 0
    conn = sqlite3.connect(path, timeout=30, isolation_level=None,
                           check_same_thread=False)
    conn.row_factory = sqlite3.Row
    conn.execute("PRAGMA foreign_keys = ON")
    conn.execute("PRAGMA busy_timeout = 30000")
    if not upgrade:
        conn.execute("PRAGMA synchronous = FULL")
        return conn
    try:
        conn.execute("PRAGMA synchronous = FULL")
        if existed:
            tables = {r[0] for r in conn.execute(
                "SELECT name FROM sqlite_master WHERE type='table'")}
            if tables and "readings" not in tables:
                raise StoreError(f"{path} is a database of another program; fieldapp will "
                                 "not touch it. Choose another --data folder.", status=500)
            _check_version(conn)   # before anything writes to the file
        conn.execute("PRAGMA journal_mode = WAL")
        migrate(conn)
    except sqlite3.OperationalError as e:
        conn.close()
        msg = str(e).lower()
        why = unwritable_reason(path.parent, msg)
        if why:
            err = StoreError(f"fieldapp cannot write to the log: {why}. The log itself is "
                             "not damaged. Free some space or make the folder writable, or "
                             "choose another --data folder.", status=503)
            err.unwritable = why
            raise err from None
        if "unable to open" in msg:
            raise StoreError(f"fieldapp cannot open {path} ({e}): check the folder's "
                             "permissions, or choose another --data folder.",
                             status=503) from None
        raise StoreError(f"{path} is not a readable fieldapp database ({e}). It was left as "
                         "it is; restore a backup or choose another --data folder.",
                         status=500) from None
    except sqlite3.DatabaseError as e:
        conn.close()
        raise StoreError(f"{path} is not a readable fieldapp database ({e}). It was left as "
                         "it is; restore a backup or choose another --data folder.",
                         status=500) from None
    except StoreError:
        conn.close()
        raise
    return conn


def _check_version(conn: sqlite3.Connection) -> int:
    current = conn.execute("PRAGMA user_version").fetchone()[0]
    newest = max(v for v, _ in _migrations())
    if current > newest:
        raise StoreError(f"this database was written by a newer fieldapp (schema {current}, "
                         f"this program knows {newest}); update fieldapp.", status=500)
    return current


def migrate(conn: sqlite3.Connection) -> int:
    """Apply every schema file newer than the database's user_version."""
    current = _check_version(conn)
    known = _migrations()
    for version, sql in known:
        if version <= current:
            continue
        conn.execute("BEGIN IMMEDIATE")
        try:
            # executescript would commit on its own; run statements one by one.
            for stmt in _split_sql(sql):
                conn.execute(stmt)
            conn.execute(f"PRAGMA user_version = {version:d}")
            conn.execute("COMMIT")
        except BaseException:
            conn.execute("ROLLBACK")
            raise
    return conn.execute("PRAGMA user_version").fetchone()[0]


def _split_sql(script: str) -> list[str]:
    stmts, buf = [], ""
    for line in script.splitlines(keepends=True):
        if line.lstrip().startswith("--") and not buf.strip():
            continue
        buf += line
        if sqlite3.complete_statement(buf):
            stmts.append(buf.strip())
            buf = ""
    if buf.strip():
        stmts.append(buf.strip())
    return stmts


class transaction:
    """``with transaction(conn):`` — BEGIN IMMEDIATE ... COMMIT, or ROLLBACK on
    error. Inside an open transaction it becomes a SAVEPOINT, so a function
    that writes can be called alone or as part of a larger all-or-nothing job
    (an import)."""

    def __init__(self, conn: sqlite3.Connection):
        self.conn = conn
        self.nested = False

    def __enter__(self):
        self.nested = self.conn.in_transaction
        self.conn.execute("SAVEPOINT tx" if self.nested else "BEGIN IMMEDIATE")
        return self.conn

    def __exit__(self, exc_type, exc, tb):
        # After some errors (SQLITE_FULL, SQLITE_IOERR) SQLite has already rolled
        # the transaction back; a second ROLLBACK would hide the real cause.
        if not self.conn.in_transaction:
            return False
        if self.nested:
            if exc_type:
                self.conn.execute("ROLLBACK TO tx")
            self.conn.execute("RELEASE tx")
        else:
            self.conn.execute("ROLLBACK" if exc_type else "COMMIT")
        return False


# ---------------------------------------------------------------- sites

def clean_site_name(name) -> str:
    name = " ".join(str(name or "").split())
    if not name:
        raise StoreError("Type a site name, e.g. Block 3.", "site")
    if len(name) > SITE_NAME_MAX:
        raise StoreError(f"Site names are at most {SITE_NAME_MAX} characters; shorten it.",
                         "site")
    if any(ord(c) < 32 for c in name):
        raise StoreError("Site names cannot contain control characters.", "site")
    return name


def get_site(conn, name_or_id, former_names: bool = True) -> sqlite3.Row | None:
    """A site by id or by name. A name no site holds now finds the site that
    held it last (a reading queued on a tablet before the site was renamed);
    ``former_names=False`` looks at current names only."""
    if isinstance(name_or_id, int):
        return conn.execute("SELECT * FROM sites WHERE id = ?", (name_or_id,)).fetchone()
    name = " ".join(str(name_or_id).split())
    row = conn.execute("SELECT * FROM sites WHERE name = ?", (name,)).fetchone()
    if row is None and former_names:
        row = site_by_former_name(conn, name)
    return row


def ensure_site(conn, name: str, former_names: bool = True, **attrs) -> sqlite3.Row:
    """Return the site called ``name`` (or, with ``former_names``, the site
    renamed away from it), creating it (inside the caller's transaction) if it
    does not exist. The creation is the first entry of the site's history."""
    name = clean_site_name(name)
    row = get_site(conn, name, former_names=former_names)
    if row is None:
        conn.execute(
            "INSERT INTO sites (name, crop, latitude, longitude, sp_pct, texture, kind, notes,"
            " created_at) VALUES (?,?,?,?,?,?,?,?,?)",
            (name, attrs.get("crop"), attrs.get("latitude"), attrs.get("longitude"),
             attrs.get("sp_pct"), attrs.get("texture"), attrs.get("kind") or "field",
             attrs.get("notes") or "", utc_now()))
        row = get_site(conn, name, former_names=False)
        _record_site_history(conn, row["id"], "created",
                             {k: (None, row[k]) for k in SITE_SETTINGS})
    return row


SITE_EDITABLE = ("crop", "latitude", "longitude", "sp_pct", "texture", "kind", "notes")


def update_site(conn, site_id: int, **attrs) -> sqlite3.Row:
    """Change some settings of a site; the change is kept in its history."""
    return change_site_settings(conn, site_id, attrs)[0]


# ---- site settings and their history (schema/006_site_settings.sql)

#: The settings kept in site_history, in the order they are shown.
SITE_SETTINGS = ("name", "kind", "crop", "texture", "sp_pct", "latitude", "longitude", "notes")


def _history_text(value) -> str | None:
    if value is None or value == "":
        return None
    if isinstance(value, float):
        return repr(value)
    return str(value)


def _record_site_history(conn, site_id: int, action: str, changes: dict,
                         when: str | None = None) -> int | None:
    """Append one change (``{field: (old, new)}``) to the site's history,
    inside the caller's transaction; fields whose value did not change are
    left out. Returns the change number, or None when nothing changed."""
    rows = [(f, _history_text(o), _history_text(n)) for f, (o, n) in changes.items()]
    rows = [r for r in rows if r[1] != r[2]]
    if not rows:
        return None
    no = conn.execute("SELECT COALESCE(MAX(change_no), 0) + 1 FROM site_history "
                      "WHERE site_id = ?", (site_id,)).fetchone()[0]
    when = when or utc_now()
    conn.executemany(
        "INSERT INTO site_history (site_id, change_no, changed_at, action, field, old_value,"
        " new_value) VALUES (?,?,?,?,?,?,?)",
        [(site_id, no, when, action, f, o, n) for f, o, n in rows])
    return no


def change_site_settings(conn, site_id: int, attrs: dict) -> tuple[sqlite3.Row, int | None]:
    """Change a site's settings (any of SITE_SETTINGS) and keep the change in
    its history, in one transaction. Returns (the site, change number or None
    when nothing changed). A name another site holds answers 409."""
    with transaction(conn):
        old = get_site(conn, site_id)
        if old is None:
            raise StoreError("No such site.", "site", 404)
        cols = [k for k in SITE_SETTINGS if k in attrs]
        if "crop" in cols and str(old["crop"] or "").lower() == str(attrs["crop"] or "").lower():
            cols.remove("crop")      # the same crop spelt in another case is no change
        if "name" in attrs:
            attrs = {**attrs, "name": clean_site_name(attrs["name"])}
            other = get_site(conn, attrs["name"], former_names=False)
            if other is not None and other["id"] != site_id:
                raise StoreError(f"Another site is called {other['name']!r} already; choose "
                                 "another name.", "name", 409)
        if "kind" in attrs and not attrs["kind"]:
            attrs = {**attrs, "kind": "field"}
        if "notes" in attrs and attrs["notes"] is None:
            attrs = {**attrs, "notes": ""}
        no = None
        if cols:
            try:
                conn.execute(f"UPDATE sites SET {', '.join(c + ' = ?' for c in cols)} "
                             "WHERE id = ?", [attrs[c] for c in cols] + [site_id])
            except sqlite3.IntegrityError as e:
                raise StoreError(f"These settings could not be kept ({e}).", None, 409) from None
            no = _record_site_history(conn, site_id, "changed",
                                      {c: (old[c], attrs[c]) for c in cols})
        row = get_site(conn, site_id)
    return row, no


def site_history(conn, site_id: int) -> list[dict]:
    """Every kept change of a site's settings, oldest first: one dict per
    setting per change (change_no, changed_at, action, field, old_value, new_value)."""
    return [dict(r) for r in conn.execute(
        "SELECT change_no, changed_at, action, field, old_value, new_value FROM site_history "
        "WHERE site_id = ? ORDER BY change_no, id", (site_id,))]


def site_by_former_name(conn, name: str) -> sqlite3.Row | None:
    """The site that was last renamed away from ``name`` (case ignored), if any."""
    row = conn.execute(
        "SELECT site_id FROM site_history WHERE field = 'name' AND action = 'changed' "
        "AND old_value = ? COLLATE NOCASE ORDER BY id DESC LIMIT 1", (name,)).fetchone()
    if row is None:
        return None
    return conn.execute("SELECT * FROM sites WHERE id = ?", (row[0],)).fetchone()


def list_sites(conn, where: str = "", args=(), limit: int | None = None
               ) -> list[sqlite3.Row]:
    """Every site (or, with ``where``/``limit``, one page of them: see
    :func:`sites_page`) with its reading count and latest current reading."""
    return conn.execute("""
        SELECT s.*,
               (SELECT COUNT(*) FROM readings r WHERE r.site_id = s.id) AS n_readings,
               l.taken_at AS last_taken_at, l.sample AS last_sample, l.value AS last_value,
               l.unit AS last_unit, l.ec25_dS_m AS last_ec25_dS_m, l.ece_dS_m AS last_ece_dS_m,
               l.flags AS last_flags
        FROM sites s
        LEFT JOIN readings l ON l.id = (
            SELECT r.id FROM readings r JOIN reading_status st ON st.id = r.id
            WHERE r.site_id = s.id AND st.status = 'current'
            ORDER BY r.taken_at DESC, r.id DESC LIMIT 1)
        """ + where + """
        ORDER BY s.name COLLATE NOCASE, s.id""" + (" LIMIT ?" if limit else ""),
        list(args) + ([limit] if limit else [])).fetchall()


def open_flag_counts(conn, site_ids=None) -> dict[int, int]:
    """Per site, how many current readings carry an error-level flag that
    nobody has acknowledged (a reading saved where the page could not check
    it: the sites list marks it until a correction or an acknowledgement
    settles it; "Save anyway" on the page acknowledges at once). ``site_ids``:
    only these sites (the page of the sites list being shown)."""
    only, args = "", []
    if site_ids is not None:
        site_ids = list(site_ids)
        if not site_ids:
            return {}
        only, args = f"AND r.site_id IN ({','.join('?' * len(site_ids))})", site_ids
    # reading_flags (schema 014): the error-level rows through their index,
    # then three unique-index probes each; no JSON is read.
    rows = conn.execute("""
        SELECT r.site_id, COUNT(DISTINCT f.reading_id)
        FROM reading_flags f
        JOIN readings r ON r.id = f.reading_id
        WHERE f.severity = 'error'
          AND NOT EXISTS (SELECT 1 FROM voids v WHERE v.reading_id = f.reading_id)
          AND NOT EXISTS (SELECT 1 FROM readings n WHERE n.supersedes_id = f.reading_id)
          AND NOT EXISTS (SELECT 1 FROM flag_acks a WHERE a.reading_id = f.reading_id
                          AND a.code = f.code)
          """ + only + """
        GROUP BY r.site_id""", args).fetchall()
    return {r[0]: r[1] for r in rows}


# ---------------------------------------------------------------- readings

def _visit_id(conn, site_id: int, taken_at: str, visited_by: str) -> int:
    day = taken_at[:10]
    conn.execute("INSERT OR IGNORE INTO visits (site_id, visit_date, visited_by) VALUES (?,?,?)",
                 (site_id, day, visited_by or ""))
    return conn.execute("SELECT id FROM visits WHERE site_id=? AND visit_date=? AND visited_by=?",
                        (site_id, day, visited_by or "")).fetchone()[0]


def get_reading(conn, uuid: str) -> sqlite3.Row | None:
    return conn.execute(_READING_SELECT + " WHERE r.uuid = ?", (uuid,)).fetchone()


_READING_SELECT = """
    SELECT r.*, s.name AS site, st.status, st.void_reason, st.corrected_by_uuid,
           p.uuid AS supersedes_uuid, v.visit_date, v.visited_by, vo.voided_at
    FROM readings r
    JOIN sites s ON s.id = r.site_id
    JOIN visits v ON v.id = r.visit_id
    JOIN reading_status st ON st.id = r.id
    LEFT JOIN readings p ON p.id = r.supersedes_id
    LEFT JOIN voids vo ON vo.reading_id = r.id"""


def existing_uuids(conn, uuids) -> set[str]:
    """Which of these reading uuids are in the log already."""
    uuids = list(uuids)
    found: set[str] = set()
    for k in range(0, len(uuids), 500):
        part = uuids[k:k + 500]
        found.update(r[0] for r in conn.execute(
            f"SELECT uuid FROM readings WHERE uuid IN ({','.join('?' * len(part))})", part))
    return found


def insert_reading(conn, rec: dict, site_attrs: dict | None = None,
                   fetch: bool = True) -> tuple[sqlite3.Row | None, bool]:
    """Store one reading; return (row, created).

    ``rec`` holds the INPUT_FIELDS, the COMPUTED_FIELDS, ``uuid``, ``site``,
    ``result_json``, ``app_version`` and optionally ``visited_by``,
    ``supersedes_uuid``, ``recorded_at``. The same uuid again returns the
    stored row and creates nothing (a resend from the outbox). A correction
    (``supersedes_uuid``) of a reading already corrected or voided is refused.
    """
    with transaction(conn):
        existing = None
        if conn.execute("SELECT 1 FROM readings WHERE uuid = ?", (rec["uuid"],)).fetchone():
            existing = get_reading(conn, rec["uuid"])
        if existing is not None:
            named = get_site(conn, rec["site"])   # the site may have been renamed since
            if (named is None or named["id"] != existing["site_id"]
                    or existing["value"] != rec["value"] or existing["unit"] != rec["unit"]):
                raise StoreError("This reading id was already used for a different reading; "
                                 "the stored one was kept.", "uuid", status=409)
            return existing, False
        site = ensure_site(conn, rec["site"], **(site_attrs or {}))
        supersedes_id = None
        if rec.get("supersedes_uuid"):
            old = get_reading(conn, rec["supersedes_uuid"])
            if old is None:
                raise StoreError("The reading to correct does not exist.", "supersedes", 404)
            if old["status"] != "current":
                raise StoreError(f"That reading is already {old['status']}; correct the "
                                 "newest version instead.", "supersedes", 409)
            if old["site_id"] != site["id"]:
                raise StoreError("A correction must stay on the same site.", "site", 409)
            supersedes_id = old["id"]
        visit_id = _visit_id(conn, site["id"], rec["taken_at"], rec.get("visited_by") or "")
        cols = ("uuid", "site_id", "visit_id", "supersedes_id") + INPUT_FIELDS + COMPUTED_FIELDS \
            + ("result_json", "app_version", "recorded_at")
        vals = [rec["uuid"], site["id"], visit_id, supersedes_id] \
            + [rec.get(k) for k in INPUT_FIELDS] + [rec.get(k) for k in COMPUTED_FIELDS] \
            + [rec["result_json"], rec["app_version"], rec.get("recorded_at") or utc_now()]
        vals[cols.index("compensated")] = 1 if rec.get("compensated") else 0
        vals[cols.index("note")] = rec.get("note") or ""
        vals[cols.index("flags")] = rec.get("flags") or ""
        conn.execute(readings_insert_sql(cols), vals)
        return (get_reading(conn, rec["uuid"]) if fetch else None), True


def insert_readings_bulk(conn, recs: list[dict]) -> int:
    """Insert many new readings (an import) inside the caller's transaction.

    The same columns as :func:`insert_reading`; sites and visits are created
    as needed; a correction's ``supersedes_uuid`` may name a reading earlier
    in the same list. The caller has checked that the uuids are new. One
    executemany instead of a round of queries per reading."""
    site_ids: dict[str, int] = {}
    visit_ids: dict[tuple, int] = {}
    cols = ("uuid", "site_id", "visit_id") + INPUT_FIELDS + COMPUTED_FIELDS \
        + ("result_json", "app_version", "recorded_at")
    rows = []
    for rec in recs:
        key = rec["site"].lower()
        if key not in site_ids:
            site_ids[key] = ensure_site(conn, rec["site"])["id"]
        sid = site_ids[key]
        vkey = (sid, rec["taken_at"][:10], rec.get("visited_by") or "")
        if vkey not in visit_ids:
            visit_ids[vkey] = _visit_id(conn, sid, rec["taken_at"], rec.get("visited_by") or "")
        vals = [rec["uuid"], sid, visit_ids[vkey]] + [rec.get(k) for k in INPUT_FIELDS] \
            + [rec.get(k) for k in COMPUTED_FIELDS] \
            + [rec["result_json"], rec["app_version"], rec.get("recorded_at") or utc_now()]
        vals[cols.index("compensated")] = 1 if rec.get("compensated") else 0
        vals[cols.index("note")] = rec.get("note") or ""
        vals[cols.index("flags")] = rec.get("flags") or ""
        rows.append(vals + [rec.get("supersedes_uuid")])
    try:
        conn.executemany(readings_insert_sql(cols, ", supersedes_id",
                                     f", (SELECT id FROM readings WHERE uuid = ?{len(cols) + 1})"),
                         rows)
    except sqlite3.IntegrityError as e:
        raise StoreError(f"The file corrects one reading twice or repeats a reading ({e}).",
                         "file", 400) from None
    return len(rows)


def void_reading(conn, uuid: str, reason: str, voided_at: str | None = None) -> sqlite3.Row:
    reason = " ".join(str(reason or "").split())
    if not reason:
        raise StoreError("Say why the reading is void (e.g. 'probe not rinsed').", "reason")
    with transaction(conn):
        row = get_reading(conn, uuid)
        if row is None:
            raise StoreError("No such reading.", "uuid", 404)
        if row["status"] == "void":
            return row
        if row["status"] == "corrected":
            raise StoreError("That reading was corrected; void the newest version.", "uuid", 409)
        conn.execute("INSERT INTO voids (reading_id, reason, voided_at) VALUES (?,?,?)",
                     (row["id"], reason, voided_at or utc_now()))
    return get_reading(conn, uuid)


# ---------------------------------------------------------------- meters and checks

def _meter_row_dict(row) -> dict:
    d = {k: row[k] for k in row.keys()}
    d["units"] = [u for u in (row["units"] or "").split(";") if u]
    d["ranges"] = json.loads(row["ranges_json"])
    d.pop("ranges_json")
    d["atc"] = bool(row["atc"])
    return d


def get_meter(conn, name_or_id) -> dict | None:
    if isinstance(name_or_id, int):
        row = conn.execute("SELECT * FROM meters WHERE id = ?", (name_or_id,)).fetchone()
    else:
        row = conn.execute("SELECT * FROM meters WHERE name = ?",
                           (" ".join(str(name_or_id).split()),)).fetchone()
    return None if row is None else _meter_row_dict(row)


def list_meters(conn) -> list[dict]:
    rows = conn.execute("SELECT * FROM meters ORDER BY name COLLATE NOCASE").fetchall()
    meters = [_meter_row_dict(r) for r in rows]
    for m in meters:
        m["last_check"] = last_calibration(conn, m["id"])
    return meters


def insert_meter(conn, m: dict) -> dict:
    """Store a meter profile (validated by the caller); names are unique."""
    with transaction(conn):
        if get_meter(conn, m["name"]) is not None:
            raise StoreError(f"A meter called {m['name']!r} exists already.", "name", 409)
        conn.execute(
            "INSERT INTO meters (name, units, ranges_json, accuracy_pct, atc, atc_coeff_pct,"
            " ref_temp_c, atc_min_c, atc_max_c, tds_factor, notes, created_at)"
            " VALUES (?,?,?,?,?,?,?,?,?,?,?,?)",
            (m["name"], ";".join(m["units"]), json.dumps(m["ranges"], ensure_ascii=False),
             m.get("accuracy_pct"), 1 if m.get("atc") else 0, m.get("atc_coeff_pct"),
             m.get("ref_temp_c") or 25.0, m.get("atc_min_c"), m.get("atc_max_c"),
             m.get("tds_factor"), m.get("notes") or "", utc_now()))
    return get_meter(conn, m["name"])


def insert_calibration(conn, c: dict) -> dict:
    with transaction(conn):
        cur = conn.execute(
            "INSERT INTO calibrations (meter_id, standard, standard_uS_cm, value, unit, temp_c,"
            " compensated, expected_uS_cm, measured_uS_cm, deviation_pct, tolerance_pct, passed,"
            " checked_at, note) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
            (c["meter_id"], c["standard"], c.get("standard_uS_cm"), c["value"], c["unit"],
             c.get("temp_c"), 1 if c.get("compensated") else 0, c["expected_uS_cm"],
             c["measured_uS_cm"], c["deviation_pct"], c["tolerance_pct"],
             1 if c["passed"] else 0, c.get("checked_at") or utc_now(), c.get("note") or ""))
        row = conn.execute("SELECT * FROM calibrations WHERE id = ?", (cur.lastrowid,)).fetchone()
    return _cal_dict(row)


def _cal_dict(row) -> dict:
    d = {k: row[k] for k in row.keys()}
    d["passed"] = bool(d["passed"])
    d["compensated"] = bool(d["compensated"])
    return d


def last_calibration(conn, meter_id: int, before_utc: str | None = None) -> dict | None:
    """The newest check of a meter (at or before ``before_utc``, an ISO UTC time)."""
    row = conn.execute("SELECT * FROM calibrations WHERE meter_id = ? AND checked_at <= ? "
                       "ORDER BY checked_at DESC, id DESC LIMIT 1",
                       (meter_id, before_utc or "9999")).fetchone()
    return None if row is None else _cal_dict(row)


def list_calibrations(conn, meter_id: int) -> list[dict]:
    rows = conn.execute("SELECT * FROM calibrations WHERE meter_id = ? "
                        "ORDER BY checked_at DESC, id DESC", (meter_id,)).fetchall()
    return [_cal_dict(r) for r in rows]


#: The history check compares a reading with this many latest readings of the
#: same site, kind and depth: recent enough to follow a real trend, enough
#: for a robust median, and a save costs the same however long the log grows.
HISTORY_WINDOW = 50


def history_values(conn, site_id: int, sample: str, depth_cm, exclude_uuid=None,
                   before: str | None = None) -> list[float]:
    """ECe (soil) or EC at 25 °C (other kinds) of the site's current readings of
    the same kind and depth, for the history check."""
    col = "ece_dS_m" if sample in ("paste", "extract") else "ec25_dS_m"
    sql = (f"SELECT r.{col} FROM readings r JOIN reading_status st ON st.id = r.id "
           "WHERE r.site_id = ? AND r.sample = ? AND st.status = 'current' "
           f"AND r.{col} IS NOT NULL AND r.uuid IS NOT ? ")
    args: list = [site_id, sample, exclude_uuid]
    if depth_cm is None:
        sql += "AND r.depth_cm IS NULL "
    else:
        sql += "AND abs(r.depth_cm - ?) < 0.5 "
        args.append(depth_cm)
    if before:
        sql += "AND r.taken_at < ? "
        args.append(before)
    sql += "ORDER BY r.taken_at DESC LIMIT ?"
    args.append(HISTORY_WINDOW)
    return [r[0] for r in conn.execute(sql, args)]


def replicate_values(conn, site_id: int, group: str, day: str, sample: str,
                     exclude_uuid=None) -> list[float]:
    """Values of the other current replicates of a sample (same site, group, day, kind)."""
    col = "ece_dS_m" if sample in ("paste", "extract") else "ec25_dS_m"
    rows = conn.execute(
        f"SELECT r.{col} FROM readings r JOIN reading_status st ON st.id = r.id "
        "WHERE r.site_id = ? AND r.replicate_group = ? AND substr(r.taken_at, 1, 10) = ? "
        f"AND r.sample = ? AND st.status = 'current' AND r.uuid IS NOT ? AND r.{col} IS NOT NULL",
        (site_id, group, day, sample, exclude_uuid)).fetchall()
    return [r[0] for r in rows]


def ack_flag(conn, uuid: str, code: str, note: str) -> dict:
    """Acknowledge a flag of a reading with a note (kept; a second ack of the
    same flag is refused so the first note stays)."""
    with transaction(conn):
        row = get_reading(conn, uuid)
        if row is None:
            raise StoreError("No such reading.", "uuid", 404)
        if code not in (row["flags"] or "").split(";"):
            raise StoreError(f"This reading has no flag {code!r}.", "code", 400)
        try:
            conn.execute("INSERT INTO flag_acks (reading_id, code, note, acked_at) "
                         "VALUES (?,?,?,?)", (row["id"], code, note, utc_now()))
        except sqlite3.IntegrityError:
            raise StoreError("This flag was acknowledged already.", "code", 409) from None
    return acks_for_readings(conn, [row["id"]])[row["id"]]


def acked_reading_ids(conn) -> set[int]:
    return {r[0] for r in conn.execute("SELECT DISTINCT reading_id FROM flag_acks")}


def insert_ack(conn, reading_id: int, code: str, note: str, acked_at: str | None = None):
    """Low-level: one acknowledgement row (the caller holds the transaction)."""
    conn.execute("INSERT INTO flag_acks (reading_id, code, note, acked_at) VALUES (?,?,?,?)",
                 (reading_id, code, note, acked_at or utc_now()))


def insert_void(conn, reading_id: int, reason: str, voided_at: str | None = None):
    """Low-level: one void row (the caller holds the transaction and checked status)."""
    conn.execute("INSERT INTO voids (reading_id, reason, voided_at) VALUES (?,?,?)",
                 (reading_id, reason, voided_at or utc_now()))


def acks_for_readings(conn, reading_ids) -> dict[int, list[dict]]:
    ids = list(reading_ids)
    out: dict[int, list[dict]] = {i: [] for i in ids}
    for k in range(0, len(ids), 500):
        part = ids[k:k + 500]
        for r in conn.execute(
                f"SELECT reading_id, code, note, acked_at FROM flag_acks WHERE reading_id IN "
                f"({','.join('?' * len(part))}) ORDER BY id", part):
            out[r["reading_id"]].append({"code": r["code"], "note": r["note"],
                                         "acked_at": r["acked_at"]})
    return out


def list_readings(conn, site_id: int | None = None, sample: str | None = None,
                  date_from: str | None = None, date_to: str | None = None,
                  newest_first: bool = True) -> list[sqlite3.Row]:
    return list(iter_readings(conn, site_id, sample, date_from, date_to, newest_first))


def iter_readings(conn, site_id=None, sample=None, date_from=None, date_to=None,
                  newest_first=False) -> Iterator[sqlite3.Row]:
    """Stream readings (every version) without loading them all into memory."""
    where, args = _reading_filters(site_id, sample, date_from, date_to)
    sql = _READING_SELECT + (" WHERE " + " AND ".join(where) if where else "")
    sql += " ORDER BY r.taken_at DESC, r.id DESC" if newest_first else " ORDER BY r.id"
    cur = conn.execute(sql, args)
    while True:
        rows = cur.fetchmany(500)
        if not rows:
            break
        yield from rows


#: Kept out of the API's record: internal keys, and the view columns (copies of
#: values the record's ``result`` holds already; schema 015).
_NOT_IN_RECORD = frozenset(("result_json", "visit_id", "supersedes_id", *VIEW_COLUMNS))


#: How a reading stored before schema 016 carries its water type: only inside
#: its result JSON (written compact by records.build_record).
_SEA_SALT_IN_JSON = '"salt_type":"sea_salt"'


def stored_salt_type(row) -> str | None:
    """The water type of a stored reading: its ``salt_type`` column (schema
    016), or for a reading stored before that version the one kept in its
    result JSON. None: mixed salts or not said."""
    value = row["salt_type"]
    if value:
        return value
    rj = row["result_json"] if "result_json" in row.keys() else None
    return "sea_salt" if rj and _SEA_SALT_IN_JSON in rj else None


def reading_dict(row: sqlite3.Row) -> dict:
    """A stored reading as JSON-ready dict (the API's record)."""
    d = {k: row[k] for k in row.keys() if k not in _NOT_IN_RECORD}
    d["salt_type"] = stored_salt_type(row)
    d["compensated"] = bool(d["compensated"])
    d["flags"] = [c for c in (row["flags"] or "").split(";") if c]
    d["result"] = json.loads(row["result_json"])
    return d


# ---- site views

_VIEW_SELECT = f"""
    SELECT r.id, r.uuid, r.sample, r.depth_cm, r.taken_at, r.ratio, r.theta_g_pct,
           r.matric_MPa, r.meter, r.ec25_dS_m, r.ece_dS_m, r.ece_method, r.flags,
           {', '.join('r.' + c for c in VIEW_COLUMNS)}, v.visit_date, st.status,
           CASE WHEN r.flags = '' THEN '' ELSE
               (SELECT group_concat(f.code || ' ' || f.severity, ';') FROM reading_flags f
                WHERE f.reading_id = r.id) END AS flag_rows
    FROM readings r
    JOIN visits v ON v.id = r.visit_id
    JOIN reading_status st ON st.id = r.id"""


def view_readings(conn, site_id: int) -> list[dict]:
    """Every reading version of a site, oldest id first, as the site views
    (``interpret``) read them: the columns they use, the view columns of
    schema 015 and the flags from ``reading_flags`` (``flag_list``: code and
    severity, in the reading's order), without the result JSON."""
    out = []
    for row in conn.execute(_VIEW_SELECT + " WHERE r.site_id = ? ORDER BY r.id", (site_id,)):
        d = dict(zip(row.keys(), row))
        d["flags"] = [c for c in d["flags"].split(";") if c]
        fl = d.pop("flag_rows")
        sev = dict(x.split(" ", 1) for x in fl.split(";")) if fl else {}
        d["flag_list"] = [{"code": c, "severity": sev.get(c)} for c in d["flags"]]
        out.append(d)
    return out

def visits_for_site(conn, site_id: int) -> list[sqlite3.Row]:
    """The site's visits, newest first, with how many readings (all versions)
    and how many current ones each holds."""
    return conn.execute("""
        SELECT v.id, v.site_id, v.visit_date, v.visited_by,
               COUNT(r.id) AS n_readings,
               SUM(CASE WHEN st.status = 'current' THEN 1 ELSE 0 END) AS n_current
        FROM visits v
        JOIN readings r ON r.visit_id = v.id
        JOIN reading_status st ON st.id = r.id
        WHERE v.site_id = ?
        GROUP BY v.id
        ORDER BY v.visit_date DESC, v.id DESC""", (site_id,)).fetchall()


def get_visit(conn, visit_id: int) -> sqlite3.Row | None:
    return conn.execute("SELECT * FROM visits WHERE id = ?", (visit_id,)).fetchone()


def readings_for_visit(conn, visit_id: int) -> list[sqlite3.Row]:
    """Every reading of a visit (current, corrected and void), in the order taken."""
    return conn.execute(_READING_SELECT + " WHERE r.visit_id = ? ORDER BY r.taken_at, r.id",
                        (visit_id,)).fetchall()


def list_targets(conn, crop: str | None = None) -> list[dict]:
    """The user's target ranges, optionally for one crop."""
    sql, args = "SELECT * FROM targets", ()
    if crop:
        sql, args = sql + " WHERE crop = ?", (crop,)
    return [dict(r) for r in conn.execute(sql + " ORDER BY crop COLLATE NOCASE, measure", args)]


def save_target(conn, t: dict) -> tuple[dict, bool]:
    """Insert or replace the target of (crop, measure); returns (row, created)."""
    with transaction(conn):
        old = conn.execute("SELECT id FROM targets WHERE crop = ? AND measure = ?",
                           (t["crop"], t["measure"])).fetchone()
        conn.execute(
            "INSERT INTO targets (crop, measure, lo_dS_m, hi_dS_m, note, updated_at) "
            "VALUES (?,?,?,?,?,?) ON CONFLICT (crop, measure) DO UPDATE SET "
            "lo_dS_m = excluded.lo_dS_m, hi_dS_m = excluded.hi_dS_m, note = excluded.note, "
            "updated_at = excluded.updated_at",
            (t["crop"], t["measure"], t.get("lo_dS_m"), t.get("hi_dS_m"), t.get("note") or "",
             utc_now()))
        row = conn.execute("SELECT * FROM targets WHERE crop = ? AND measure = ?",
                           (t["crop"], t["measure"])).fetchone()
    return dict(row), old is None


def delete_target(conn, target_id: int) -> bool:
    """Remove a target range (a setting, not a reading); False if none."""
    with transaction(conn):
        cur = conn.execute("DELETE FROM targets WHERE id = ?", (target_id,))
    return cur.rowcount > 0


# ---- pairing/backup

def active_pairing_codes(conn, now: str) -> list[sqlite3.Row]:
    """Pairing codes neither revoked nor expired at ``now`` (UTC ISO 8601)."""
    return conn.execute("SELECT * FROM pairing_codes WHERE revoked_at IS NULL AND "
                        "expires_at > ? ORDER BY id DESC", (now,)).fetchall()


def insert_pairing_code(conn, code: str, expires_at: str,
                        replace_active: bool = True) -> sqlite3.Row:
    """A new pairing code; by default the codes still active are revoked, so
    one code is valid at a time."""
    now = utc_now()
    with transaction(conn):
        if replace_active:
            conn.execute("UPDATE pairing_codes SET revoked_at = ? WHERE revoked_at IS NULL",
                         (now,))
        cur = conn.execute("INSERT INTO pairing_codes (code, created_at, expires_at) "
                           "VALUES (?,?,?)", (code, now, expires_at))
    return conn.execute("SELECT * FROM pairing_codes WHERE id = ?", (cur.lastrowid,)).fetchone()


def revoke_pairing_codes(conn, code_id: int | None = None) -> int:
    """Revoke one code, or every code still open; returns how many."""
    with transaction(conn):
        if code_id is None:
            cur = conn.execute("UPDATE pairing_codes SET revoked_at = ? "
                               "WHERE revoked_at IS NULL", (utc_now(),))
        else:
            cur = conn.execute("UPDATE pairing_codes SET revoked_at = ? "
                               "WHERE id = ? AND revoked_at IS NULL", (utc_now(), code_id))
    return cur.rowcount


def insert_device(conn, token_sha256: str, label: str, user_agent: str, address: str,
                  code_id: int | None) -> sqlite3.Row:
    now = utc_now()
    with transaction(conn):
        cur = conn.execute(
            "INSERT INTO paired_devices (token_sha256, label, user_agent, address, code_id, "
            "paired_at, last_seen_at) VALUES (?,?,?,?,?,?,?)",
            (token_sha256, label, user_agent, address, code_id, now, now))
    return conn.execute("SELECT * FROM paired_devices WHERE id = ?",
                        (cur.lastrowid,)).fetchone()


def device_by_token(conn, token_sha256: str) -> sqlite3.Row | None:
    """The paired device holding this token, unless it was unpaired."""
    return conn.execute("SELECT * FROM paired_devices WHERE token_sha256 = ? AND "
                        "revoked_at IS NULL", (token_sha256,)).fetchone()


def touch_device(conn, device_id: int, address: str) -> None:
    with transaction(conn):
        conn.execute("UPDATE paired_devices SET last_seen_at = ?, address = ? WHERE id = ?",
                     (utc_now(), address, device_id))


def list_devices(conn) -> list[sqlite3.Row]:
    return conn.execute("SELECT * FROM paired_devices ORDER BY revoked_at IS NOT NULL, "
                        "paired_at DESC").fetchall()


def note_reading_device(conn, reading_id: int, device_id: int) -> None:
    """Remember which paired tablet sent a new reading (schema/012_reading_devices.sql)."""
    with transaction(conn):
        conn.execute("INSERT OR IGNORE INTO reading_devices (reading_id, device_id) "
                     "VALUES (?, ?)", (reading_id, device_id))


def device_reading_counts(conn) -> dict[int, int]:
    """device id -> how many readings (versions included) it sent."""
    return {r[0]: r[1] for r in conn.execute(
        "SELECT device_id, COUNT(*) FROM reading_devices GROUP BY device_id")}


def revoke_devices(conn, device_id: int | None = None) -> int:
    """Unpair one device, or every paired device; returns how many."""
    with transaction(conn):
        if device_id is None:
            cur = conn.execute("UPDATE paired_devices SET revoked_at = ? "
                               "WHERE revoked_at IS NULL", (utc_now(),))
        else:
            cur = conn.execute("UPDATE paired_devices SET revoked_at = ? "
                               "WHERE id = ? AND revoked_at IS NULL", (utc_now(), device_id))
    return cur.rowcount


def integrity_problems(conn, quick: bool = False) -> list[str]:
    """SQLite's own check of every page and index; an empty list means sound."""
    rows = conn.execute("PRAGMA quick_check" if quick else "PRAGMA integrity_check").fetchall()
    found = [r[0] for r in rows]
    return [] if found == ["ok"] else found


def log_summary(conn) -> dict:
    """What a log holds, to tell a user what a backup or restore carries."""
    tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='table'")}
    if "readings" not in tables or "sites" not in tables:
        raise StoreError("This is not a fieldapp log (no readings table).", "file")
    return {
        "schema": conn.execute("PRAGMA user_version").fetchone()[0],
        "readings": conn.execute("SELECT COUNT(*) FROM readings").fetchone()[0],
        "sites": conn.execute("SELECT COUNT(*) FROM sites").fetchone()[0],
        "newest": conn.execute("SELECT MAX(recorded_at) FROM readings").fetchone()[0],
    }


def readings_brief(conn, uuids) -> dict[str, dict]:
    """What an import compares for readings already in the log, by uuid: site
    name, value, unit, status, what it corrects and what corrected it. One
    query per 500 uuids instead of one per reading."""
    uuids = list(uuids)
    out: dict[str, dict] = {}
    for k in range(0, len(uuids), 500):
        part = uuids[k:k + 500]
        for r in conn.execute(
                "SELECT r.uuid, s.name AS site, r.value, r.unit, st.status, "
                "st.corrected_by_uuid, p.uuid AS supersedes_uuid, r.id "
                "FROM readings r JOIN sites s ON s.id = r.site_id "
                "JOIN reading_status st ON st.id = r.id "
                "LEFT JOIN readings p ON p.id = r.supersedes_id "
                f"WHERE r.uuid IN ({','.join('?' * len(part))})", part):
            out[r["uuid"]] = dict(r)
    return out


# ---- damaged, empty or unwritable logs (read-only rescue)

SQLITE_HEADER = b"SQLite format 3\x00"


def _ro_uri(path: Path, immutable: bool = False) -> str:
    from urllib.parse import quote
    return f"file:{quote(str(Path(path).resolve()))}?" + ("immutable=1" if immutable
                                                          else "mode=ro")


def connect_readonly(path: str | Path) -> sqlite3.Connection:
    """Open the log so that nothing can be written through this connection
    (a damaged log, a read-only folder, a full disk). ``mode=ro`` first; in a
    read-only folder SQLite cannot make its shared-memory file, and then the
    file is opened as immutable, which is exact as long as no write-ahead log
    holds unmerged pages (checked: otherwise the error says so)."""
    path = Path(path)
    try:
        conn = sqlite3.connect(_ro_uri(path), uri=True, timeout=30, isolation_level=None,
                               check_same_thread=False)
        conn.execute("SELECT count(*) FROM sqlite_master").fetchone()
    except sqlite3.OperationalError:
        wal = path.with_name(path.name + "-wal")
        if wal.exists() and wal.stat().st_size > 0:
            raise
        conn = sqlite3.connect(_ro_uri(path, immutable=True), uri=True, timeout=30,
                               isolation_level=None, check_same_thread=False)
    conn.row_factory = sqlite3.Row
    conn.execute("PRAGMA query_only = ON")
    return conn


def _restore_hint(path: Path) -> str:
    return (f"Restore a backup with: python -m fieldapp restore --data {path.parent} "
            "BACKUP_FILE (stop the server first); the damaged file is kept beside it.")


def inspect_log(path: str | Path) -> dict:
    """What state the log file is in, without writing anything to it.

    Returns {"state": ..., "problem": text or None}; state is "new" (no file
    yet), "ok", "damaged" (opens, but SQLite's quick_check finds damage: the
    server may start read-only for rescue), or "refused" (an empty file, not
    a database, another program's or a newer fieldapp's database: nothing can
    be rescued through fieldapp and nothing is touched)."""
    path = Path(path)
    if not path.exists():
        return {"state": "new", "problem": None}
    size = path.stat().st_size
    wal = path.with_name(path.name + "-wal")
    if size == 0:
        extra = (f" A write-ahead file {wal.name} of {wal.stat().st_size} bytes lies beside "
                 "it: keep both files." if wal.exists() and wal.stat().st_size else "")
        return {"state": "refused", "problem": (
            f"{path} is empty (0 bytes): the log was cut short or never written. fieldapp "
            "will not start a new log over it." + extra + " " + _restore_hint(path)
            + " If this folder never held a log, delete the empty file.")}
    try:
        with open(path, "rb") as f:
            head = f.read(16)
    except OSError as e:
        return {"state": "refused", "problem": f"{path} cannot be read ({e.strerror})."}
    if head != SQLITE_HEADER:
        return {"state": "refused", "problem": (
            f"{path} is not a readable fieldapp log (not a SQLite database, or its first "
            "page is damaged). It was left as it is. " + _restore_hint(path))}
    try:
        conn = connect_readonly(path)
    except sqlite3.Error as e:
        return {"state": "refused", "problem": f"{path} cannot be opened ({e}). "
                + _restore_hint(path)}
    try:
        tables = {r[0] for r in conn.execute(
            "SELECT name FROM sqlite_master WHERE type='table'")}
        if tables and "readings" not in tables:
            return {"state": "refused", "problem": (
                f"{path} is a database of another program; fieldapp will not touch it. "
                "Choose another --data folder.")}
        version = conn.execute("PRAGMA user_version").fetchone()[0]
        if version > max(v for v, _ in _migrations()):
            return {"state": "refused", "problem": (
                f"this database was written by a newer fieldapp (schema {version}); "
                "update fieldapp.")}
        problems = integrity_problems(conn, quick=True)
    except sqlite3.DatabaseError as e:
        problems = [str(e)]
    finally:
        conn.close()
    if problems:
        return {"state": "damaged", "problem": (
            f"The log {path} is damaged (SQLite quick_check: {problems[0][:200]}). fieldapp "
            "opened it read-only and writes nothing to it: export what can still be read "
            "(the Export link, or python -m fieldapp export), then " + _restore_hint(path)[0]
            .lower() + _restore_hint(path)[1:])}
    return {"state": "ok", "problem": None}


def unwritable_reason(folder: str | Path, error: str = "") -> str | None:
    """Why the log's folder cannot take a write now, in words, or None."""
    import shutil
    folder = Path(folder)
    if "readonly" in error or "read-only" in error or not os.access(folder, os.W_OK):
        return (f"the folder {folder} is read-only (a write-protected card or a file system "
                "mounted read-only)")
    try:
        free = shutil.disk_usage(folder).free
    except OSError:
        free = None
    if "full" in error or (free is not None and free < 1 << 20):
        return f"the disk holding {folder} is full ({(free or 0) // 1024} KiB free)"
    return None


def iter_readings_keyset(conn, site_id: int | None = None, batch: int = 500,
                         skip_damaged: bool = True, report: dict | None = None
                         ) -> Iterator[sqlite3.Row]:
    """Every reading version in id order, fetched in keyset batches (``id > last``),
    each batch its own short read: a long export never holds one read open.

    With ``skip_damaged`` a batch that SQLite cannot read (a damaged page) is
    stepped over one id at a time, so an export of a damaged log rescues every
    row that can still be read; ``report["skipped"]`` counts the ids passed over."""
    where = " AND r.site_id = ?" if site_id is not None else ""
    sql = _READING_SELECT + " WHERE r.id > ?" + where + " ORDER BY r.id LIMIT ?"
    one = _READING_SELECT + " WHERE r.id = ?" + where
    last, skipped, top = 0, 0, None
    while True:
        args = [last] + ([site_id] if site_id is not None else []) + [batch]
        try:
            rows = conn.execute(sql, args).fetchall()
        except sqlite3.DatabaseError:
            if not skip_damaged:
                raise
            if top is None:
                try:
                    top = conn.execute("SELECT max(id) FROM readings").fetchone()[0] or 0
                except sqlite3.DatabaseError:
                    top = last + 1_000_000
            rows = []
            while not rows and last < top:
                last += 1
                try:
                    rows = conn.execute(one, [last] + ([site_id] if site_id is not None
                                                       else [])).fetchall()
                except sqlite3.DatabaseError:
                    skipped += 1
            if report is not None:
                report["skipped"] = skipped
            if not rows:
                return
        if not rows:
            return
        yield from rows
        last = rows[-1]["id"]


# ---- pairing limiter and bounds (schema 010)

def pairing_failure_counts(conn, address: str, since: float) -> dict:
    """Wrong codes since ``since`` (epoch seconds): from this address and
    overall, with the oldest time of each (for Retry-After)."""
    a = conn.execute("SELECT COUNT(*), MIN(failed_at) FROM pairing_failures "
                     "WHERE address = ? AND failed_at > ?", (address, since)).fetchone()
    t = conn.execute("SELECT COUNT(*), MIN(failed_at) FROM pairing_failures "
                     "WHERE failed_at > ?", (since,)).fetchone()
    return {"address": a[0], "address_oldest": a[1], "overall": t[0], "overall_oldest": t[1]}


def add_pairing_failure(conn, address: str, at: float, prune_before: float) -> None:
    with transaction(conn):
        conn.execute("DELETE FROM pairing_failures WHERE failed_at <= ?", (prune_before,))
        conn.execute("INSERT INTO pairing_failures (address, failed_at) VALUES (?, ?)",
                     (address, at))


def devices_paired_with(conn, code_id: int) -> int:
    """Devices a code has paired (unpaired ones included: the bound is on the code)."""
    return conn.execute("SELECT COUNT(*) FROM paired_devices WHERE code_id = ?",
                        (code_id,)).fetchone()[0]


# ---- keyset paging (every list is paged: ``limit`` and ``after``)

#: Page size when the caller names none, and the most one page may hold.
PAGE_DEFAULT = 50
PAGE_MAX = 100


class PageError(StoreError):
    """A ``limit`` or ``after`` that cannot be used (400 naming the field)."""


def page_limit(value, default: int = PAGE_DEFAULT, most: int = PAGE_MAX) -> int:
    """``limit`` from a query string: a whole number 1..``most``."""
    if value is None or value == "":
        return default
    text = str(value).strip()
    if not (text.isascii() and text.isdigit()) or len(text) > 6 or not 1 <= int(text) <= most:
        raise PageError(f"limit must be a whole number from 1 to {most}.", "limit")
    return int(text)


def encode_cursor(*parts) -> str:
    """A page cursor: the sort key of the last row shown, as URL-safe text."""
    import base64
    raw = json.dumps(list(parts), separators=(",", ":"), ensure_ascii=False)
    return base64.urlsafe_b64encode(raw.encode("utf-8")).decode("ascii").rstrip("=")


def decode_cursor(text, shape: tuple) -> list:
    """The sort key in a cursor; ``shape`` gives the type of each part
    (str or int). Anything else answers 400 (field ``after``)."""
    import base64
    bad = PageError("after is not a cursor this server gave (take it from the 'next' link).",
                    "after")
    if not isinstance(text, str) or not text or len(text) > 1000:
        raise bad
    try:
        raw = base64.urlsafe_b64decode(text + "=" * (-len(text) % 4))
        parts = json.loads(raw.decode("utf-8"))
    except (ValueError, UnicodeDecodeError):
        raise bad from None
    if not isinstance(parts, list) or len(parts) != len(shape) or not all(
            type(p) is t for p, t in zip(parts, shape)):
        raise bad
    return parts


def _reading_filters(site_id, sample, date_from, date_to) -> tuple[list[str], list]:
    where, args = [], []
    if site_id is not None:
        where.append("r.site_id = ?")
        args.append(site_id)
    if sample:
        where.append("r.sample = ?")
        args.append(sample)
    if date_from:
        where.append("r.taken_at >= ?")          # ISO text: a day's prefix sorts first
        args.append(date_from)
    if date_to:
        where.append("r.taken_at < ?")
        args.append(date_to + "\uffff")
    return where, args


def readings_page(conn, site_id: int | None = None, sample: str | None = None,
                  date_from: str | None = None, date_to: str | None = None,
                  limit: int = PAGE_DEFAULT, after: str | None = None
                  ) -> tuple[list[sqlite3.Row], str | None]:
    """One page of readings (every version), newest first by (taken_at, id),
    and the cursor of the next page (None on the last one).

    Keyset paging: the next page starts strictly after the last row's
    (taken_at, id), so pages never repeat or skip a row, however many
    readings are saved between two pages (rows are never updated or deleted,
    so a row's key never moves). A reading saved meanwhile with a later time
    shows on a fresh first page."""
    where, args = _reading_filters(site_id, sample, date_from, date_to)
    if after is not None:
        taken, rid = decode_cursor(after, (str, int))
        where.append("(r.taken_at, r.id) < (?, ?)")
        args += [taken, rid]
    # Pick the page's ids through the index first, then join for those only.
    ids = [r[0] for r in conn.execute(
        "SELECT r.id FROM readings r" + (" WHERE " + " AND ".join(where) if where else "")
        + " ORDER BY r.taken_at DESC, r.id DESC LIMIT ?", args + [limit + 1])]
    more = len(ids) > limit
    ids = ids[:limit]
    if not ids:
        return [], None
    rows = conn.execute(_READING_SELECT + f" WHERE r.id IN ({','.join('?' * len(ids))})"
                        " ORDER BY r.taken_at DESC, r.id DESC", ids).fetchall()
    nxt = encode_cursor(rows[-1]["taken_at"], rows[-1]["id"]) if more else None
    return rows, nxt


def sites_page(conn, limit: int = PAGE_DEFAULT, after: str | None = None
               ) -> tuple[list[sqlite3.Row], str | None]:
    """One page of :func:`list_sites` (by name, case ignored, then id) and the
    next page's cursor."""
    where, args = "", []
    if after is not None:
        name, sid = decode_cursor(after, (str, int))
        where, args = "WHERE (s.name COLLATE NOCASE, s.id) > (?, ?)", [name, sid]
    rows = list_sites(conn, where=where, args=args, limit=limit + 1)
    more = len(rows) > limit
    rows = rows[:limit]
    nxt = encode_cursor(rows[-1]["name"], rows[-1]["id"]) if more and rows else None
    return rows, nxt


# ---- an import in chunks (schema 012; csvio.import_rows)

_STAGED = ("uuid",) + INPUT_FIELDS + COMPUTED_FIELDS + ("result_json", "app_version",
                                                       "recorded_at")


def import_job(conn, digest: str, rows_total: int) -> dict:
    """The job staging these rows (by digest), resumed if a killed run left
    it, else new; jobs of other files left for a day are dropped."""
    row = conn.execute("SELECT * FROM import_jobs WHERE digest = ?", (digest,)).fetchone()
    if row is not None and row["rows_total"] == rows_total:
        return dict(row)
    if row is not None:
        drop_import_job(conn, row["id"])
    day_ago = (dt.datetime.now(dt.timezone.utc) - dt.timedelta(days=1)).isoformat()
    for (old,) in conn.execute("SELECT id FROM import_jobs WHERE started_at < ?",
                               (day_ago,)).fetchall():
        drop_import_job(conn, old)
    cur = conn.execute("INSERT INTO import_jobs (digest, rows_total, started_at) VALUES "
                       "(?,?,?)", (digest, rows_total, utc_now()))
    return dict(conn.execute("SELECT * FROM import_jobs WHERE id = ?",
                             (cur.lastrowid,)).fetchone())


def stage_import_rows(conn, job_id: int, first_seq: int, rows) -> None:
    """Stage converted records ``[(depth, rec), ...]`` of a job (the caller
    holds a short transaction); the job remembers how far it got."""
    cols = ("job_id", "seq", "depth", "site", "visited_by", "supersedes_uuid") + _STAGED
    vals = []
    for i, (depth, rec) in enumerate(rows):
        v = [job_id, first_seq + i, depth, rec["site"], rec.get("visited_by") or "",
             rec.get("supersedes_uuid")] + [rec.get(c) for c in _STAGED]
        v[cols.index("compensated")] = 1 if rec.get("compensated") else 0
        v[cols.index("note")] = rec.get("note") or ""
        v[cols.index("flags")] = rec.get("flags") or ""
        vals.append(v)
    conn.executemany(f"INSERT OR REPLACE INTO import_staging ({', '.join(cols)}) VALUES "
                     f"({', '.join('?' * len(cols))})", vals)
    conn.execute("UPDATE import_jobs SET rows_staged = ? WHERE id = ?",
                 (first_seq + len(vals), job_id))


def drop_import_job(conn, job_id: int) -> None:
    conn.execute("DELETE FROM import_staging WHERE job_id = ?", (job_id,))
    conn.execute("DELETE FROM import_jobs WHERE id = ?", (job_id,))


def import_clashes(conn, job_id: int) -> str | None:
    """What a save made meanwhile contradicts in a staged job, or None: a
    staged uuid now in the log, or a staged correction of a reading that
    was corrected or voided since the file was checked."""
    row = conn.execute("SELECT st.uuid FROM import_staging st JOIN readings r "
                       "ON r.uuid = st.uuid WHERE st.job_id = ? LIMIT 1", (job_id,)).fetchone()
    if row:
        return f"reading {row[0]} was saved meanwhile"
    row = conn.execute(
        "SELECT st.supersedes_uuid FROM import_staging st JOIN readings p "
        "ON p.uuid = st.supersedes_uuid JOIN reading_status s ON s.id = p.id "
        "WHERE st.job_id = ? AND s.status <> 'current' LIMIT 1", (job_id,)).fetchone()
    return f"reading {row[0]} was corrected or voided meanwhile" if row else None


def finish_import_job(conn, job_id: int) -> int:
    """Move a job's staged rows into readings inside the caller's (short)
    transaction: sites and visits as needed, one INSERT ... SELECT per level
    of corrections (a correction's target is in by then). Returns how many."""
    conn.execute("CREATE TEMP TABLE IF NOT EXISTS import_map (site TEXT, day TEXT, "
                 "visited_by TEXT, site_id INTEGER, visit_id INTEGER, "
                 "PRIMARY KEY (site, day, visited_by))")
    conn.execute("DELETE FROM temp.import_map")
    site_ids: dict[str, int] = {}
    keys = conn.execute("SELECT DISTINCT site, substr(taken_at, 1, 10), visited_by "
                        "FROM import_staging WHERE job_id = ?", (job_id,)).fetchall()
    for site, day, by in keys:
        k = site.lower()
        if k not in site_ids:
            site_ids[k] = ensure_site(conn, site)["id"]
        conn.execute("INSERT INTO temp.import_map VALUES (?,?,?,?,?)",
                     (site, day, by, site_ids[k],
                      _visit_id(conn, site_ids[k], day, by)))
    cols = ", ".join(_STAGED)
    picked = ", ".join(f"st.{c}" if c != "recorded_at" else "COALESCE(st.recorded_at, ?)"
                       for c in _STAGED)
    top = conn.execute("SELECT MAX(depth) FROM import_staging WHERE job_id = ?",
                       (job_id,)).fetchone()[0]
    added = 0
    try:
        for d in range(0 if top is None else top + 1):
            cur = conn.execute(
                f"INSERT INTO readings ({cols}, site_id, visit_id, supersedes_id, "
                f"{', '.join(VIEW_COLUMNS)}) "
                f"SELECT {picked}, m.site_id, m.visit_id, "
                "(SELECT p.id FROM readings p WHERE p.uuid = st.supersedes_uuid), "
                f"{_view_values_sql('st.result_json')} "
                "FROM import_staging st JOIN temp.import_map m ON m.site = st.site "
                "AND m.day = substr(st.taken_at, 1, 10) AND m.visited_by = st.visited_by "
                "WHERE st.job_id = ? AND st.depth = ? ORDER BY st.seq",
                (utc_now(), job_id, d))
            added += cur.rowcount
    except sqlite3.IntegrityError as e:
        raise StoreError(f"The file corrects one reading twice or repeats a reading ({e}).",
                         "file", 400) from None
    drop_import_job(conn, job_id)
    return added
