"""PostgreSQL behind the store: a psycopg 3 connection in the shape of the
sqlite3 subset the store modules use, so each query is written once where the
two dialects agree and twice (``conn.dialect``) only where they differ.

What the adapter gives the store:

* ``execute`` / ``executemany`` returning a cursor with ``fetchone``,
  ``fetchall``, ``fetchmany``, iteration and ``rowcount``;
* rows read by key and by index, ``keys()`` and ``dict(row)``, with the
  column names spelt as the SQLite schema spells them (PostgreSQL folds
  unquoted names to lower case: ``ec25_dS_m`` comes back as ``ec25_ds_m``);
* sqlite3's ``?`` and ``?N`` placeholders, translated once per statement to
  psycopg's (outside string literals and quoted names; a literal ``%`` is
  escaped);
* ``in_transaction``, ``close`` and ``dialect = "postgresql"``;
* psycopg's errors raised as the store's (the DB-API classes of sqlite3, see
  :mod:`fieldapp.store.core`), so one ``except`` clause serves both backends.

The connection runs in autocommit, as the SQLite connection does
(``isolation_level=None``): a statement outside ``BEGIN`` commits on its own,
and :class:`fieldapp.store.transaction` opens and closes every transaction.
"""
from __future__ import annotations

import re
import sqlite3
from functools import lru_cache
from importlib import resources

DIALECT = "postgresql"

#: The advisory lock every writing transaction takes (store.transaction), so
#: writers queue one after another as under SQLite's BEGIN IMMEDIATE and the
#: same read-then-write checks hold (a uuid not yet stored, a reading still
#: current when it is corrected). The number is this program's own.
WRITE_LOCK = 0x6669656C64   # "field"


def is_url(target) -> bool:
    """Whether a --db/--data target names a PostgreSQL database."""
    return isinstance(target, str) and target.startswith(("postgresql://", "postgres://"))


# ---- errors: psycopg's as the store's (subclasses of the sqlite3 classes)

class PgDatabaseError(sqlite3.DatabaseError):
    """A PostgreSQL error the store does not name more precisely."""


class PgIntegrityError(sqlite3.IntegrityError):
    """A constraint or the append-only rule refused a change (SQLSTATE 23xxx)."""


class PgOperationalError(sqlite3.OperationalError):
    """The server could not be reached, the connection dropped, a lock timed out."""


def _translate_error(e):
    import psycopg
    cls = (PgIntegrityError if isinstance(e, psycopg.IntegrityError)
           else PgOperationalError if isinstance(e, (psycopg.OperationalError,
                                                     psycopg.errors.QueryCanceled))
           else PgDatabaseError)
    err = cls(str(e).strip())
    err.sqlstate = getattr(e, "sqlstate", None)
    return err


# ---- placeholders and column names

_TOKEN = re.compile(r"'(?:[^']|'')*'|\"(?:[^\"]|\"\")*\"|\?(\d*)|%")


@lru_cache(maxsize=512)
def translate(sql: str) -> tuple[str, bool]:
    """sqlite3's placeholders as psycopg's: ``?`` -> ``%s`` and ``?N`` ->
    ``%(N)s`` (a repeated name is sent once). Returns (sql, numbered)."""
    numbered = False

    def sub(m):
        nonlocal numbered
        tok = m.group(0)
        if tok[0] in "'\"":
            return tok.replace("%", "%%")
        if tok == "%":
            return "%%"
        if m.group(1):
            numbered = True
            return f"%({m.group(1)})s"
        return "%s"

    return _TOKEN.sub(sub, sql), numbered


def _params(params, numbered: bool):
    if numbered:
        return {str(i): v for i, v in enumerate(params, 1)}
    return list(params)


_MIXED = re.compile(r"\b[a-z][a-z0-9_]*[A-Z][A-Za-z0-9_]*\b|\b[A-Z][A-Za-z0-9_]*[a-z][A-Za-z0-9_]*\b")


@lru_cache(maxsize=1)
def _schema_names() -> dict[str, str]:
    """lower-case name -> the SQLite schema's spelling, for every column name
    with capitals (``ec25_dS_m``, ``matric_MPa``, ``standard_uS_cm``...)."""
    names: dict[str, str] = {}
    for p in resources.files("fieldapp").joinpath("schema").iterdir():
        if p.name.endswith(".sql"):
            for w in _MIXED.findall(p.read_text(encoding="utf-8")):
                if "_" in w:
                    names.setdefault(w.lower(), w)
    return names


