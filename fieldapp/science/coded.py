"""An object column that knows its distinct values and each row's code.

The conversion runs each formula once per group of rows that share a unit,
a sample kind, a texture... (:func:`fieldapp.science.groups.groups`), and
finding the groups of a column of words costs a dictionary lookup per row.
Whoever reads the column from text already did that lookup once per row;
:func:`coded` keeps its result with the column, so the groups are found
from integers. The column is read-only, so the codes cannot go stale, and
any slice or copy of it is a plain column again (its codes are dropped).
"""
from __future__ import annotations

import numpy as np


class CodedColumn(np.ndarray):
    """An object array with ``codes`` (intp, one per row) and ``values``
    (the distinct values, ``values[codes[i]] is self[i]``)."""

    codes: np.ndarray | None
    values: list | None

    def __array_finalize__(self, obj):
        self.codes = None               # a view, slice or copy: codes not kept
        self.values = None


def coded(values: list, codes: np.ndarray) -> np.ndarray:
    """The object column ``values[codes[i]]`` with its codes kept. Equal
    values are merged into one code (two texts may read as the same word)."""
    merged: dict = {}
    remap = np.array([merged.setdefault(v, len(merged)) for v in values], dtype=np.intp)
    table = np.empty(len(merged), dtype=object)
    for v, i in merged.items():
        table[i] = v
    codes = remap[codes] if len(merged) < len(values) else np.asarray(codes, dtype=np.intp)
    return _kept(table, codes, list(merged))


def coded_table(table: np.ndarray, codes: np.ndarray) -> np.ndarray:
    """The column ``table[codes[i]]`` with its codes kept, for a table of
    any dtype (the distinct rows' parsed cells, expanded to every row).
    Equal entries of ``table`` are merged into one code; NaNs are one value,
    as :func:`fieldapp.science.groups.codes` counts them."""
    table = np.asarray(table)
    if table.dtype == object:
        return coded(table.tolist(), codes)
    uniq, inverse = np.unique(table, return_inverse=True)
    return _kept(uniq, inverse.ravel().astype(np.intp)[codes], uniq.tolist())


def _kept(distinct: np.ndarray, codes: np.ndarray, values: list) -> np.ndarray:
    """The read-only column ``distinct[codes]`` keeping its codes and values."""
    col = distinct[codes].view(CodedColumn)
    col.codes, col.values = codes, values
    col.flags.writeable = False
    codes.flags.writeable = False
    return col


def codes_of(col) -> tuple[np.ndarray, list] | None:
    """(codes, values) of a column made by :func:`coded`, else None."""
    codes = getattr(col, "codes", None)
    return None if codes is None else (codes, col.values)
