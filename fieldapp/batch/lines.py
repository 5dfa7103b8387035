"""convert-csv's output lines: the computed columns formatted a column at a
time with the one formatter's rule (:func:`fmt.number`, six significant
digits), the lines joined from the columns with the quoting csv.writer uses;
or, for ``--json``, one object per line.
"""
from __future__ import annotations

import json
import math

import numpy as np

from ..csvtext import csv_quoted
from ..fmt import number
from . import assemble


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
    if finite.all():
        cells = list(map("%.6g".__mod__, a.tolist()))
    else:                               # only the numbers formatted, the rest empty
        out = np.full(len(a), "", dtype=object)
        out[finite] = np.fromiter(map("%.6g".__mod__, a[finite].tolist()), dtype=object,
                                  count=int(finite.sum()))
        cells = out.tolist()
    with np.errstate(invalid="ignore"):
        odd = finite & ((np.abs(a) < 1e-4) | (np.abs(a) >= 999_999))
    for i in np.flatnonzero(odd).tolist():
        cells[i] = format_number(a[i])
    return cells


def _json_column(arr) -> list:
    if arr.dtype == object or arr.dtype == bool:
        return [None if v is None else (bool(v) if arr.dtype == bool else v) for v in arr]
    return [None if not math.isfinite(v) else v for v in arr.astype(float).tolist()]


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


def _computed_cells(out: dict, out_cols) -> list[list[str]]:
    """The computed columns as CSV cells, quoted as csv.writer would (a
    number, digits with a sign and a point, never needs quotes)."""
    cells = []
    for c in out_cols:
        if c == "flags":
            cells.append(csv_quoted(out[c].codes_column().tolist()))
        elif out[c].dtype.kind == "f":
            cells.append(_format_column(out[c]))
        else:
            cells.append(csv_quoted(_format_column(out[c])))
    return cells


def _computed_matrices(out: dict, out_cols) -> list:
    """The computed columns as byte matrices (:mod:`.assemble`), the cells
    those of :func:`_computed_cells`."""
    mats, made = [], []                 # made: (a number column, its matrix)
    for c in out_cols:
        if c == "flags":
            mats.append(assemble.text_matrix(out[c].codes_column()))
        elif out[c].dtype.kind == "f":      # the chosen route's column is often another's
            same = [m for a, m in made if np.array_equal(a[:16], out[c][:16], equal_nan=True)
                    and np.array_equal(a, out[c], equal_nan=True)]
            mats.append(same[0] if same else assemble.number_matrix(out[c]))
            made.append((out[c], mats[-1]))
        elif out[c].dtype == bool:
            mats.append(assemble.text_matrix(out[c], lambda v: "yes" if v else "no"))
        else:
            mats.append(assemble.text_matrix(out[c]))
    return mats


def csv_lines(heads: list, out, out_cols, codes: np.ndarray | None = None) -> bytes:
    """The chunk's rows as CSV lines in UTF-8 (``heads``: each row's input
    cells, from :func:`row_texts`): the same text csv.writer writes row by
    row, the computed cells made a column at a time and the lines assembled
    as bytes (:mod:`.assemble`). Where ``out`` holds the results of the
    chunk's distinct readings only, ``codes[i]`` is the one row ``i``
    repeats: each distinct reading's cells are made once."""
    if not out_cols:
        return ("\r\n".join(heads) + "\r\n").encode("utf-8")
    data = assemble.lines_bytes(heads, _computed_matrices(out, out_cols), codes)
    if data is not None:
        return data
    cells = _computed_cells(out, out_cols)     # a head holds a line break: joined as text
    rows = list(map(",".join, zip(*cells)))
    if codes is not None:
        rows = list(map(rows.__getitem__, codes))
    return ("\r\n".join(map(",".join, zip(heads, rows))) + "\r\n").encode("utf-8")


def row_texts(chunk: list, in_cols, pos: dict) -> list[str]:
    """Each row's input cells as csv.writer writes them. Where no cell needs
    quotes (no comma, quote or line break inside a cell; no short row) and
    no column name repeats, that is the row's cells joined by commas."""
    if len(pos) == len(in_cols):
        try:
            texts = list(map(",".join, chunk))
        except TypeError:               # a short row's missing cells (None)
            texts = None
        if texts is not None:
            blob = ",".join(texts)
            if blob.count(",") == len(texts) * len(in_cols) - 1 and '"' not in blob \
                    and "\n" not in blob and "\r" not in blob:   # str.find: faster than a regex
                return texts
    by_pos = list(zip(*chunk))      # a repeated name writes its last column's cells, as before
    return list(map(",".join, zip(*(csv_quoted(by_pos[pos[c]]) for c in in_cols))))
