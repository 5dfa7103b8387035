"""The log's connection for each request, in the Flask tutorial's shape.

``get_db()`` opens the request's connection on first use and ``close_db()``
closes it when the request ends; ``init_app(app)`` checks and migrates the log
once at start (``open_log_at_start``, in a thread while the rest of the app is
built: ``start`` and ``finish``) and installs both. ``init_db(path)``
creates a log or brings its schema up to date, for ``fieldapp init-db``.
SQL itself lives in ``fieldapp.store``; nothing here builds a query.

An office server on PostgreSQL (config ``DB``: a ``postgresql://`` URL, from
``serve --db``) holds a pool of connections (psycopg_pool): ``get_db`` takes
one for the request and ``close_db`` gives it back. The SQLite-only rescue
paths (read-only fallback, quick_check at start) are the database server's
job there, not fieldapp's.
"""
from __future__ import annotations

import sqlite3
from pathlib import Path

from flask import current_app, g, jsonify, request

from .. import store


def get_db() -> sqlite3.Connection:
    """The request's connection, opened on first use and closed at teardown.

    A log served read-only (damaged, or found unwritable at start) gets a
    connection that cannot write. A reading request (GET, HEAD) whose normal
    connection cannot even read (a folder made read-only or a disk filled
    while the server runs) falls back to a read-only one, so every page and
    the export keep working for rescue; a save then answers 503."""
    if "db" not in g:
        if _pool(current_app) is not None:
            g.db = _pool(current_app).connection()
        elif request.method in ("GET", "HEAD") or current_app.config.get("LOG_READ_ONLY"):
            g.db = open_read_connection()
        else:
            g.db = store.connect(current_app.config["DATABASE"], upgrade=False)
    return g.db


def open_read_connection() -> sqlite3.Connection:
    """A connection for reading: the normal one when it can read, else one that
    cannot write (a damaged log, a read-only folder, a full disk). The caller
    closes it (a streamed export keeps its own past the request's teardown)."""
    if _pool(current_app) is not None:
        return _pool(current_app).connection()
    path = current_app.config["DATABASE"]
    if current_app.config.get("LOG_READ_ONLY"):
        return store.connect_readonly(path)
    conn = None
    try:
        conn = store.connect(path, upgrade=False)
        conn.execute("SELECT count(*) FROM sqlite_master").fetchone()
        return conn
    except sqlite3.OperationalError:
        if conn is not None:
            conn.close()
        return store.connect_readonly(path)


def close_db(exc=None):
    db = g.pop("db", None)
    if db is not None:
        db.close()                  # a pool's connection goes back to the pool


def _pool(app):
    return app.extensions.get("fieldapp_pool")


def open_connection(app):
    """A connection outside a request (start-up work such as the pairing
    code); the caller closes it."""
    if _pool(app) is not None:
        return _pool(app).connection()
    return store.connect(app.config["DATABASE"], upgrade=False)


def close_pool(app) -> None:
    """Close the office server's pool (tests, shutdown); a no-op on SQLite."""
    pool = app.extensions.pop("fieldapp_pool", None)
    if pool is not None:
        pool.close()


def open_log_at_start(db_path: str) -> str | None:
    """Check the log before anything writes to it; migrate it when sound.

    Returns None (the log takes writes), or why the server serves it
    read-only: damaged (SQLite quick_check) or, when its schema is already
    current, a read-only folder or a full disk; pages, export and backup to
    another folder keep working then. An empty file, a foreign or newer
    database, or a damaged first page raise StoreError: nothing is touched."""
    state = store.inspect_log(db_path)
    if state["state"] == "refused":
        raise store.StoreError(state["problem"], status=503)
    if state["state"] == "damaged":
        return state["problem"]
    try:
        store.connect(db_path, check=False).close()       # migrate now, fail early
    except store.StoreError as e:
        why = getattr(e, "unwritable", None)
        if not why or state["state"] != "ok":
            raise
        conn = store.connect_readonly(db_path)
        try:
            current = conn.execute("PRAGMA user_version").fetchone()[0]
        finally:
            conn.close()
        if current < max(v for v, _ in store._migrations()):
            raise store.StoreError(f"{e.message} (The log needs a schema update, which "
                                   "must write.)", status=503) from None
        return (f"fieldapp cannot write to the log: {why}. Pages, the export and backup to "
                "another folder keep working; saves wait on the tablets until there is room "
                "or the folder is writable, then restart the server.")
    return None


