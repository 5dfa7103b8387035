"""The log as a whole: serve it, create or migrate it (init-db), export, import,
back up, restore, load the demo; and the benchmarks of a checkout."""
from __future__ import annotations

import sys

import click

from ..science import InputError
from . import EXIT_BAD_INPUT, cli
from .common import data_dir, data_option, db_url, open_log, sqlite_only


@cli.command()
@click.option("--host", default=None,
              help="address to listen on (default 127.0.0.1: this machine only; with --lan "
                   "every address)")
@click.option("--lan", is_flag=True,
              help="share the log with tablets on this network; they pair once with a code "
                   "shown here")
@click.option("--port", type=int, default=8080, show_default=True)
@data_option
@click.option("--demo", is_flag=True, help="load an invented demo scenario")
@click.option("--check-days", type=float, default=7.0,
              help="flag readings from a meter whose last calibration check is older than "
                   "this many days (default 7)")
@click.option("--pairing-idle-days", type=float, default=90.0,
              help="a paired tablet not seen for this many days must pair again (default 90)")
@click.option("--threads", type=int, default=8, hidden=True)
@click.option("--idle-timeout", type=int, default=30, hidden=True)
@click.option("--dispatch", type=click.Choice(["writes-first", "fifo"]), default="writes-first",
              hidden=True)   # fifo: waitress's own order, only for the benchmark's comparison
@click.option("--https-port", type=int, default=8443, show_default=True,
              help="with --lan, also serve https on this port for tablets that installed this "
                   "log's certificate (0: no https)")
@click.option("--tls-name", multiple=True,
              help="another name or address the https certificate must carry (repeatable)")
def serve(host, lan, port, data, demo, check_days, pairing_idle_days, threads, idle_timeout,
          dispatch, https_port, tls_name):
    """Start the local web app."""
    import types

    from ..__main__ import cmd_serve
    return cmd_serve(types.SimpleNamespace(host=host, lan=lan, port=port, data=data, demo=demo,
                                           check_days=check_days, threads=threads,
                                           pairing_idle_days=pairing_idle_days,
                                           idle_timeout=idle_timeout, dispatch=dispatch,
                                           https_port=https_port, tls_name=list(tls_name),
                                           db=db_url()))


@cli.command()
@click.option("--site", help="only this site")
@data_option
@click.option("-o", "--output", help="file to write (default: standard output)")
@click.option("--xlsx", metavar="OUT", help="write an .xlsx workbook to OUT instead of CSV "
              "(readings, sites, sources)")
def export(site, data, output, xlsx):
    """Write the log (or one site) as CSV, or as a workbook with --xlsx."""
    from pathlib import Path

    from .. import store
    if db_url():
        from ..store import pg
        conn = pg.connect(db_url())       # export never writes: no migration
        try:
            pg.check_log(conn)
            return _export(conn, site, output, xlsx)
        finally:
            conn.close()
    db_path = Path(data_dir(data)) / store.DB_NAME
    state = store.inspect_log(db_path)       # export never writes: open read-only
    if state["state"] == "new":
        raise InputError(f"there is no log at {db_path}.", "data")
    if state["state"] == "refused":
        raise InputError(state["problem"], "data")
    if state["problem"]:
        click.echo(f"fieldapp: {state['problem']}", err=True)
    conn = store.connect_readonly(db_path)
    try:
        return _export(conn, site, output, xlsx)
    finally:
        conn.close()


def _export(conn, site, output, xlsx) -> int:
    """The export itself, from an open connection of either backend."""
    from .. import csvio
    from .common import site_or_fail
    site_id = site_or_fail(conn, site)["id"] if site else None
    if xlsx:                           # the workbook (readings, sites, sources)
        from .. import xlsx as workbook
        report: dict = {}
        workbook.export_xlsx(conn, xlsx, site_id, report=report)
        if report.get("skipped"):
            click.echo(f"fieldapp: {report['skipped']} damaged row(s) could not be read "
                       "and are missing from the export.", err=True)
        return 0
    out = open(output, "w", encoding="utf-8", newline="") if output else sys.stdout
    try:
        report: dict = {}
        csvio.export(conn, out, site_id, report=report)
        if report.get("skipped"):
            click.echo(f"fieldapp: {report['skipped']} damaged row(s) could not be read "
                       "and are missing from the export.", err=True)
    finally:
        if output:
            out.close()
    return 0


