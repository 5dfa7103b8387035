"""What the commands share: the log folder option and opening the log."""
from __future__ import annotations

import contextlib
from pathlib import Path

import click

from .. import meters as meters_mod


def data_option(f):
    return click.option("--data", metavar="DIR",
                        help="folder of the log (default: your user data folder)")(f)


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
