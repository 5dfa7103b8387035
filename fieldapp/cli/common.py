"""What the commands share: the log folder option (or an office database)
and opening the log."""
from __future__ import annotations

import contextlib
from pathlib import Path

import click

from .. import meters as meters_mod


def _remember_db(ctx, param, value):
    if value:
        ctx.meta["fieldapp.db"] = value
    return value


def data_option(f):
    """``--data DIR`` (the SQLite log's folder) and ``--db URL`` (an office
    log on PostgreSQL instead); :func:`db_url` and :func:`open_log` read them."""
    f = click.option("--db", metavar="URL", expose_value=False, callback=_remember_db,
                     help="an office log on PostgreSQL instead of the folder's file: "
                          "postgresql://USER@HOST:PORT/DATABASE")(f)
    return click.option("--data", metavar="DIR",
                        help="folder of the log (default: your user data folder)")(f)


def db_url() -> str | None:
    """The ``--db`` URL of the command being run, or None (the SQLite log)."""
    from .. import store
    from ..science import InputError
    ctx = click.get_current_context(silent=True)
    url = ctx.meta.get("fieldapp.db") if ctx is not None else None
    if url and not store.is_database_url(url):
        raise InputError(f"--db takes a postgresql://USER@HOST:PORT/DATABASE URL, not {url!r} "
                         "(a log file is chosen with --data DIR).", "db")
    return url or None


def sqlite_only(what: str) -> None:
    """Refuse a SQLite-only feature on an office database, saying whose job it is."""
    from ..science import InputError
    if db_url():
        raise InputError(f"{what} works on the log file of --data; an office database on "
                         "PostgreSQL is backed up and restored by the database server "
                         "(pg_dump and pg_restore, or your host's backups).", "db")


def check_days_option(f):
    return click.option("--check-days", type=float, default=meters_mod.DEFAULT_MAX_AGE_DAYS,
                        show_default=True,
                        help="flag readings from a meter whose last calibration check is "
                             "older than this many days")(f)


def data_dir(data: str | None) -> str:
    from .. import default_data_dir
    return data or str(default_data_dir())


@contextlib.contextmanager
def open_log(data: str | None):
    """The log's connection (made and migrated if new), closed afterwards."""
    from .. import store
    url = db_url()
    if url:
        conn = store.connect(url)
        try:
            yield conn
        finally:
            conn.close()
        return
    folder = Path(data_dir(data))
    folder.mkdir(parents=True, exist_ok=True)
    conn = store.connect(folder / store.DB_NAME)
    try:
        yield conn
    finally:
        conn.close()


def site_or_fail(conn, name: str):
    """A site by its name (or a former name), or a clear refusal."""
    from .. import store
    site = store.get_site(conn, store.clean_site_name(name))
    if site is None:
        raise store.StoreError(f"No site called {name!r}; 'fieldapp sites list' shows them.",
                               "site", 404)
    return site
