"""Readings: append-only inserts, corrections, voids, flag acknowledgements,
and the queries a save and the history check need."""
from __future__ import annotations

import json
import sqlite3
from typing import Iterator

from .core import (COMPUTED_FIELDS, INPUT_FIELDS, VIEW_COLUMNS, StoreError, dialect,
                   readings_insert_sql, transaction, utc_now)
from .sites import ensure_site, get_site


def _visit_id(conn, site_id: int, taken_at: str, visited_by: str) -> int:
    day = taken_at[:10]
    conn.execute("INSERT INTO visits (site_id, visit_date, visited_by) VALUES (?,?,?) "
                 "ON CONFLICT DO NOTHING", (site_id, day, visited_by or ""))
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


#: The columns of :data:`_READING_SELECT` a CSV export writes, nothing else
#: (no result JSON crosses into Python, and none is read in SQL): the
#: reading's own columns, the joins' and the water type, whose column holds
#: it for every reading since schema 020 (NULL: mixed salts or not said).
_EXPORT_OWN = ("id", "uuid", "sample", "depth_cm", "value", "unit", "temp_c", "compensated",
               "ratio", "sp_pct", "texture", "tds_factor", "theta_g_pct", "matric_MPa",
               "meter", "replicate_group", "note", "taken_at", "recorded_at", "ec25_dS_m",
               "ece_dS_m", "ece_method", "psi_s_MPa", "psi_s_method", "flags", "app_version")


def export_select() -> str:
    """:data:`_READING_SELECT` narrowed to what the CSV export writes; its
    ``salt_type`` is never NULL ('' for mixed salts or not said). The same
    SQL on both backends."""
    own = ", ".join("r." + c for c in _EXPORT_OWN)
    return _READING_SELECT.replace(
        "SELECT r.*, s.name AS site, st.status, st.void_reason, st.corrected_by_uuid,",
        f"SELECT {own}, coalesce(r.salt_type, '') AS salt_type, s.name AS site, st.status, "
        "st.void_reason,", 1)


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
        conn.execute(readings_insert_sql(cols, dialect=dialect(conn)), vals)
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
                                     f", (SELECT id FROM readings WHERE uuid = ?{len(cols) + 1})",
                                     dialect=dialect(conn)),
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


#: The history check compares a reading with this many latest readings of the
#: same site, kind and depth: recent enough to follow a real trend, enough
#: for a robust median, and a save costs the same however long the log grows.
HISTORY_WINDOW = 50


def _is_not(conn) -> str:
    # NULL-safe "differs": SQLite's IS NOT (IS DISTINCT FROM only since 3.39)
    return "IS DISTINCT FROM" if dialect(conn) == "postgresql" else "IS NOT"


def history_values(conn, site_id: int, sample: str, depth_cm, exclude_uuid=None,
                   before: str | None = None) -> list[float]:
    """ECe (soil) or EC at 25 °C (other kinds) of the site's current readings of
    the same kind and depth, for the history check."""
    col = "ece_dS_m" if sample in ("paste", "extract") else "ec25_dS_m"
    sql = (f"SELECT r.{col} FROM readings r JOIN reading_status st ON st.id = r.id "
           "WHERE r.site_id = ? AND r.sample = ? AND st.status = 'current' "
           f"AND r.{col} IS NOT NULL AND r.uuid {_is_not(conn)} ? ")
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
        f"AND r.sample = ? AND st.status = 'current' AND r.uuid {_is_not(conn)} ? "
        f"AND r.{col} IS NOT NULL",
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


#: How a reading stored before schema 016 carries its water type inside its
#: result JSON (written compact by records.build_record); schema 020 copied it
#: into the column; readers still look here when the column is empty.
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


