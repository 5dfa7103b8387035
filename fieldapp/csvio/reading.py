"""Import, first step: read an export file and check every cell."""
from __future__ import annotations

import csv
import re
from typing import IO, Iterator

from ..science import InputError
from .cells import _parse_acks, unneutralize
from .columns import BOM, COLUMNS, NUMERIC, OPTIONAL_COLUMNS


class ImportError_(InputError):
    pass


_CODE_RE = re.compile(r"^[a-z][a-z0-9_]{0,59}$")
_VERSION_RE = re.compile(r"^[0-9A-Za-z.+_-]{1,40}$")
#: Text cells the reading itself does not validate, with their longest length.
_TEXT_MAX = {"void_reason": 2000, "ece_method": 200, "psi_s_method": 200}


def _num(cell: str, line: int, col: str):
    """A number cell, read by the API's own rule (ASCII digits, a decimal comma
    only when unambiguous, no 1_000, nothing that underflows to 0)."""
    if cell == "":
        return None
    from ..records import FIELD_TEXT_MAX, check_number_text
    from ..forms import parse_number
    if len(cell) > FIELD_TEXT_MAX:
        raise ImportError_(f"line {line}: {col} is {len(cell)} characters long; that is "
                           "not a number.", col)
    try:
        check_number_text(cell, col)
        return parse_number(cell, col)
    except InputError as e:
        raise ImportError_(f"line {line}: {col}: {e.message}", col) from None


def _timestamp(cell: str, line: int, col: str) -> str | None:
    """voided_at, recorded_at: an ISO 8601 time with its UTC offset, or empty."""
    if cell == "":
        return None
    import datetime as dt
    try:
        t = dt.datetime.fromisoformat(cell.strip().replace("Z", "+00:00"))
    except ValueError:
        t = None
    if t is None or t.tzinfo is None or not (1990 <= t.year <= 2200) or len(cell) > 40:
        raise ImportError_(f"line {line}: {col} {cell[:40]!r} is not a time like "
                           "2026-05-14T09:30:00+00:00.", col)
    return t.isoformat(timespec="seconds")


def _check_text_cells(r: dict, line: int) -> None:
    for col, limit in _TEXT_MAX.items():
        if len(r[col]) > limit:
            raise ImportError_(f"line {line}: {col} is at most {limit} characters.", col)
    codes = [c for c in r["flags"].split(";") if c] if r["flags"] else []
    bad = [c for c in codes if not _CODE_RE.match(c)]
    if bad:
        raise ImportError_(f"line {line}: flags {bad[0][:40]!r} is not a flag code "
                           "(codes look like unit_slip, joined by ';').", "flags")
    r["flags"] = ";".join(codes)
    if r["app_version"] and not _VERSION_RE.match(r["app_version"]):
        raise ImportError_(f"line {line}: app_version {r['app_version'][:40]!r} is not a "
                           "version number.", "app_version")
    acks = _parse_acks(r["flag_acks"]) if r["flag_acks"] else []
    if r["flag_acks"].strip() and not acks:
        raise ImportError_(f"line {line}: flag_acks must be code=note pairs joined by ' | '.",
                           "flag_acks")
    for code, note in acks:
        if code not in codes:
            raise ImportError_(f"line {line}: flag_acks acknowledges {code[:40]!r}, which is "
                               "not one of the reading's flags.", "flag_acks")
        if len(note) > 2000:
            raise ImportError_(f"line {line}: an acknowledgement note is at most 2000 "
                               "characters.", "flag_acks")
    if r["status"] == "void" and not " ".join(r["void_reason"].split()):
        raise ImportError_(f"line {line}: a void reading needs its void_reason.",
                           "void_reason")
    if r["status"] != "void" and (r["void_reason"] or r["voided_at"]):
        raise ImportError_(f"line {line}: void_reason and voided_at belong to void "
                           "readings only.", "void_reason")


#: A line of the file as csv.reader reads it from a file opened with
#: newline="": ended by CRLF, LF or CR (CSV cells may hold other line breaks).
_LINE_RE = re.compile(r"[^\r\n]*(?:\r\n|\r|\n)|[^\r\n]+$")


def _lines(text: str, start: int) -> Iterator[str]:
    """The lines of ``text`` from ``start`` on, without copying the text."""
    return (m.group() for m in _LINE_RE.finditer(text, start))


def read_export(src: IO[str]) -> list[dict]:
    """Parse and check a whole export file; raise ImportError_ on the first bad line.
    Every cell gets the API's validation (the reading's own fields are checked
    again when it is built); the links between rows are checked later, once
    every row is read, by :func:`import_rows`. The text is read once and its
    lines are walked in place; each row's cells are dropped once checked."""
    text = src.read()
    reader = csv.reader(_lines(text, 1 if text.startswith(BOM) else 0))
    try:
        header = next(reader)
    except StopIteration:
        raise ImportError_("The file is empty; choose a fieldapp log export.", "file") from None
    except csv.Error as e:
        raise ImportError_(f"This is not a CSV file ({e}).", "file") from None
    header, body = _after_spreadsheet(header, reader)
    del text
    missing = [c for c in COLUMNS if c not in header and c not in OPTIONAL_COLUMNS]
    if missing:
        raise ImportError_("This is not a fieldapp log export: missing columns "
                           + ", ".join(missing[:6]) + (" …" if len(missing) > 6 else "")
                           + ". Nothing was imported.", "file")
    idx = [(c, header.index(c), c in NUMERIC) for c in COLUMNS if c in header]
    rows = []
    for k, cells in enumerate(body):
        body[k] = None                  # the cells go as their row is made
        if cells and cells != [""]:
            rows.append(_row(cells, idx, len(header), k + 2))
    return rows


def _row(cells: list[str], idx, width: int, line: int) -> dict:
    """One row of the file, every cell checked."""
    if len(cells) != width:
        raise ImportError_(f"line {line}: {len(cells)} cells, the header has "
                           f"{width}. Nothing was imported.", "file")
    r = dict.fromkeys(OPTIONAL_COLUMNS, "")     # a column an older export lacks
    r.update({c: _num(cells[i], line, c) if numeric else unneutralize(cells[i])
              for c, i, numeric in idx})
    if r["value"] is None or not r["unit"] or not r["uuid"] or not r["site"]:
        raise ImportError_(f"line {line}: site, value, unit and uuid are required.", "file")
    if r["compensated"] not in ("yes", "no"):
        raise ImportError_(f"line {line}: compensated must be yes or no.", "file")
    if r["status"] not in ("current", "corrected", "void"):
        raise ImportError_(f"line {line}: unknown status {r['status'][:40]!r}.", "file")
    for c in ("voided_at", "recorded_at"):
        r[c] = _timestamp(r[c], line, c)
    _check_text_cells(r, line)
    r["_line"] = line
    return r


def _after_spreadsheet(header: list[str], reader) -> tuple[list[str], list[list[str]]]:
    """The header and rows with what a spreadsheet did on open and save undone
    (:func:`fieldapp.roundtrip.restore`), or refused naming the columns that
    can no longer be trusted."""
    from .. import roundtrip
    try:
        body = list(reader)
    except csv.Error as e:
        raise ImportError_(f"The file is not valid CSV ({e}). Nothing was imported.",
                           "file") from None
    try:
        header, body = roundtrip.restore(header, body, NUMERIC)
    except roundtrip.Untrusted as e:
        raise ImportError_(f"{e} Nothing was imported.", e.columns[0]) from None
    return header, body
