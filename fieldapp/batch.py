"""Convert a CSV file of readings in chunks: the engine behind `convert-csv`.

Rows are read in chunks, each chunk is converted by the same vectorized core
as a single reading (science.convert.convert_batch); cells are read by
fieldapp.forms, and written out before the next chunk is read, so memory
stays flat however long the file is.

The work is done a column at a time, not a cell at a time: a column of plain
decimals becomes floats in one numpy call (anything else, a decimal comma
included, goes cell by cell through :func:`fieldapp.forms.parse_number`), a
column of words is parsed once per distinct word, and the computed columns
are formatted per column with the one formatter's rule (:func:`fmt.number`,
six significant digits), and the lines are joined from the columns with the
quoting csv.writer uses.
"""
from __future__ import annotations

import csv
import gc
import json
import math
import re
from itertools import islice
from typing import Iterable, Iterator, TextIO

import numpy as np

from . import forms
from .fmt import number
from .science import InputError, convert, extracts

#: Input columns convert-csv understands; only value and unit are required.
INPUT_COLUMNS = ("value", "unit", "sample", "ratio", "temp_c", "compensated", "sp",
                 "texture", "tds_factor", "theta_g_pct", "matric_MPa", "ece_method", "crop",
                 "salt_type")

#: Output columns, in order, appended after the input columns.
OUTPUT_COLUMNS = ("ec25_dS_m", "ece_dS_m", "ece_method", "psi_s_MPa", "psi_s_method",
                  "psi_s_handbook60_MPa", "psi_s_rule_004_MPa", "psi_s_nacl_pitzer_MPa",
                  "psi_s_seawater_pss78_MPa",
                  "tds_mg_L", "relative_yield_pct", "leaching_requirement", "flags")

CHUNK_ROWS = 50_000

#: A character that sends a number column cell by cell through
#: parse_number: the cells of a column made only of the characters that
#: parse_number passes to float() (digits, point, signs, exponent) are read
#: by one numpy call, which reads them as float() does; a cell float()
#: refuses ("1.2.3", "e") sends the column cell by cell too.
_NOT_PLAIN_RE = re.compile(r"[^0-9.+\-eE\n]")
#: Number columns of the input -> the batch's names, in the order a row's
#: cells were read before (the first bad cell of a row is the one named).
_NUMBER_COLUMNS = (("temp_c", "temp_c"), ("sp", "sp_pct"), ("tds_factor", "tds_factor"),
                   ("theta_g_pct", "theta_g_pct"), ("matric_MPa", "matric_MPa"))


class RowError(InputError):
    """An input error located at a line of the file."""

    def __init__(self, message: str, field: str | None = None, line: int | None = None):
        super().__init__(message, field)
        self.line = line


def _cell_number(cell: str, line: int, field: str) -> float:
    if cell is None or cell.strip() == "":
        return math.nan
    try:
        x = forms.parse_number(cell, field)
    except InputError as e:
        raise RowError(f"line {line}: {e.message}", field, line) from None
    return math.nan if x is None else x


def _number_column(col, first_line: int, field: str, required: bool = False) -> np.ndarray:
    """A column of typed numbers -> floats (NaN where empty; with ``required``
    an empty cell is refused, in line order with the cells that are not numbers).
    A column of few distinct texts (a temperature, a factor) is parsed once
    per text; a column of plain decimals in one numpy call; the rest cell by cell."""
    distinct = set(col)
    if len(distinct) * 8 <= len(col):
        memo = {}
        for text in distinct:
            try:
                memo[text] = _cell_number(text, 0, field)
                if required and math.isnan(memo[text]):
                    _empty(0)
            except RowError:
                memo = None             # name the first bad line, in line order
                break
        if memo is not None:
            return np.fromiter(map(memo.__getitem__, col), dtype=float, count=len(col))
    out = _plain_numbers(col)
    if out is None:
        out = np.empty(len(col))
        for i, c in enumerate(col):
            out[i] = x = _cell_number(c, first_line + i, field)
            if required and math.isnan(x):
                _empty(first_line + i)
    elif required and np.isnan(out).any():
        _empty(first_line + int(np.flatnonzero(np.isnan(out))[0]))
    return out


