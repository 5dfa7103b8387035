"""The rule registry and the column helpers every rule shares.

A rule takes the converted columns (a dict of arrays) and returns a boolean mask
over the batch and a function that builds the :class:`Flag` of one row.
Rules run in the order they were registered (the order the package imports
its rule modules), which is the order their flags are listed in."""
from __future__ import annotations

from typing import Callable

import numpy as np

from ..flags import Flag

Rule = Callable[[dict], tuple[np.ndarray, Callable[[int], Flag]]]
RULES: list[Rule] = []


def rule(fn: Rule) -> Rule:
    RULES.append(fn)
    return fn


def _f(out, key):
    return np.asarray(out[key], dtype=float)


def _col(out, key, default=np.nan):
    v = out.get(key)
    if v is None:
        return np.full(len(out["value"]), default, dtype=float if default is not None else object)
    return np.asarray(v, dtype=float if default is not None else object)


def _per_kind(out, table):
    """Each row's (low, high) from ``table`` by its sample kind (NaN for a
    kind the table lacks), looked up once per distinct kind."""
    from ..groups import codes as _codes
    kinds = np.asanyarray(out["sample"], dtype=object)
    if not len(kinds):
        return np.full(0, np.nan), np.full(0, np.nan)
    codes, values = _codes(kinds)
    bounds = np.array([table.get(k, (np.nan, np.nan)) if isinstance(k, str) else
                       (np.nan, np.nan) for k in values], dtype=float).reshape(-1, 2)
    return bounds[codes, 0], bounds[codes, 1]


def _shown(out, i, x_dS_m):
    """A dS/m figure in the unit the meter showed, for messages."""
    ec, val = float(out["ec_dS_m"][i]), float(out["value"][i])
    factor = val / ec if ec else 1.0
    return f"{x_dS_m * factor:g} {out['unit'][i]}"
