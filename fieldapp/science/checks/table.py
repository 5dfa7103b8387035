"""The flags of a batch, kept as masks until a row is asked for."""
from __future__ import annotations

from typing import Callable, Iterable

import numpy as np

from ..flags import Flag
from .registry import RULES, Rule


class FlagTable:
    """The flags of a batch, kept as one mask per rule until a row is asked for.

    A million readings of which half carry a note cost one boolean array per
    rule, not half a million objects; ``for_row`` builds the Flag records of
    one reading, ``codes_column`` the ';'-joined codes of every reading.
    """

    def __init__(self, n: int, hits: list[tuple[np.ndarray, Callable[[int], Flag], str]]):
        self.n = n
        self.hits = hits

    def __len__(self) -> int:
        return self.n

    def for_row(self, i: int) -> list[Flag]:
        return [make(i) for mask, make, _ in self.hits if mask[i]]

    def __getitem__(self, i: int) -> list[Flag]:
        return self.for_row(i)

    def __iter__(self):
        return (self.for_row(i) for i in range(self.n))

    def any_mask(self) -> np.ndarray:
        out = np.zeros(self.n, dtype=bool)
        for mask, _, _ in self.hits:
            out |= mask
        return out

    def codes_column(self) -> np.ndarray:
        """Object array of 'code;code' strings ('' where no flag), vectorized."""
        col = np.full(self.n, "", dtype=object)
        for mask, make, code in self.hits:
            rows = np.flatnonzero(mask)
            if rows.size:
                code = code or make(int(rows[0])).code
                col[rows] = np.where(col[rows] == "", code, col[rows] + ";" + code)
        return col


def reading_flags(out: dict, rules: Iterable[Rule] | None = None) -> FlagTable:
    """Evaluate every rule over the batch; rows' flags are built on demand."""
    n = len(out["value"])
    hits = []
    for r in (RULES if rules is None else rules):
        mask, make = r(out)
        mask = np.asarray(mask, dtype=bool)
        if make is not None and mask.any():
            hits.append((mask, make, ""))
    return FlagTable(n, hits)