def _plain_numbers(col) -> np.ndarray | None:
    """Floats of a column of plain decimals (NaN where empty), or None."""
    try:
        joined = "\n".join(col)
    except TypeError:                   # a short row's missing cells (None)
        joined = "\n".join(c or "" for c in col)
    if _NOT_PLAIN_RE.search(joined):
        return None
    try:
        out = np.array([c or "nan" for c in col], dtype=float)
    except ValueError:                  # "1.2.3", or a cell holding a newline of its own
        return None
    return None if np.isinf(out).any() else out


def _empty(line: int):
    raise RowError(f"line {line}: the value is empty; type the number the meter shows.",
                   "value", line)


def _word_column(col, parse, first_line: int, field: str) -> np.ndarray:
    """A column of words, each distinct text parsed once (``parse`` may raise
    InputError: the first line holding that text is named)."""
    memo = {}
    for text in set(col):
        try:
            memo[text] = parse(text)
        except InputError as e:
            line = first_line + col.index(text)
            memo[text] = RowError(f"line {line}: {e.message}", field, line)
    bad = [e for e in memo.values() if isinstance(e, RowError)]
    if bad:
        raise min(bad, key=lambda e: e.line)
    out = np.empty(len(col), dtype=object)
    out[:] = list(map(memo.__getitem__, col))
    return out


def _strip(text) -> str:
    return (text or "").strip()


def _or_none(parse):
    return lambda text: parse(_strip(text)) if _strip(text) else None


def _check_sample(kind):
    if kind not in extracts.SAMPLE_KINDS:
        raise InputError(f"unknown sample kind {kind!r}; use one of: "
                         + ", ".join(extracts.SAMPLE_KINDS), "sample")
    return kind


def _unit(units, text) -> str:
    """The unit as typed (stripped; an empty one is refused by the parser)."""
    text = _strip(text)
    units.parse_unit(text)
    return text


def _checked(check):
    """A category check that returns the text it accepted."""
    def run(text):
        text = _strip(text) or None
        if text is not None:
            check(text)
        return text
    return run


def _row_cells(columns: dict, n: int, first_line: int) -> dict:
    """The cells read row by row before (salt type, ratio, numbers, the
    compensation word): the first bad row among them is named."""
    empty = [None] * n
    got, errors = {}, []
    readers = [("salt_type", lambda c: _word_column(c, lambda t: forms.parse_salt_type(
                    _strip(t)), first_line, "salt_type")),
               ("ratio_n", lambda c: _word_column(c, lambda t: forms.parse_ratio(_strip(t))
                                                  if _strip(t) else math.nan,
                                                  first_line, "ratio").astype(float))]
    readers += [(name, lambda c, f=field: _number_column(c, first_line, f))
                for field, name in _NUMBER_COLUMNS]
    readers.append(("compensated", lambda c: _word_column(c, forms.parse_bool, first_line,
                                                          "compensated").astype(bool)))
    source = {"salt_type": "salt_type", "ratio_n": "ratio", "compensated": "compensated",
              **{name: field for field, name in _NUMBER_COLUMNS}}
    for name, read in readers:
        try:
            got[name] = read(columns.get(source[name], empty))
        except RowError as e:
            errors.append(e)
    if errors:
        raise min(errors, key=lambda e: e.line)
    return got


def _first_bad(mask, first_line: int, message: str, field: str) -> None:
    if mask.any():
        line = first_line + int(np.flatnonzero(mask)[0])
        raise RowError(f"line {line}: {message}", field, line)


