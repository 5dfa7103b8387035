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


def set_import_depths(conn, job_id: int) -> None:
    """How deep staged rows sit in their file's chains of corrections, from
    the plan (:func:`plan_depths`) once the whole file is read (staged at 0)."""
    conn.execute("UPDATE import_staging SET depth = (SELECT d.depth FROM import_plan_depths d "
                 "WHERE d.seq = import_staging.seq) WHERE job_id = ? AND seq IN "
                 "(SELECT seq FROM import_plan_depths)", (job_id,))


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


# ---- the plan: an entry per reading of the file, in temporary tables (the
# connection's own, on disk past a bounded cache), so memory stays flat with
# the file's length; csvio.plan.Plan reads and checks them.

_PLAN_TABLES = (
    "CREATE TEMP TABLE IF NOT EXISTS import_plan (uuid TEXT PRIMARY KEY, target TEXT, "
    "site TEXT NOT NULL, site_key TEXT NOT NULL, status TEXT NOT NULL, "
    "line BIGINT NOT NULL, same BIGINT NOT NULL, seq BIGINT)",
    "CREATE INDEX IF NOT EXISTS import_plan_target ON import_plan (target) "
    "WHERE target IS NOT NULL",
    "CREATE TEMP TABLE IF NOT EXISTS import_plan_targets (uuid TEXT PRIMARY KEY, "
    "site TEXT NOT NULL, site_key TEXT NOT NULL, status TEXT NOT NULL)",
    "CREATE TEMP TABLE IF NOT EXISTS import_plan_marks (line BIGINT PRIMARY KEY, "
    "uuid TEXT NOT NULL, flag_acks TEXT, status TEXT, void_reason TEXT, voided_at TEXT)",
    "CREATE TEMP TABLE IF NOT EXISTS import_plan_depths (seq BIGINT PRIMARY KEY, "
    "depth BIGINT NOT NULL)",
)
_PLAN_NAMES = ("import_plan", "import_plan_targets", "import_plan_marks",
               "import_plan_depths")


@contextmanager
def _plan_writes(conn):
    """Writes to the plan's tables, one transaction a block. They touch only
    the connection's temporary tables: a plain BEGIN takes no lock on the
    log (SQLite) and no write lock (PostgreSQL). Inside a caller's open
    transaction they are part of it."""
    if conn.in_transaction:
        yield conn
        return
    conn.execute("BEGIN")
    try:
        yield conn
    except BaseException:
        if conn.in_transaction:
            conn.execute("ROLLBACK")
        raise
    conn.execute("COMMIT")


def plan_reset(conn) -> None:
    """Empty plan tables for a new import (made at a connection's first)."""
    with _plan_writes(conn):
        for sql in _PLAN_TABLES:
            conn.execute(sql)
        if dialect(conn) == "postgresql":
            conn.execute(f"TRUNCATE {', '.join(_PLAN_NAMES)}")
        else:
            for name in _PLAN_NAMES:
                conn.execute(f"DELETE FROM {name}")


def plan_seen(conn, uuids: list[str]) -> dict[str, tuple[int, int]]:
    """uuid -> (same, line) of the plan's entries among ``uuids``."""
    out: dict[str, tuple[int, int]] = {}
    for k in range(0, len(uuids), 500):
        part = uuids[k:k + 500]
        for u, same, line in conn.execute(
                f"SELECT uuid, same, line FROM import_plan WHERE uuid IN "
                f"({','.join('?' * len(part))})", part):
            out[u] = (same, line)
    return out


def plan_add(conn, entries: list[tuple], targets: list[tuple], marks: list[tuple]) -> None:
    """Entries ``(uuid, target, site, site_key, status, line, same, seq)``
    (seq: the staging order of a reading new to the log, else None), the
    log's readings the file corrects ``(uuid, site, site_key, status)`` and
    rows with acknowledgements or a void ``(line, uuid, flag_acks, status,
    void_reason, voided_at)``."""
    with _plan_writes(conn):
        if entries:
            conn.executemany("INSERT INTO import_plan (uuid, target, site, site_key, status, "
                             "line, same, seq) VALUES (?,?,?,?,?,?,?,?)", entries)
        if targets:
            conn.executemany("INSERT INTO import_plan_targets (uuid, site, site_key, status) "
                             "VALUES (?,?,?,?) ON CONFLICT (uuid) DO NOTHING", targets)
        if marks:
            conn.executemany("INSERT INTO import_plan_marks (line, uuid, flag_acks, status, "
                             "void_reason, voided_at) VALUES (?,?,?,?,?,?)", marks)


