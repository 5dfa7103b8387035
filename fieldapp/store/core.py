"""Connections, migrations and transactions: what every store module builds on."""
from __future__ import annotations

import datetime as dt
import sqlite3
from importlib import resources
from pathlib import Path

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


def dialect(conn) -> str:
    """"sqlite" or "postgresql": which form of a statement the connection takes."""
    return getattr(conn, "dialect", "sqlite")


def _view_values_sql(result_json: str, dialect: str = "sqlite") -> str:
    """The VIEW_COLUMNS values as SQL expressions over ``result_json`` (an
    expression: a column or a bound parameter), in the connection's dialect."""
    if dialect == "postgresql":
        return ", ".join(f"(({result_json})::text::jsonb #>> '{{{p[2:].replace('.', ',')}}}')"
                         "::double precision" for p in VIEW_COLUMNS.values())
    return ", ".join(f"json_extract({result_json}, '{p}')" for p in VIEW_COLUMNS.values())


def readings_insert_sql(cols: tuple, extra_cols: str = "", extra_vals: str = "", *,
                        dialect: str) -> str:
    """INSERT INTO readings for these columns (``result_json`` among them) plus
    the VIEW_COLUMNS, computed in the same statement from the same JSON.
    Numbered parameters ?1..?n follow ``cols``; ``extra_vals`` may use ?n+1...
    ``dialect`` (``store.dialect(conn)``) has no default: the JSON extraction
    differs between SQLite and PostgreSQL."""
    params = ", ".join(f"?{i}" for i in range(1, len(cols) + 1))
    rj = f"?{cols.index('result_json') + 1}"
    return (f"INSERT INTO readings ({', '.join(cols)}, {', '.join(VIEW_COLUMNS)}{extra_cols}) "
            f"VALUES ({params}, {_view_values_sql(rj, dialect)}{extra_vals})")


#: The store's database errors are the DB-API classes of sqlite3; the
#: PostgreSQL adapter (store/pg.py) raises subclasses of them, so one
#: ``except store.IntegrityError`` serves both backends.
DatabaseError = sqlite3.DatabaseError
IntegrityError = sqlite3.IntegrityError
OperationalError = sqlite3.OperationalError


class StoreError(Exception):
    """A storage problem the user must hear about (corrupt file, conflict...)."""

    def __init__(self, message: str, field: str | None = None, status: int = 400):
        super().__init__(message)
        self.message = message
        self.field = field
        self.status = status


def utc_now() -> str:
    return dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds")


def _migrations(dialect: str = "sqlite") -> list[tuple[int, str]]:
    """(version, SQL) of every schema file, oldest first. fieldapp/schema/
    holds SQLite's; for PostgreSQL a file of the same name in
    schema/postgresql/ takes its place where the two differ (a version with
    no twin there is portable SQL, run as it is)."""
    folder = resources.files("fieldapp").joinpath("schema")
    files = sorted((p for p in folder.iterdir() if p.name.endswith(".sql")),
                   key=lambda p: p.name)
    out = []
    for p in files:
        if dialect == "postgresql":
            twin = folder.joinpath("postgresql", p.name)
            if twin.is_file():
                p = twin
        out.append((int(p.name.split("_", 1)[0]), p.read_text(encoding="utf-8")))
    return out


def schema_version(conn) -> int:
    """The schema version of an open log (0 for a new one)."""
    if dialect(conn) == "postgresql":
        from . import pg
        return pg.schema_version(conn)
    return conn.execute("PRAGMA user_version").fetchone()[0]


def connect(path: str | Path, upgrade: bool = True, check: bool = True) -> sqlite3.Connection:
    """Open (creating if needed) the database and bring its schema up to date.

    ``path`` is the SQLite file, or a ``postgresql://`` URL (an office log on
    PostgreSQL: the database must exist; its schema is made here).

    ``upgrade=False`` skips the checks and migrations (per-request connections
    of a server that already ran them at start-up).

    A file that is not a SQLite database, or a SQLite database of another
    program, raises StoreError and is left untouched.
    """
    from .rescue import inspect_log
    from . import pg
    if pg.is_url(path):
        return pg.connect_log(path, upgrade=upgrade)
    path = Path(path)
    if upgrade and check and path.exists():
        state = inspect_log(path)            # an empty or damaged log is never written
        if state["state"] != "ok":
            raise StoreError(state["problem"], status=503)
    existed = path.exists() and path.stat().st_size > 0
    conn = _open_sqlite(path)
    if not upgrade:
        conn.execute("PRAGMA synchronous = FULL")
        return conn
    try:
        _upgrade_sqlite(conn, path, existed)
    except sqlite3.OperationalError as e:
        conn.close()
        raise _operational_error(path, e) from None
    except sqlite3.DatabaseError as e:
        conn.close()
        raise _unreadable(path, e) from None
    except StoreError:
        conn.close()
        raise
    return conn


