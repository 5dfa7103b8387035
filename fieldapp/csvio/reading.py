"""Import, first step: read an export file and check every cell."""
from __future__ import annotations

import csv
import re
from itertools import islice
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
#: Characters read from the file at a time.
_READ_BLOCK = 1 << 20
#: Rows handed to the spreadsheet repair (roundtrip.restore) at a time.
_ROW_BLOCK = 2000


def _lines(src: IO[str]) -> Iterator[str]:
    """The lines of ``src``, a block of text at a time: a line is handed on
    once its end is read (a CR at the end of a block may be the first half of
    a CRLF, so it waits for the next block)."""
    tail, first = "", True
    while True:
        piece = src.read(_READ_BLOCK)
        text = tail + piece
        if first and piece:
            text, first = text[1:] if text.startswith(BOM) else text, False
        if not piece:
            yield from (m.group() for m in _LINE_RE.finditer(text))
            return
        cut = text.rfind("\n") + 1 or text.rfind("\r", 0, len(text) - 1) + 1
        tail = text[cut:]
        yield from (m.group() for m in _LINE_RE.finditer(text, 0, cut))


def read_export(src: IO[str]) -> list[dict]:
    """Every row of an export file, checked (:func:`iter_export`)."""
    return list(iter_export(src))


def iter_export(src: IO[str]) -> Iterator[dict]:
    """Parse and check an export file, yielding its rows in order; raise
    ImportError_ for a bad file. Every cell gets the API's validation (the
    reading's own fields are checked again when it is converted); the links
    between rows are checked by the import (csvio.plan). The file is read a
    block at a time and only a block of rows is held.

    The messages are those of a whole-file check: a file a spreadsheet
    changed beyond repair is refused naming every such column (after the last
    row), else one with columns missing, else the first bad line; no row is
    yielded after one of these is found, and the refusal comes at the end."""
    reader = csv.reader(_lines(src))
    try:
        header = next(reader)
    except StopIteration:
        raise ImportError_("The file is empty; choose a fieldapp log export.", "file") from None
    except csv.Error as e:
        raise ImportError_(f"This is not a CSV file ({e}).", "file") from None
    from .. import roundtrip
    clean = roundtrip.restore(header, [], NUMERIC)[0]
    missing = [c for c in COLUMNS if c not in clean and c not in OPTIONAL_COLUMNS]
    idx = [(c, clean.index(c), c in NUMERIC) for c in COLUMNS if c in clean]
    problems: dict = {}
    bad = None
    line = 2
    while True:
        block = _row_block(reader)
        if not block:
            break
        try:
            roundtrip.restore(header, block, NUMERIC, first_line=line)
        except roundtrip.Untrusted as e:
            for col, where in e.problems.items():
                problems.setdefault(col, where)
        for k, cells in enumerate(block):
            if problems or bad or missing:
                break
            if cells and cells != [""]:
                try:
                    row = _row(cells, idx, len(clean), line + k)
                except ImportError_ as e:
                    bad = e
                    break
                yield row
        line += len(block)
    if problems:
        e = roundtrip.Untrusted(problems)
        raise ImportError_(f"{e} Nothing was imported.", e.columns[0])
    if missing:
        raise ImportError_("This is not a fieldapp log export: missing columns "
                           + ", ".join(missing[:6]) + (" …" if len(missing) > 6 else "")
                           + ". Nothing was imported.", "file")
    if bad:
        raise bad


def _row_block(reader) -> list[list[str]]:
    try:
        return list(islice(reader, _ROW_BLOCK))
    except csv.Error as e:
        raise ImportError_(f"The file is not valid CSV ({e}). Nothing was imported.",
                           "file") from None


#: A number cell as the export writes it: read by float() alike (no comma, no
#: exponent, no spaces, ASCII digits).
_PLAIN_NUMBER_RE = re.compile(r"-?(?:0|[1-9][0-9]*)(?:\.[0-9]+)?")


def _row(cells: list[str], idx, width: int, line: int) -> dict:
    """One row of the file, every cell checked."""
    if len(cells) != width:
        raise ImportError_(f"line {line}: {len(cells)} cells, the header has "
                           f"{width}. Nothing was imported.", "file")
    r = dict.fromkeys(OPTIONAL_COLUMNS, "")     # a column an older export lacks
    plain = _PLAIN_NUMBER_RE.fullmatch
    for c, i, numeric in idx:
        cell = cells[i]
        if not numeric:
            r[c] = unneutralize(cell) if cell[:1] == "'" else cell
        elif cell == "":
            r[c] = None
        elif len(cell) <= 40 and plain(cell):
            r[c] = float(cell)
        else:
            r[c] = _num(cell, line, c)
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
