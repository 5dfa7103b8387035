"""Convert a CSV file of readings in chunks: the engine behind `convert-csv`.

Rows are read in chunks, each chunk is converted by the same vectorized core
as a single reading (science.convert.convert_batch); cells are read by
fieldapp.forms, and written out before
the next chunk is read, so memory stays flat however long the file is.
"""
from __future__ import annotations

import csv
import json
import math
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


class RowError(InputError):
    """An input error located at a line of the file."""


def _cell_number(cell: str, line: int, field: str) -> float:
    if cell is None or cell.strip() == "":
        return math.nan
    try:
        x = forms.parse_number(cell, field)
    except InputError as e:
        raise RowError(f"line {line}: {e.message}", field) from None
    return math.nan if x is None else x


def _parsed(cache: dict, text: str, parse, line: int, field: str):
    """Parse a cell once per distinct text (a column repeats few values)."""
    if text not in cache:
        try:
            cache[text] = parse(text)
        except InputError as e:
            raise RowError(f"line {line}: {e.message}", field) from None
    return cache[text]


def _chunk_to_batch(rows: list[dict], first_line: int) -> convert.Batch:
    n = len(rows)
    value = np.empty(n)
    cols = {k: np.empty(n, dtype=object)
            for k in ("unit", "sample", "texture", "ece_method", "crop", "salt_type")}
    salt_cache: dict[str, str | None] = {}
    nums = {k: np.empty(n) for k in ("ratio_n", "temp_c", "sp_pct", "tds_factor",
                                      "theta_g_pct", "matric_MPa")}
    comp = np.zeros(n, dtype=bool)
    ratio_cache: dict[str, float] = {}
    try:
        # Fast path: a column of plain decimals converts in one numpy call.
        value[:] = np.asarray([r.get("value") or "nan" for r in rows], dtype=float)
        if np.isnan(value).any():
            raise ValueError
    except ValueError:
        for i, r in enumerate(rows):
            value[i] = _cell_number(r.get("value"), first_line + i, "value")
            if math.isnan(value[i]):
                raise RowError(f"line {first_line + i}: the value is empty; type the number "
                               "the meter shows.", "value")
    for i, r in enumerate(rows):
        line = first_line + i
        cols["unit"][i] = (r.get("unit") or "").strip()
        cols["sample"][i] = (r.get("sample") or "paste").strip().lower() or "paste"
        cols["texture"][i] = (r.get("texture") or "").strip() or None
        cols["ece_method"][i] = (r.get("ece_method") or "").strip() or None
        cols["crop"][i] = (r.get("crop") or "").strip() or None
        cols["salt_type"][i] = _parsed(salt_cache, (r.get("salt_type") or "").strip(),
                                       forms.parse_salt_type, line, "salt_type")
        ratio = (r.get("ratio") or "").strip()
        nums["ratio_n"][i] = (_parsed(ratio_cache, ratio, forms.parse_ratio, line, "ratio")
                              if ratio else math.nan)
        nums["temp_c"][i] = _cell_number(r.get("temp_c"), line, "temp_c")
        nums["sp_pct"][i] = _cell_number(r.get("sp"), line, "sp")
        nums["tds_factor"][i] = _cell_number(r.get("tds_factor"), line, "tds_factor")
        nums["theta_g_pct"][i] = _cell_number(r.get("theta_g_pct"), line, "theta_g_pct")
        nums["matric_MPa"][i] = _cell_number(r.get("matric_MPa"), line, "matric_MPa")
        try:
            comp[i] = forms.parse_bool(r.get("compensated"))
        except InputError as e:
            raise RowError(f"line {line}: {e.message}", "compensated") from None
    from .science import tolerance, units
    _check_categories(cols["unit"], units.parse_unit, first_line, "unit")
    _check_categories(cols["sample"], _check_sample, first_line, "sample")
    _check_categories(cols["texture"], extracts.sp_for_texture, first_line, "texture")
    _check_categories(cols["crop"], tolerance.find_crop, first_line, "crop")
    bad_t = (nums["temp_c"] < -5) | (nums["temp_c"] > 60)
    if bad_t.any():
        i = int(np.flatnonzero(bad_t)[0])
        raise RowError(f"line {first_line + i}: temperature must be between −5 and 60 °C.",
                       "temp_c")
    neg = value < 0
    if neg.any():
        i = int(np.flatnonzero(neg)[0])
        raise RowError(f"line {first_line + i}: EC cannot be negative.", "value")
    return convert.make_batch(value=value, unit=cols["unit"], sample=cols["sample"],
                              ratio_n=nums["ratio_n"], temp_c=nums["temp_c"],
                              compensated=comp, sp_pct=nums["sp_pct"],
                              texture=cols["texture"], tds_factor=nums["tds_factor"],
                              theta_g_pct=nums["theta_g_pct"], matric_MPa=nums["matric_MPa"],
                              ece_method=cols["ece_method"], crop=cols["crop"],
                              salt_type=cols["salt_type"])