@cli.command("import")
@click.argument("file")
@data_option
def import_(file, data):
    """Merge a CSV export into the log (same uuid = same reading)."""
    from .. import csvio
    try:
        src = open(file, encoding="utf-8-sig", newline="")
    except OSError as e:
        raise InputError(f"cannot read {file}: {e.strerror}", "file") from None
    with open_log(data) as conn:
        try:
            with src:
                counts = csvio.import_csv(conn, src)
        except UnicodeDecodeError:
            raise InputError(f"{file} is not UTF-8 text; choose a fieldapp log export.",
                             "file") from None
    click.echo(f"fieldapp: imported {counts['added']} new readings, {counts['skipped']} already "
               f"in the log, {counts['voided']} voids.", err=True)
    return 0


@cli.command("init-db")
@data_option
def init_db(data):
    """Create the log, or bring its schema up to date (the server also does this
    at start). A damaged, foreign or newer file is refused and left as it is."""
    from pathlib import Path

    from .. import store
    from ..web.db import init_db as init
    if db_url():
        from ..store.pg import redact
        before, now = init(db_url())
        where, at = redact(db_url()), "in"
    else:
        folder = Path(data_dir(data))
        folder.mkdir(parents=True, exist_ok=True)
        where, at = folder / store.DB_NAME, "at"
        before, now = init(where)
    if before is None:
        click.echo(f"fieldapp: new log {at} {where} (schema {now}).", err=True)
    elif before == now:
        click.echo(f"fieldapp: the log {at} {where} is up to date (schema {now}).", err=True)
    else:
        click.echo(f"fieldapp: the log {at} {where} went from schema {before} to {now}.",
                   err=True)
    return 0


@cli.command()
@data_option
def demo(data):
    """Load the invented demo scenario into a log."""
    from .. import demo as demo_mod
    with open_log(data) as conn:
        n = demo_mod.load(conn)
    click.echo(f"fieldapp: demo scenario loaded, {n} new readings (invented data).", err=True)
    return 0


def _args(**kw):
    import types
    return types.SimpleNamespace(**kw)


@cli.command()
@click.argument("output")
@data_option
def backup(output, data):
    """Copy the log safely, even while the server runs (OUTPUT: a new file, or a
    folder where a dated name is chosen)."""
    from .. import backup as backup_mod
    sqlite_only("backup")
    return backup_mod.cmd_backup(_args(output=output, data=data))


@cli.command()
@click.argument("file")
@data_option
def restore(file, data):
    """Bring back a backup; the current log is kept aside. Stop the server first."""
    from .. import backup as backup_mod
    sqlite_only("restore")
    return backup_mod.cmd_restore(_args(file=file, data=data))


@cli.command(context_settings={"ignore_unknown_options": True, "allow_extra_args": True,
                               "help_option_names": []}, add_help_option=False)
@click.argument("args", nargs=-1, type=click.UNPROCESSED)
def bench(args):
    """Benchmarks (a checkout's tests/benchmarks/): print figures beside floors."""
    from .. import REPO_ROOT
    folder = REPO_ROOT / "tests" / "benchmarks"
    if not (folder / "bench.py").is_file():
        click.echo("fieldapp: the benchmarks are in the repository's tests/benchmarks/; run "
                   "'python -m fieldapp bench' from a checkout.", err=True)
        return EXIT_BAD_INPUT
    sys.path.insert(0, str(folder))
    import bench as bench_mod
    try:
        return bench_mod.main(list(args))
    except SystemExit as e:          # argparse's --help and its errors
        return e.code if isinstance(e.code, int) else EXIT_BAD_INPUT
