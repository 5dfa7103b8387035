"""Plausibility rules: each looks at converted columns and returns flags.

A rule never raises for a doubtful value; it says what looks wrong in one
plain sentence and what to do about it. Rules are vectorized: each returns a
boolean mask over the batch and a function that builds the flag for one row,
so a million clean readings cost a few numpy comparisons and no Python loop.

Rules that need context beyond the reading itself (meter, site history,
replicates, calibration) take that context as extra columns; when a column
is absent the rule is silent.
"""
from __future__ import annotations

from typing import Callable, Iterable

import numpy as np

from .flags import Flag

Rule = Callable[[dict], tuple[np.ndarray, Callable[[int], Flag]]]
RULES: list[Rule] = []

#: Difference from 25 °C beyond which an uncompensated reading is worth a note.
#: Common practice: EC changes about 2 % per °C, so 5 °C is about 10 %.
UNCOMPENSATED_NOTE_DELTA_C = 5.0


def rule(fn: Rule) -> Rule:
    RULES.append(fn)
    return fn


def _f(out, key):
    return np.asarray(out[key], dtype=float)


@rule
def unit_shorthand(out):
    note = out["unit_note"]
    mask = np.not_equal(note, None).astype(bool)
    return mask, lambda i: Flag(
        "unit_shorthand", "info", str(note[i]),
        "Nothing to do if the meter shows a per-centimetre unit; otherwise pick the full unit.")


@rule
def temperature_unknown(out):
    mask = ~np.asarray(out["compensated"], bool) & np.isnan(_f(out, "temp_c"))
    return mask, lambda i: Flag(
        "temperature_unknown", "warning",
        "No sample temperature and the meter does not compensate: the value was taken as if "
        "measured at 25 °C (about 2 % error per °C away from 25).",
        "Type the sample temperature, or tick 'meter compensates' if it shows ATC.")


@rule
def uncompensated(out):
    t = _f(out, "temp_c")
    comp = np.asarray(out["compensated"], bool)
    with np.errstate(invalid="ignore"):
        mask = ~comp & (np.abs(t - 25.0) > UNCOMPENSATED_NOTE_DELTA_C)
    factor = _f(out, "compensation_factor")

    def make(i):
        pct = (factor[i] - 1.0) * 100.0
        return Flag(
            "uncompensated", "info",
            f"The meter does not compensate and the sample was at {t[i]:g} °C: "
            f"the app changed the reading by {pct:+.0f} % to bring it to 25 °C.",
            "Nothing to do; for better accuracy measure near 25 °C or use a meter with ATC.",
            {"correction_pct": round(float(pct), 1)})
    return mask, make


@rule
def potential_route_fallback(out):
    default = _f(out, "psi_s_nacl_pitzer_MPa")
    used = _f(out, "psi_s_MPa")
    mask = np.isnan(default) & ~np.isnan(used)
    return mask, lambda i: Flag(
        "psi_route_out_of_range", "info",
        "The salinity is outside the range of the NaCl model, so the solute potential "
        "comes from the USDA Handbook 60 approximation.",
        "Treat the solute potential as a rough figure.")


@rule
def tds_approximation_range(out):
    ec = _f(out, "ec25_dS_m")
    with np.errstate(invalid="ignore"):
        mask = (ec > 0) & ((ec < 0.1) | (ec > 5.0))
    return mask, lambda i: Flag(
        "tds_outside_approximation", "info",
        "TDS and total cations from EC (640 mg/L and 10 meq/L per dS/m) are reliable only "
        "between about 0.1 and 5 dS/m.",
        "Use a laboratory analysis if you need TDS or ions at this salinity.")


@rule
def leaching_not_possible(out):
    lr = _f(out, "leaching_requirement")
    mask = np.isinf(lr)
    return mask, lambda i: Flag(
        "leaching_not_possible", "error",
        "This water is too saline to keep the root zone below the crop's threshold by "
        "leaching (it would need more than all the water applied).",
        "Look for better water or a more tolerant crop; ask your extension advisor.")


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
        if mask.any():
            hits.append((mask, make, ""))
    return FlagTable(n, hits)
