"""Typed cells of convert-csv's input, a column at a time, into a Batch.

A column of plain decimals becomes floats in one numpy call (anything else,
a decimal comma included, goes cell by cell through
:func:`fieldapp.forms.parse_number`), a column of words is parsed once per
distinct word; a bad cell raises :class:`RowError` naming its line.
"""
from __future__ import annotations

import dataclasses
import math
import re

import numpy as np

from .. import forms
from ..science import InputError, convert, extracts
from ..science.coded import coded, coded_table


#: The input columns read as words (a context of a reading, shared by
#: many rows of a file); the rest are numbers.
CONTEXT_COLUMNS = ("unit", "sample", "ratio", "texture", "crop", "ece_method", "compensated",
                   "salt_type")


class RowError(InputError):
    """An input error located at a line of the file."""

    def __init__(self, message: str, field: str | None = None, line: int | None = None):
        super().__init__(message, field)
        self.line = line

    def __reduce__(self):               # from a helper process, its field and line too
        return RowError, (self.message, self.field, self.line)


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
    sample = col[:: max(1, len(col) // 2000)]
    distinct = set(col) if len(set(sample)) * 8 <= len(sample) else ()
    if distinct and len(distinct) * 8 <= len(col):
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
    if _NOT_PLAIN_RE.search(joined) or joined.count("\n") != len(col) - 1:
        return None                     # not plain, or a cell holding a line break of its own
    empty = not joined or joined.startswith("\n") or joined.endswith("\n") or "\n\n" in joined
    try:                                # float() reads these as numpy's cast reads them
        out = np.fromiter(map(float, (c or "nan" for c in col) if empty else col),
                          dtype=float, count=len(col))
    except ValueError:                  # "1.2.3"
        return None
    return None if np.isinf(out).any() else out


def _empty(line: int):
    raise RowError(f"line {line}: the value is empty; type the number the meter shows.",
                   "value", line)


def _word_column(col, parse, first_line: int, field: str) -> np.ndarray:
    """A column of words, each distinct text parsed once (``parse`` may raise
    InputError: the first line holding that text is named); the column keeps
    each row's code (:func:`fieldapp.science.coded.coded`)."""
    index = dict.fromkeys(col)
    values, bad = [], []
    for i, text in enumerate(index):
        index[text] = i
        try:
            values.append(parse(text))
        except InputError as e:
            line = first_line + col.index(text)
            bad.append(RowError(f"line {line}: {e.message}", field, line))
    if bad:
        raise min(bad, key=lambda e: e.line)
    return coded(values, np.fromiter(map(index.__getitem__, col), dtype=np.intp,
                                     count=len(col)))


def _strip(text) -> str:
    return (text or "").strip()


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
    from ..science import tolerance, units
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



def columns_to_batch_in_contexts(numbers: dict, contexts: dict, codes: np.ndarray | None,
                                 n: int, first_line: int):
    """A Batch of n readings whose words repeat: ``numbers`` (the number
    columns, value among them, every row's cell), ``contexts`` (the word
    columns, :data:`CONTEXT_COLUMNS`, one cell per distinct context) and
    ``codes`` (each row's context; None: one context, or none). Each context
    is read once; its parsed cells go to every row with their codes
    (:func:`fieldapp.science.coded.coded_table`), so the conversion finds
    its groups from integers. A refused cell raises with a line that need
    not be its own: the caller then reads the chunk the usual way."""
    k = len(next(iter(contexts.values()))) if contexts else 1
    codes = np.zeros(n, dtype=np.intp) if codes is None else codes
    ctx = columns_to_batch({**contexts, "value": ["0"] * k}, k, first_line)
    value = _number_column(numbers["value"], first_line, "value", required=True)
    _first_bad(value < 0, first_line, "EC cannot be negative.", "value")
    full = {name: _number_column(numbers[field], first_line, field)
            for field, name in _NUMBER_COLUMNS if field in numbers}
    if "temp_c" in full:
        t = full["temp_c"]
        _first_bad((t < -5) | (t > 60), first_line, "temperature must be between −5 and 60 °C.",
                   "temp_c")
    fields = {f.name: getattr(ctx, f.name) for f in dataclasses.fields(ctx)
              if f.name not in ("value", "context")}
    fields = {name: full[name] if name in full else None if col is None
              else coded_table(col, codes) for name, col in fields.items()}
    return convert.make_batch(value=value, **fields)