def plan_first_self_or_twice(conn):
    """The first line (file order) that corrects itself, ``(line, uuid)``,
    and the first that corrects a reading an earlier line corrects too,
    ``(line, target, earlier line)``; each None if there is none."""
    own = conn.execute("SELECT line, uuid FROM import_plan WHERE target = uuid "
                       "ORDER BY line LIMIT 1").fetchone()
    twice = conn.execute(
        "SELECT p.line, p.target, (SELECT MIN(q.line) FROM import_plan q "
        "WHERE q.target = p.target) FROM import_plan p WHERE p.target IS NOT NULL "
        "AND EXISTS (SELECT 1 FROM import_plan q WHERE q.target = p.target "
        "AND q.line < p.line) ORDER BY p.line LIMIT 1").fetchone()
    return (tuple(own) if own else None), (tuple(twice) if twice else None)


def plan_first_bad_target(conn):
    """The first new correction (file order) whose target is on another
    site, not current in the log or nowhere: ``(line, target, site, target's
    line in the file or None, its site there, its site in the log, its
    status in the log)``, or None."""
    row = conn.execute(
        "SELECT e.line, e.target, e.site, p.line, p.site, g.site, g.status "
        "FROM import_plan e LEFT JOIN import_plan p ON p.uuid = e.target "
        "LEFT JOIN import_plan_targets g ON g.uuid = e.target "
        "WHERE e.seq IS NOT NULL AND e.target IS NOT NULL AND CASE "
        "WHEN p.uuid IS NOT NULL THEN p.site_key <> e.site_key "
        "WHEN g.uuid IS NOT NULL THEN g.status <> 'current' OR g.site_key <> e.site_key "
        "ELSE TRUE END ORDER BY e.line LIMIT 1").fetchone()
    return tuple(row) if row else None


def plan_depths(conn) -> list[int] | None:
    """How deep each new reading sits in its chain of new corrections
    (kept in ``import_plan_depths`` for those below the top); every line
    corrects at most one reading and has at most one correction by then.
    Returns the lines of the first circle of corrections (by its first
    line), None if there is none."""
    with _plan_writes(conn):
        conn.execute(
            "WITH RECURSIVE chain (uuid, seq, depth) AS ("
            "SELECT c.uuid, c.seq, 1 FROM import_plan p JOIN import_plan c "
            "ON c.target = p.uuid WHERE p.seq IS NOT NULL AND c.seq IS NOT NULL "
            "AND NOT EXISTS (SELECT 1 FROM import_plan g WHERE g.uuid = p.target "
            "AND g.seq IS NOT NULL) "
            "UNION ALL SELECT c.uuid, c.seq, chain.depth + 1 FROM chain JOIN import_plan c "
            "ON c.target = chain.uuid WHERE c.seq IS NOT NULL) "
            "INSERT INTO import_plan_depths (seq, depth) SELECT seq, depth FROM chain")
    start = conn.execute(
        "SELECT c.uuid FROM import_plan c JOIN import_plan p ON p.uuid = c.target "
        "WHERE c.seq IS NOT NULL AND p.seq IS NOT NULL AND NOT EXISTS (SELECT 1 FROM "
        "import_plan_depths d WHERE d.seq = c.seq) ORDER BY c.line LIMIT 1").fetchone()
    if start is None:
        return None
    lines, u = [], start[0]          # not reached from a first reading: a circle
    while True:
        line, u = conn.execute("SELECT line, target FROM import_plan WHERE uuid = ?",
                               (u,)).fetchone()
        lines.append(line)
        if u == start[0]:
            return sorted(lines)


def plan_first_bad_status(conn):
    """The first new reading (file order) whose status says the opposite of
    what the file shows: ``(line, status, the correcting line or None)``."""
    row = conn.execute(
        "SELECT e.line, e.status, k.line FROM import_plan e LEFT JOIN import_plan k "
        "ON k.target = e.uuid WHERE e.seq IS NOT NULL AND "
        "(e.status = 'corrected') = (k.uuid IS NULL) ORDER BY e.line LIMIT 1").fetchone()
    return tuple(row) if row else None


def plan_marks(conn, size: int = 2000):
    """The plan's rows with acknowledgements or a void, in file order, a
    list of ``size`` at a time (each read before the caller writes)."""
    after = -1
    while True:
        rows = conn.execute("SELECT line, uuid, flag_acks, status, void_reason, voided_at "
                            "FROM import_plan_marks WHERE line > ? ORDER BY line LIMIT ?",
                            (after, size)).fetchall()
        if not rows:
            return
        after = rows[-1][0]
        yield [dict(uuid=r[1], flag_acks=r[2], status=r[3], void_reason=r[4],
                    voided_at=r[5]) for r in rows]