@lru_cache(maxsize=512)
def _names_in(sql: str) -> dict[str, str]:
    found = dict(_schema_names())
    for w in _MIXED.findall(sql):
        if "_" in w:
            found[w.lower()] = w
    return found


class Row(tuple):
    """A result row like sqlite3.Row: by index, by key, ``keys()``, ``dict(row)``."""

    __slots__ = ()
    _keys: tuple = ()
    _index: dict = {}

    def __getitem__(self, key):
        if isinstance(key, str):
            try:
                key = self._index[key]
            except KeyError:
                raise IndexError(f"No item with that key: {key!r}") from None
        return tuple.__getitem__(self, key)

    def keys(self):
        return list(self._keys)


@lru_cache(maxsize=256)
def _row_class(names: tuple) -> type:
    """The row class of a result with these column names, made once per shape
    (a long export runs the same query thousands of times)."""
    index: dict[str, int] = {}
    for i, n in enumerate(names):
        index.setdefault(n, i)
    return type("Row", (Row,), {"__slots__": (), "_keys": names, "_index": index})


class Cursor:
    """What ``execute`` returns: the rows of one statement."""

    def __init__(self, cur, sql: str):
        self._cur = cur
        self._sql = sql
        self._cls = None

    def _make(self, values):
        if self._cls is None:
            canon = _names_in(self._sql)
            self._cls = _row_class(tuple(canon.get(c.name, c.name)
                                         for c in self._cur.description))
        return self._cls(values)

    @property
    def description(self):
        return self._cur.description

    @property
    def names(self) -> list[str]:
        """The result's column names as the SQL spells them (PostgreSQL folds
        unquoted names to lower case: matric_MPa comes back matric_mpa)."""
        canon = _names_in(self._sql)
        return [canon.get(c.name, c.name) for c in self._cur.description or ()]

    @property
    def rowcount(self) -> int:
        return self._cur.rowcount

    def fetchone(self):
        if self._cur.description is None:
            return None
        try:
            v = self._cur.fetchone()
        except Exception as e:   # noqa: BLE001 - psycopg's errors become the store's
            raise _translate_error(e) from e
        return None if v is None else self._make(v)

    def fetchmany(self, size: int = 100):
        if self._cur.description is None:
            return []
        return [self._make(v) for v in self._cur.fetchmany(size)]

    def fetchall(self):
        if self._cur.description is None:
            return []
        return [self._make(v) for v in self._cur.fetchall()]

    def __iter__(self):
        if self._cur.description is None:
            return iter(())
        return (self._make(v) for v in self._cur)

    def close(self):
        self._cur.close()


class Connection:
    """A psycopg connection in the sqlite3 shape the store uses."""

    dialect = DIALECT

    def __init__(self, raw, release=None, url: str = ""):
        self.raw = raw
        self._release = release
        self.url = url

    def execute(self, sql: str, params=()):
        text, numbered = translate(sql)
        cur = self.raw.cursor()
        try:
            # parameters always go with the text, so psycopg reads %% as %
            cur.execute(text, _params(params or (), numbered))
        except Exception as e:   # noqa: BLE001 - psycopg's errors become the store's
            import psycopg
            if isinstance(e, psycopg.Error):
                raise _translate_error(e) from e
            raise
        return Cursor(cur, sql)

    def executemany(self, sql: str, seq_of_params):
        text, numbered = translate(sql)
        cur = self.raw.cursor()
        try:
            cur.executemany(text, [_params(p, numbered) for p in seq_of_params])
        except Exception as e:   # noqa: BLE001
            import psycopg
            if isinstance(e, psycopg.Error):
                raise _translate_error(e) from e
            raise
        return Cursor(cur, sql)

    @property
    def in_transaction(self) -> bool:
        from psycopg.pq import TransactionStatus
        return self.raw.info.transaction_status in (TransactionStatus.INTRANS,
                                                    TransactionStatus.INERROR,
                                                    TransactionStatus.ACTIVE)

    def close(self) -> None:
        raw, self.raw = self.raw, None
        if raw is None:
            return
        if self._release is not None:
            self._release(raw)          # back to the pool (which rolls back an open one)
        else:
            raw.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False


def open_raw(url: str, **kwargs):
    """A new psycopg connection in autocommit; unreachable servers and bad
    names become a StoreError that says what to check."""
    import psycopg
    from .core import StoreError
    try:
        return psycopg.connect(url, autocommit=True, connect_timeout=10, **kwargs)
    except psycopg.Error as e:
        raise StoreError(f"fieldapp cannot reach the PostgreSQL database {redact(url)} "
                         f"({' '.join(str(e).split())}). Check that the server runs, the "
                         "database exists (createdb) and the user may connect.",
                         status=503) from None


