"""Command line: the page's features for the office and scripts (click).

    fieldapp convert 1413 µS/cm --temp 18 --sample water --crop tomato [--json]
    fieldapp convert-csv readings.csv > converted.csv
    fieldapp sites list | show NAME | add NAME ... | set NAME --crop tomato ...
    fieldapp readings list [--site NAME] [--from DATE] [--to DATE] [--kind KIND]
    fieldapp void UUID --reason "..." ; correct UUID --value 1.3 ; ack UUID CODE --note "..."
    fieldapp meters list | add | show ; calibrate METER VALUE UNIT ; targets list | set | delete
    fieldapp export | import | backup | restore | demo | serve | init-db | bench
    fieldapp sync [URL --code CODE] [--follow SITE] ; office code | devices

Every command goes through the functions the web API calls (records, store,
meters, sites, interpret), never a second implementation. Listing commands
share one output option, ``--json`` or ``--csv``. Input that cannot be used
exits with status 2 and one line on stderr, never a traceback; a reader that
stops early (``| head -1``) ends the program quietly.
"""
from __future__ import annotations

import os
import sqlite3
import sys

import click

from ..science import InputError

EXIT_BAD_INPUT = 2


def _reader_went_away() -> int:
    """The program reading our output stopped (``| head -1``): say nothing more.
    Standard output is pointed at the null device so that Python's last flush
    at exit cannot raise again (the recipe of the Python docs, "Note on SIGPIPE")."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):   # not a real file (tests)
        pass
    return 1


def _bad(message: str) -> int:
    click.echo(f"fieldapp: {' '.join(str(message).split())}", err=True)
    return EXIT_BAD_INPUT


def _sync_refused(e: Exception) -> int | None:
    """The status for a sync refused or cut off (nothing confirmed is lost), or
    None for any other error. A SyncError can only come from a loaded
    fieldapp.sync, so the other commands, ``serve`` among them, start without
    importing it (http.client, ssl)."""
    sync = sys.modules.get("fieldapp.sync")
    if sync is None or not isinstance(e, sync.SyncError):
        return None
    _bad(e.message)
    return EXIT_BAD_INPUT if e.bad_input or e.status in (400, 403) else 1


class FieldappGroup(click.Group):
    """A click group whose errors are one line and status 2, whether it is run
    as a program or in-process by click's test runner."""

    def main(self, args=None, prog_name=None, complete_var=None, standalone_mode=True,
             **extra):
        from ..store import StoreError
        try:
            rv = super().main(args, prog_name=prog_name or "fieldapp",
                              complete_var=complete_var, standalone_mode=False, **extra)
            code = rv if isinstance(rv, int) else 0
        except BrokenPipeError:
            code = _reader_went_away()
        except click.exceptions.NoArgsIsHelpError as e:
            click.echo(e.ctx.get_help())
            code = EXIT_BAD_INPUT
        except click.UsageError as e:
            where = f" {e.ctx.command_path.split(' ', 1)[1]}" if e.ctx and " " in \
                e.ctx.command_path else ""
            code = _bad(f"{where.strip() + ': ' if where else ''}{e.format_message()} "
                        f"(see --help)")
        except click.exceptions.Exit as e:
            code = e.exit_code
        except click.Abort:
            code = 130
        except (InputError, StoreError) as e:
            code = _bad(e.message)
        except sqlite3.DatabaseError as e:     # one line, never a traceback, on a damaged log
            if hasattr(e, "sqlstate"):         # an office database on PostgreSQL (store/pg.py)
                code = _bad(f"the office database refused the request or did not answer ({e}).")
            else:
                code = _bad(f"the log could not be read or written ({e}). If it is damaged, "
                            "export what can be read and restore a backup (python -m fieldapp "
                            "restore --data DIR FILE).")
        except KeyboardInterrupt:
            code = 130
        except Exception as e:
            code = _sync_refused(e)
            if code is None:
                raise
        if standalone_mode:
            sys.exit(code)
        return code


@click.group(cls=FieldappGroup, context_settings={"help_option_names": ["-h", "--help"],
                                                  "max_content_width": 100})
@click.version_option(package_name="fieldapp", prog_name="fieldapp")
def cli():
    """Field EC readings: convert, log, export; the same features as the page."""


def _register() -> None:
    from . import convert, data, log, meters, sync   # noqa: F401 - each adds its commands


_register()


def main(argv=None) -> int:
    """``python -m fieldapp`` and the ``fieldapp`` script."""
    if sys.stdout and getattr(sys.stdout, "encoding", "utf-8").lower().replace("-", "") \
            not in ("utf8",) and not sys.stdout.isatty():
        try:   # a pipe on Windows defaults to the ANSI code page; CSV and JSON are UTF-8
            sys.stdout.reconfigure(encoding="utf-8")
        except (AttributeError, ValueError):
            pass
    return cli.main(list(sys.argv[1:] if argv is None else argv), standalone_mode=False)