def columns_to_batch(columns: dict, n: int, first_line: int) -> convert.Batch:
    """Columns of typed cells (lists by input column name, each of n cells)
    -> a Batch, or RowError naming the line of the first bad cell."""
    from .science import tolerance, units
    empty = [None] * n
    value = _number_column(columns["value"], first_line, "value", required=True)
    nums = _row_cells(columns, n, first_line)
    unit = _word_column(columns["unit"], lambda t: _unit(units, t), first_line, "unit")
    sample = _word_column(columns.get("sample", empty),
                          lambda t: _check_sample(_strip(t).lower() or "paste"),
                          first_line, "sample")
    texture = _word_column(columns.get("texture", empty), _checked(extracts.sp_for_texture),
                           first_line, "texture")
    crop = _word_column(columns.get("crop", empty), _checked(tolerance.find_crop),
                        first_line, "crop")
    method = _word_column(columns.get("ece_method", empty), lambda t: _strip(t) or None,
                          first_line, "ece_method")
    t = nums["temp_c"]
    _first_bad((t < -5) | (t > 60), first_line, "temperature must be between −5 and 60 °C.",
               "temp_c")
    _first_bad(value < 0, first_line, "EC cannot be negative.", "value")
    return convert.make_batch(value=value, unit=unit, sample=sample, ratio_n=nums["ratio_n"],
                              temp_c=t, compensated=nums["compensated"],
                              sp_pct=nums["sp_pct"], texture=texture,
                              tds_factor=nums["tds_factor"], theta_g_pct=nums["theta_g_pct"],
                              matric_MPa=nums["matric_MPa"], ece_method=method, crop=crop,
                              salt_type=nums["salt_type"])


def format_number(x) -> str:
    """A computed cell: the one formatter, six significant digits, empty for missing."""
    return number(x, 6, missing="")


def _format_column(arr) -> list[str]:
    """A computed column as CSV cells. Floats take ``%.6g`` where that is
    already plain decimals (what :func:`format_number` writes for them); the
    rest (missing, zero, very small or large) go through the formatter itself."""
    if arr.dtype == object:
        return ["" if v is None else str(v) for v in arr]
    if arr.dtype == bool:
        return ["yes" if v else "no" for v in arr]
    a = np.asarray(arr, dtype=float)
    finite = np.isfinite(a)
    if not finite.any():
        return [""] * len(a)
    cells = ["%.6g" % v for v in a.tolist()]
    with np.errstate(invalid="ignore"):
        mag = np.abs(a)
        odd = finite & ((mag < 1e-4) | (mag >= 999_999))
    for i in np.flatnonzero(~finite).tolist():
        cells[i] = ""
    for i in np.flatnonzero(odd).tolist():
        cells[i] = format_number(a[i])
    return cells


def chunks(reader: Iterable, size: int = CHUNK_ROWS) -> Iterator[list]:
    it = iter(reader)
    while True:
        buf = list(islice(it, size))
        if not buf:
            return
        yield buf


def _json_column(arr) -> list:
    if arr.dtype == object or arr.dtype == bool:
        return [None if v is None else (bool(v) if arr.dtype == bool else v) for v in arr]
    return [None if not math.isfinite(v) else v for v in arr.astype(float).tolist()]


def _even(chunk: list, width: int) -> list:
    """The rows as lists of exactly ``width`` cells, blank lines skipped (as
    csv.DictReader reads them: a short row's missing cells are None, a long
    row's extra cells are dropped)."""
    if set(map(len, chunk)) == {width}:
        return chunk
    return [r if len(r) == width else (r + [None] * (width - len(r)))[:width]
            for r in chunk if r]


def _write_json(dst, in_cols, in_columns, out, out_cols, n):
    cols = {c: _json_column(out[c]) for c in out_cols if c != "flags"}
    if "flags" in out_cols:
        cols["flags"] = [[f for f in codes.split(";") if f]
                         for codes in out["flags"].codes_column().tolist()]
    ins = [in_columns[c] for c in in_cols]
    outs = [cols[c] for c in out_cols]
    for i in range(n):
        rec = dict(zip(in_cols, (col[i] for col in ins)))
        rec.update(zip(out_cols, (col[i] for col in outs)))
        dst.write(json.dumps(rec, ensure_ascii=False) + "\n")