def redact(url: str) -> str:
    """The URL without its password, for messages and logs."""
    return re.sub(r"(://[^:/@]+):[^@]*@", r"\1:***@", url)


def connect(url: str) -> Connection:
    return Connection(open_raw(url), url=url)


class Pool:
    """The server's connections (psycopg_pool): ``connection()`` lends one in
    the store's shape; its ``close()`` gives it back."""

    def __init__(self, url: str, min_size: int = 2, max_size: int = 12, timeout: float = 30):
        from psycopg_pool import ConnectionPool
        self.url = url
        self._pool = ConnectionPool(url, min_size=min_size, max_size=max_size, timeout=timeout,
                                    kwargs={"autocommit": True, "connect_timeout": 10},
                                    open=True, name="fieldapp")

    def connection(self) -> Connection:
        import psycopg_pool
        try:
            raw = self._pool.getconn()
        except psycopg_pool.PoolTimeout as e:
            raise PgOperationalError(f"no database connection free ({e})") from None
        return Connection(raw, release=self._pool.putconn, url=self.url)

    def close(self) -> None:
        self._pool.close()


# ---- the schema: versions kept in a table (PostgreSQL has no user_version)

VERSION_TABLE = "fieldapp_schema"


def schema_version(conn: Connection) -> int:
    row = conn.execute("SELECT to_regclass(?)", (VERSION_TABLE,)).fetchone()
    if row[0] is None:
        return 0
    return conn.execute(f"SELECT COALESCE(MAX(version), 0) FROM {VERSION_TABLE}").fetchone()[0]


def _tables(conn: Connection) -> set[str]:
    return {r[0] for r in conn.execute(
        "SELECT table_name FROM information_schema.tables WHERE table_schema = "
        "current_schema() AND table_type = 'BASE TABLE'")}


def check_log(conn: Connection) -> int:
    """Refuse a database of another program or of a newer fieldapp (nothing is
    written to it); return its schema version."""
    from .core import StoreError, _migrations
    tables = _tables(conn)
    if tables and "readings" not in tables and VERSION_TABLE not in tables:
        raise StoreError(f"{redact(conn.url)} holds tables of another program; fieldapp will "
                         "not touch it. Create a database of its own for fieldapp "
                         "(createdb fieldapp).", status=500)
    current = schema_version(conn)
    newest = max(v for v, _ in _migrations(DIALECT))
    if current > newest:
        raise StoreError(f"this database was written by a newer fieldapp (schema {current}, "
                         f"this program knows {newest}); update fieldapp.", status=500)
    return current


def migrate(conn: Connection) -> int:
    """Apply every PostgreSQL schema file newer than the kept version, each in
    its own transaction, under the writers' lock (two servers starting at once
    migrate once)."""
    from .core import _migrations
    check_log(conn)
    for version, sql in _migrations(DIALECT):
        conn.execute("BEGIN")
        try:
            conn.execute("SELECT pg_advisory_xact_lock(?)", (WRITE_LOCK,))
            conn.execute(f"CREATE TABLE IF NOT EXISTS {VERSION_TABLE} ("
                         "version integer PRIMARY KEY, applied_at text NOT NULL)")
            if version <= schema_version(conn):
                conn.execute("COMMIT")
                continue
            try:
                conn.raw.execute(sql)          # a whole file: several statements, no parameters
            except Exception as e:   # noqa: BLE001
                import psycopg
                if isinstance(e, psycopg.Error):
                    raise _translate_error(e) from e
                raise
            conn.execute(f"INSERT INTO {VERSION_TABLE} (version, applied_at) VALUES "
                         "(?, to_char(now() AT TIME ZONE 'UTC', "
                         "'YYYY-MM-DD\"T\"HH24:MI:SS\"+00:00\"'))", (version,))
            conn.execute("COMMIT")
        except BaseException:
            if conn.raw is not None and not conn.raw.closed:
                conn.execute("ROLLBACK")
            raise
    return schema_version(conn)


def connect_log(url: str, upgrade: bool = True) -> Connection:
    """store.connect for a PostgreSQL URL: open, check and (``upgrade``) migrate."""
    conn = connect(url)
    if not upgrade:
        return conn
    try:
        migrate(conn)
    except BaseException:
        conn.close()
        raise
    return conn
