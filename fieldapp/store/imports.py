"""An import in chunks (schema 012; csvio.import_rows)."""
from __future__ import annotations

import datetime as dt
import sqlite3
from contextlib import contextmanager

from .core import (COMPUTED_FIELDS, INPUT_FIELDS, VIEW_COLUMNS, StoreError,
                   _view_values_sql, dialect, transaction, utc_now)
from .sites import ensure_site


_STAGED = ("uuid",) + INPUT_FIELDS + COMPUTED_FIELDS + ("result_json", "app_version",
                                                       "recorded_at")


def import_job(conn, digest: str, rows_total: int | None = None) -> dict:
    """The job staging these rows (by digest), resumed if a killed run left
    it, else new; jobs of other files left for a day are dropped. Without
    ``rows_total`` (a file read as it is staged) the digest alone decides."""
    row = conn.execute("SELECT * FROM import_jobs WHERE digest = ?", (digest,)).fetchone()
    if row is not None and rows_total in (None, row["rows_total"]):
        return dict(row)
    if row is not None:
        drop_import_job(conn, row["id"])
    day_ago = (dt.datetime.now(dt.timezone.utc) - dt.timedelta(days=1)).isoformat()
    for (old,) in conn.execute("SELECT id FROM import_jobs WHERE started_at < ?",
                               (day_ago,)).fetchall():
        drop_import_job(conn, old)
    new_id = conn.execute("INSERT INTO import_jobs (digest, rows_total, started_at) VALUES "
                          "(?,?,?) RETURNING id", (digest, rows_total or 0, utc_now())
                          ).fetchone()[0]
    return dict(conn.execute("SELECT * FROM import_jobs WHERE id = ?", (new_id,)).fetchone())


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
    # a chunk staged again (a run killed after staging it) replaces its rows
    conn.executemany(f"INSERT INTO import_staging ({', '.join(cols)}) VALUES "
                     f"({', '.join('?' * len(cols))}) ON CONFLICT (job_id, seq) DO UPDATE SET "
                     + ", ".join(f"{c} = excluded.{c}" for c in cols[2:]), vals)
    conn.execute("UPDATE import_jobs SET rows_staged = ? WHERE id = ?",
                 (first_seq + len(vals), job_id))


def set_import_depths(conn, job_id: int, depths) -> None:
    """``[(depth, seq), ...]``: how deep staged rows sit in their file's
    chains of corrections, once the whole file is read (staged at 0)."""
    conn.executemany("UPDATE import_staging SET depth = ? WHERE job_id = ? AND seq = ?",
                     [(d, job_id, seq) for d, seq in depths])


@contextmanager
def staging_transaction(conn):
    """The short transaction of one staged chunk, committed without waiting
    for the disk (SQLite: synchronous NORMAL, in WAL still all or nothing;
    PostgreSQL: synchronous_commit off). A crash may lose the last chunks
    staged, never a reading: the job records how far it got in the same
    transaction, and the next run converts what was lost again. Inside a
    caller's open transaction it is an ordinary nested one."""
    own = not conn.in_transaction
    sqlite = own and dialect(conn) == "sqlite"
    if sqlite:
        was = conn.execute("PRAGMA synchronous").fetchone()[0]
        conn.execute("PRAGMA synchronous = NORMAL")
    try:
        with transaction(conn):
            if own and not sqlite:
                conn.execute("SET LOCAL synchronous_commit = off")
            yield conn
    finally:
        if sqlite:
            conn.execute(f"PRAGMA synchronous = {int(was):d}")


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


def _map_visits(conn, job_id: int) -> None:
    """Fill ``import_map``: each staged (site, day, visited_by) with its site
    (made if new, a few per file) and its visit, made in one statement."""
    conn.execute("INSERT INTO import_map (site, day, visited_by) SELECT DISTINCT site, "
                 "substr(taken_at, 1, 10), visited_by FROM import_staging WHERE job_id = ?",
                 (job_id,))
    site_ids: dict[str, int] = {}
    names = [r[0] for r in conn.execute(      # in the file's order, as sites are met
        "SELECT site FROM import_staging WHERE job_id = ? GROUP BY site ORDER BY MIN(seq)",
        (job_id,))]
    for site in names:
        k = site.lower()
        if k not in site_ids:
            site_ids[k] = ensure_site(conn, site)["id"]
    conn.executemany("UPDATE import_map SET site_id = ? WHERE site = ?",
                     [(site_ids[s.lower()], s) for s in names])
    conn.execute("INSERT INTO visits (site_id, visit_date, visited_by) SELECT site_id, day, "
                 "visited_by FROM import_map WHERE true ORDER BY site_id, day, visited_by "
                 "ON CONFLICT DO NOTHING")
    conn.execute("UPDATE import_map SET visit_id = (SELECT v.id FROM visits v WHERE "
                 "v.site_id = import_map.site_id AND v.visit_date = import_map.day AND "
                 "v.visited_by = import_map.visited_by)")


#: SQLite's page cache while staged rows land (KiB; the connection's own is
#: 2 MiB): the readings' indexes of a long file then stay in memory instead of
#: being read back from the disk for every row. Bounded, so memory stays flat.
LANDING_CACHE_KIB = 65536


def finish_import_job(conn, job_id: int) -> int:
    """Move a job's staged rows into readings inside the caller's (short)
    transaction: sites and visits as needed, one INSERT ... SELECT per level
    of corrections (a correction's target is in by then). Returns how many."""
    if dialect(conn) != "sqlite":
        return _land(conn, job_id)
    was = conn.execute("PRAGMA cache_size").fetchone()[0]
    conn.execute(f"PRAGMA cache_size = {-LANDING_CACHE_KIB:d}")
    try:
        return _land(conn, job_id)
    finally:
        conn.execute(f"PRAGMA cache_size = {int(was):d}")


def _land(conn, job_id: int) -> int:
    conn.execute("CREATE TEMP TABLE IF NOT EXISTS import_map (site TEXT, day TEXT, "
                 "visited_by TEXT, site_id INTEGER, visit_id INTEGER, "
                 "PRIMARY KEY (site, day, visited_by))")
    conn.execute("DELETE FROM import_map")   # the temporary table (searched first)
    _map_visits(conn, job_id)
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
                f"{_view_values_sql('st.result_json', dialect(conn))} "
                "FROM import_staging st JOIN import_map m ON m.site = st.site "
                "AND m.day = substr(st.taken_at, 1, 10) AND m.visited_by = st.visited_by "
                "WHERE st.job_id = ? AND st.depth = ? ORDER BY st.seq",
                (utc_now(), job_id, d))
            added += cur.rowcount
    except sqlite3.IntegrityError as e:
        raise StoreError(f"The file corrects one reading twice or repeats a reading ({e}).",
                         "file", 400) from None
    drop_import_job(conn, job_id)
    return added