def _open_sqlite(path: Path) -> sqlite3.Connection:
    """A connection in autocommit (the store opens its own transactions),
    rows by name, foreign keys on, waiting up to 30 s for a writer."""
    conn = sqlite3.connect(path, timeout=30, isolation_level=None,
                           check_same_thread=False)
    conn.row_factory = sqlite3.Row
    conn.execute("PRAGMA foreign_keys = ON")
    conn.execute("PRAGMA busy_timeout = 30000")
    return conn


def _upgrade_sqlite(conn, path: Path, existed: bool) -> None:
    """Refuse another program's database or a newer schema before anything
    writes to the file, then WAL and the migrations."""
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


def _unreadable(path: Path, e: Exception) -> StoreError:
    return StoreError(f"{path} is not a readable fieldapp database ({e}). It was left as "
                      "it is; restore a backup or choose another --data folder.", status=500)


def _operational_error(path: Path, e: sqlite3.OperationalError) -> StoreError:
    """What to tell the user when opening or upgrading the file failed: a
    full disk or a read-only folder, a file that cannot be opened, or damage."""
    from .rescue import unwritable_reason
    msg = str(e).lower()
    why = unwritable_reason(path.parent, msg)
    if why:
        err = StoreError(f"fieldapp cannot write to the log: {why}. The log itself is "
                         "not damaged. Free some space or make the folder writable, or "
                         "choose another --data folder.", status=503)
        err.unwritable = why
        return err
    if "unable to open" in msg:
        return StoreError(f"fieldapp cannot open {path} ({e}): check the folder's "
                          "permissions, or choose another --data folder.", status=503)
    return _unreadable(path, e)


def _check_version(conn: sqlite3.Connection) -> int:
    current = conn.execute("PRAGMA user_version").fetchone()[0]
    newest = max(v for v, _ in _migrations())
    if current > newest:
        raise StoreError(f"this database was written by a newer fieldapp (schema {current}, "
                         f"this program knows {newest}); update fieldapp.", status=500)
    return current


def migrate(conn: sqlite3.Connection) -> int:
    """Apply every schema file newer than the database's user_version."""
    if dialect(conn) == "postgresql":
        from . import pg
        return pg.migrate(conn)
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
        if self.nested:
            self.conn.execute("SAVEPOINT tx")
        elif dialect(self.conn) == "postgresql":
            # BEGIN IMMEDIATE's guarantee on PostgreSQL: one writer at a time,
            # so a check made inside the transaction still holds at COMMIT.
            from .pg import WRITE_LOCK
            self.conn.execute("BEGIN")
            try:
                self.conn.execute("SELECT pg_advisory_xact_lock(?)", (WRITE_LOCK,))
            except BaseException:
                self.conn.execute("ROLLBACK")
                raise
        else:
            self.conn.execute("BEGIN IMMEDIATE")
        return self.conn

    def __exit__(self, exc_type, exc, tb):
        # After some errors (SQLITE_FULL, SQLITE_IOERR) SQLite has already rolled
        # the transaction back; a second ROLLBACK would hide the real cause.
        if not self.conn.in_transaction:
            return False
        try:
            if self.nested:
                if exc_type:
                    self.conn.execute("ROLLBACK TO tx")
                self.conn.execute("RELEASE tx")
            else:
                self.conn.execute("ROLLBACK" if exc_type else "COMMIT")
        except OperationalError:
            # a dropped PostgreSQL connection cannot roll back (the server has
            # already): the error that caused it is the one to report
            if exc_type is None or dialect(self.conn) != "postgresql":
                raise
        return False


