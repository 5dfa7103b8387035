"""The groups of rows a batch's formulas run on: rows that share a unit, a
sample kind, a texture... (:func:`groups`), found from each column's integer
codes (:func:`codes`; a column read from text keeps its own,
:mod:`fieldapp.science.coded`).
"""
from __future__ import annotations

import math

import numpy as np

from .coded import codes_of


def codes(col: np.ndarray) -> tuple[np.ndarray, list]:
    """Integer codes for a column (NaN and None are one value) and the value of each code."""
    n = col.shape[0]
    if n == 0:
        return np.zeros(0, dtype=np.intp), []
    known = codes_of(col)
    if known is not None:
        return known
    if col.dtype == object:
        first = col[0]
        if bool(np.all(col == first)):   # elementwise on object arrays, None included
            return np.zeros(n, dtype=np.intp), [first]
        cells = col.tolist()            # the same objects: None and NaN match as in a dict
        values = list(dict.fromkeys(cells))             # in first-seen order
        index = dict(zip(values, range(len(values))))
        return np.fromiter(map(index.__getitem__, cells), dtype=np.intp, count=n), values
    col = np.asarray(col, dtype=float)
    nan = np.isnan(col)
    if nan.all():
        return np.zeros(n, dtype=np.intp), [math.nan]
    if not nan.any() and bool(np.all(col == col[0])):
        return np.zeros(n, dtype=np.intp), [float(col[0])]
    uniq, inverse = np.unique(col, return_inverse=True)   # NaNs collapse into one
    values = [float(u) for u in uniq]
    return inverse.astype(np.intp).ravel(), values


def _compact(keys: np.ndarray, size: int) -> np.ndarray:
    """Integer keys in 0..size-1 renumbered 0..k-1 in their order (the
    inverse of np.unique), by a table where the range is small."""
    if size > 4 * len(keys) + 1024:
        _, inverse = np.unique(keys, return_inverse=True)
        return inverse.ravel().astype(np.int64)
    present = np.zeros(size, dtype=bool)
    present[keys] = True
    return (np.cumsum(present) - 1)[keys]


def groups(*cols):
    """Yield (key tuple, row index array) for each distinct combination of columns.

    Readings in a file share a handful of units, kinds and methods, so each
    formula runs once per group on numpy arrays instead of once per row. A
    constant column costs one vectorized comparison.
    """
    if len(cols[0]) == 0:
        return
    combined = np.zeros(len(cols[0]), dtype=np.int64)
    values, code_arrays = [], []
    for col in cols:
        col_codes, vals = codes(col)
        values.append(vals)
        code_arrays.append(col_codes)
        if len(vals) > 1:
            combined = _compact(combined * len(vals) + col_codes, (int(combined.max()) + 1) * len(vals))
    if int(combined.max()) == 0:
        yield tuple(v[0] for v in values), np.arange(len(cols[0]), dtype=np.intp)
        return
    if combined.max() < 2 ** 15:        # a stable sort of 16-bit integers is a radix sort
        combined = combined.astype(np.int16)
    order = np.argsort(combined, kind="stable")
    bounds = np.flatnonzero(np.diff(combined[order])) + 1
    for rows in np.split(order, bounds):
        i = rows[0]
        yield tuple(values[k][code_arrays[k][i]] for k in range(len(cols))), rows