#: A cell csv.writer quotes (QUOTE_MINIMAL, excel dialect, CRLF lines):
#: one holding a comma, a double quote or a line break.
_NEEDS_QUOTES_RE = re.compile(r'[,"\r\n]')
_QUOTE_OR_BREAK_RE = re.compile(r'["\r\n]')


def _csv_cells(col) -> list[str]:
    """A column as the text csv.writer writes for each cell (None as empty,
    a cell with a comma, quote or line break in quotes)."""
    try:
        joined = ",".join(col)
    except TypeError:
        col = ["" if c is None else str(c) for c in col]
        joined = ",".join(col)
    if joined.count(",") == len(col) - 1 and not _QUOTE_OR_BREAK_RE.search(joined):
        return col
    return ['"' + c.replace('"', '""') + '"' if _NEEDS_QUOTES_RE.search(c) else c for c in col]


def _write_csv(dst, in_cols, in_columns, out, out_cols):
    """The chunk's rows as CSV lines, built a column at a time: the same text
    csv.writer writes row by row, at a fraction of the cost per cell."""
    cols = {c: _format_column(out[c]) for c in out_cols if c != "flags"}
    if "flags" in out_cols:
        cols["flags"] = out["flags"].codes_column().tolist()
    cells = [_csv_cells(in_columns[c]) for c in in_cols] + \
        [_csv_cells(cols[c]) for c in out_cols]
    dst.write("\r\n".join(map(",".join, zip(*cells))) + "\r\n")


def convert_csv(src: TextIO, dst: TextIO, chunk_rows: int = CHUNK_ROWS,
                fmt: str = "csv") -> int:
    """Read readings from ``src`` (CSV with a header), write them with the
    computed columns to ``dst``: as CSV, or with ``fmt="json"`` as one JSON
    object per line (numbers unrounded, flags as a list of codes). Returns the
    number of rows. Raises RowError naming the line of the first row that
    cannot be a reading."""
    paused = gc.isenabled()
    gc.disable()        # nothing here makes cycles; a million rows' lists made the
    try:                # collector walk every live chunk again and again
        return _convert(src, dst, chunk_rows, fmt)
    finally:
        if paused:
            gc.enable()


def _convert(src: TextIO, dst: TextIO, chunk_rows: int, fmt: str) -> int:
    reader = csv.reader(src)
    header = next(reader, None)
    if not header or "value" not in header or "unit" not in header:
        raise RowError("the file needs a header row with at least the columns value and unit "
                       f"(known columns: {', '.join(INPUT_COLUMNS)}).", "file")
    in_cols = list(header)
    pos = {c: i for i, c in enumerate(in_cols)}      # a repeated name: its last cell, as before
    out_cols = [c for c in OUTPUT_COLUMNS if c not in in_cols]
    writer = csv.writer(dst, lineterminator="\r\n")
    if fmt != "json":
        writer.writerow(in_cols + out_cols)
    line = 2
    total = 0
    for chunk in chunks(reader, chunk_rows):
        chunk = _even(chunk, len(in_cols))
        if not chunk:
            continue
        by_pos = list(zip(*chunk))
        columns = {c: by_pos[i] for c, i in pos.items()}
        try:
            out = convert.convert_batch(columns_to_batch(columns, len(chunk), line))
        except RowError:
            raise
        except InputError as e:
            raise RowError(f"lines {line}-{line + len(chunk) - 1}: {e.message}", e.field) from None
        if fmt == "json":
            _write_json(dst, in_cols, columns, out, out_cols, len(chunk))
        else:
            _write_csv(dst, in_cols, columns, out, out_cols)
        line += len(chunk)
        total += len(chunk)
    return total