def _check_sample(kind):
    if kind not in extracts.SAMPLE_KINDS:
        raise InputError(f"unknown sample kind {kind!r}; use one of: "
                         + ", ".join(extracts.SAMPLE_KINDS), "sample")


def _check_categories(col, check, first_line: int, field: str) -> None:
    """Run ``check`` once per distinct value; report the first line of a bad one."""
    seen: set = set()
    for i, v in enumerate(col):
        if v is None or v in seen:
            continue
        try:
            check(v)
        except InputError as e:
            raise RowError(f"line {first_line + i}: {e.message}", field) from None
        seen.add(v)


def format_number(x) -> str:
    """A computed cell: the one formatter, six significant digits, empty for missing."""
    return number(x, 6, missing="")


def _format_column(arr) -> list[str]:
    if arr.dtype == object:
        return ["" if v is None else str(v) for v in arr]
    if arr.dtype == bool:
        return ["yes" if v else "no" for v in arr]
    # Six significant digits in plain notation, vectorized per column.
    return [format_number(v) for v in arr]


def chunks(reader: Iterable[dict], size: int = CHUNK_ROWS) -> Iterator[list[dict]]:
    buf: list[dict] = []
    for row in reader:
        buf.append(row)
        if len(buf) >= size:
            yield buf
            buf = []
    if buf:
        yield buf


def _json_column(arr) -> list:
    if arr.dtype == object or arr.dtype == bool:
        return [None if v is None else (bool(v) if arr.dtype == bool else v) for v in arr]
    return [None if not math.isfinite(v) else v for v in arr.astype(float).tolist()]


def convert_csv(src: TextIO, dst: TextIO, chunk_rows: int = CHUNK_ROWS,
                fmt: str = "csv") -> int:
    """Read readings from ``src`` (CSV with a header), write them with the
    computed columns to ``dst``: as CSV, or with ``fmt="json"`` as one JSON
    object per line (numbers unrounded, flags as a list of codes). Returns the
    number of rows. Raises RowError naming the line of the first row that
    cannot be a reading."""
    reader = csv.DictReader(src)
    if not reader.fieldnames or "value" not in reader.fieldnames or "unit" not in reader.fieldnames:
        raise RowError("the file needs a header row with at least the columns value and unit "
                       f"(known columns: {', '.join(INPUT_COLUMNS)}).", "file")
    in_cols = list(reader.fieldnames)
    out_cols = [c for c in OUTPUT_COLUMNS if c not in in_cols]
    writer = csv.writer(dst, lineterminator="\r\n")
    if fmt != "json":
        writer.writerow(in_cols + out_cols)
    line = 2
    total = 0
    for chunk in chunks(reader, chunk_rows):
        try:
            out = convert.convert_batch(_chunk_to_batch(chunk, line))
        except RowError:
            raise
        except InputError as e:
            raise RowError(f"lines {line}-{line + len(chunk) - 1}: {e.message}", e.field) from None
        if fmt == "json":
            cols = {c: _json_column(out[c]) for c in out_cols if c != "flags"}
            if "flags" in out_cols:
                cols["flags"] = [[f for f in codes.split(";") if f]
                                 for codes in out["flags"].codes_column().tolist()]
            for i, r in enumerate(chunk):
                rec = {c: r.get(c, "") for c in in_cols}
                rec.update((c, cols[c][i]) for c in out_cols)
                dst.write(json.dumps(rec, ensure_ascii=False) + "\n")
        else:
            cols = {c: _format_column(out[c]) for c in OUTPUT_COLUMNS if c != "flags"}
            cols["flags"] = out["flags"].codes_column().tolist()
            for i, r in enumerate(chunk):
                writer.writerow([r.get(c, "") for c in in_cols]
                                + [cols[c][i] for c in out_cols])
        line += len(chunk)
        total += len(chunk)
    return total