def init_db(db_path: str | Path) -> tuple[int | None, int]:
    """Create the log at ``db_path`` or bring its schema up to date.

    Returns (the schema version before, or None for a new log; the version
    now). An empty, damaged, foreign or newer file raises StoreError and is
    left untouched (``store.connect`` checks it before anything writes).
    ``db_path`` may be a ``postgresql://`` URL (the database must exist)."""
    if store.is_database_url(db_path):
        from ..store import pg
        conn = pg.connect(db_path)
        try:
            before = pg.check_log(conn) or None
            return before, pg.migrate(conn)
        finally:
            conn.close()
    path = Path(db_path)
    state = store.inspect_log(path)
    if state["state"] in ("refused", "damaged"):
        raise store.StoreError(state["problem"], status=503)
    before = None
    if state["state"] == "ok":
        conn = store.connect_readonly(path)
        try:
            before = conn.execute("PRAGMA user_version").fetchone()[0]
        finally:
            conn.close()
    conn = store.connect(path)                            # applies every newer migration
    try:
        return before, conn.execute("PRAGMA user_version").fetchone()[0]
    finally:
        conn.close()


def _refuse_writes_when_read_only():
    problem = current_app.config.get("LOG_READ_ONLY")
    if problem and request.method in ("POST", "PUT", "PATCH", "DELETE"):
        return jsonify(error=problem + " Your reading is kept on this device.",
                       field=None, read_only=True), 503


def _log_problem() -> dict:
    return {"log_problem": current_app.config.get("LOG_READ_ONLY")}


class _LogCheck:
    """:func:`open_log_at_start` in a thread of its own. SQLite's quick_check
    reads every page of the file (some 60 ms at 10,000 readings, more as the
    log grows) without holding Python's lock, so it runs while the rest of the
    web layer is imported and its routes compiled. :meth:`result` waits for
    it and returns, or raises, exactly what the call itself would."""

    def __init__(self, db_path: str):
        import threading
        self._path, self._value, self._error = db_path, None, None
        # not a daemon: a migration under way is finished before the process exits
        self._thread = threading.Thread(target=self._run, name="fieldapp-log-check")
        self._thread.start()

    def _run(self) -> None:
        try:
            self._value = open_log_at_start(self._path)
        except BaseException as e:      # handed to the thread that waits
            self._error = e

    def result(self) -> str | None:
        self._thread.join()
        if self._error is not None:
            raise self._error
        return self._value


def init_app(app) -> None:
    """:func:`start` and :func:`finish` together."""
    finish(app, start(app))


def start(app) -> _LogCheck | None:
    """Open the log in ``DATA_DIR`` (made if missing) and begin checking and
    migrating it (``finish`` waits for that and sets ``LOG_READ_ONLY``: why
    writes are refused, or None); close each request's connection at
    teardown, refuse writes to a read-only log (503) and name its problem to
    every page (``log_problem``). These hooks come first, before the other
    request checks.

    With config ``DB`` (a ``postgresql://`` URL) the log is that database:
    checked and migrated here, then served through a connection pool
    (``POOL_SIZE`` connections at most)."""
    url = app.config.get("DB")
    if url and store.is_database_url(str(url)):
        from ..store import pg
        store.connect(url).close()                         # check and migrate now, fail early
        app.config["DATABASE"] = url
        app.config["DB_DIALECT"] = pg.DIALECT
        app.config["LOG_READ_ONLY"] = None
        app.extensions["fieldapp_pool"] = pg.Pool(
            url, min_size=1, max_size=int(app.config.get("POOL_SIZE", 12)))
        _install_hooks(app)
        return None
    if url:
        raise store.StoreError(f"--db takes a postgresql://USER@HOST:PORT/DATABASE URL, not "
                               f"{url!r} (a SQLite log is chosen with --data DIR).", "db")
    app.config["DB_DIALECT"] = "sqlite"
    data_dir = Path(app.config["DATA_DIR"])
    data_dir.mkdir(parents=True, exist_ok=True)
    app.config["DATABASE"] = str(data_dir / store.DB_NAME)
    check = _LogCheck(app.config["DATABASE"])
    _install_hooks(app)
    return check


def finish(app, check: _LogCheck | None) -> None:
    """Wait for the check begun by :func:`start`; its refusal (a StoreError)
    stops the start here, before the app is handed out."""
    if check is not None:
        app.config["LOG_READ_ONLY"] = check.result()


def _install_hooks(app) -> None:
    app.teardown_appcontext(close_db)
    app.before_request(_refuse_writes_when_read_only)
    app.context_processor(_log_problem)
