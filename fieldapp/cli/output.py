"""The one output option every listing command shares: readable text by
default, ``--json`` for programs, ``--csv`` for spreadsheets."""
from __future__ import annotations

import csv
import json
import sys
from typing import Callable, Iterable

import click

from ..fmt import number


def output_option(f):
    """``--json`` / ``--csv`` (one of them; readable text without either)."""
    f = click.option("--csv", "fmt", flag_value="csv", default=None,
                     help="print CSV (one row per item, a header first)")(f)
    f = click.option("--json", "fmt", flag_value="json", default=None,
                     help="print JSON")(f)
    return f


def _cell(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, (list, tuple)):
        if all(not isinstance(x, (dict, list)) for x in v):
            return ";".join(_cell(x) for x in v)
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, dict):
        return json.dumps(v, ensure_ascii=False)
    return str(v)


def write_csv(rows: Iterable[dict], columns: list[str] | None = None, out=None) -> None:
    """Rows as CSV: the given columns (or the first row's keys); lists of plain
    values joined with ';', nested values as JSON."""
    out = out or sys.stdout
    w = csv.writer(out, lineterminator="\n")
    header_done = False
    for row in rows:
        if not header_done:
            columns = columns or list(row)
            w.writerow(columns)
            header_done = True
        w.writerow([_cell(row.get(c)) for c in columns])
    if not header_done and columns:
        w.writerow(columns)


def num(x, digits: int = 4) -> str:
    """A number for a person: a few significant digits, never 1e-05."""
    return number(x, digits)


def table(rows: list[dict], columns: list[tuple[str, str]], out=None) -> None:
    """A plain text table: (key, heading) columns, widths from the content."""
    out = out or sys.stdout
    cells = [[_text(r.get(k)) for k, _ in columns] for r in rows]
    widths = [max([len(h)] + [len(c[i]) for c in cells]) for i, (_, h) in enumerate(columns)]
    out.write("  ".join(h.ljust(w) for (_, h), w in zip(columns, widths)).rstrip() + "\n")
    for c in cells:
        out.write("  ".join(v.ljust(w) for v, w in zip(c, widths)).rstrip() + "\n")


def _text(v) -> str:
    if isinstance(v, float):
        return num(v)
    return _cell(v)


def emit(data, fmt: str | None, text: Callable[[object], None],
         columns: list[str] | None = None) -> None:
    """Print ``data`` (a dict or a list of dicts) as JSON, CSV or by ``text``."""
    if fmt == "json":
        json.dump(data, sys.stdout, ensure_ascii=False, indent=2)
        sys.stdout.write("\n")
    elif fmt == "csv":
        write_csv([data] if isinstance(data, dict) else data, columns)
    else:
        text(data)
