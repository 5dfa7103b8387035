"""Rules on the sample: its dilution ratio, the ECe it gives, its temperature."""
from __future__ import annotations

import numpy as np

from ..flags import Flag
from .registry import _col, _f, _per_kind, rule

#: Ratios (1:N) the published methods use. Common practice: soil:water by
#: mass 1:1, 1:2, 1:2.5, 1:5 (1:10 in some laboratories); substrate:water by
#: volume 1:1.5, 1:2 and 1:5.
RATIO_RANGE = {"extract": (1.0, 10.0), "media": (1.0, 5.0)}
#: ECe above this is brine, not a soil extract (common practice: the most
#: saline soils reach about 100-150 dS/m; saturated NaCl is about 250).
ECE_MAX_PLAUSIBLE_dS_m = 150.0
#: A dilution factor ECe/EC(1:N) above this multiplies reading errors so much
#: that the ECe is a guess (common practice: 1:5 on a sandy soil is about 20).
DILUTION_FACTOR_MAX = 25.0
#: Sample temperatures a field sample can have (common practice).
FIELD_TEMP_RANGE_C = (0.0, 45.0)


@rule
def ratio_implausible(out):
    n_ = _f(out, "ratio_n")
    kinds = np.asarray(out["sample"], dtype=object)
    lo, hi = _per_kind(out, RATIO_RANGE)
    has_ratio = ~np.isnan(n_)
    no_ratio_kind = has_ratio & np.isnan(lo)
    with np.errstate(invalid="ignore"):
        odd = has_ratio & ~np.isnan(lo) & ((n_ < lo) | (n_ > hi))
    mask = no_ratio_kind | odd

    def make(i):
        if no_ratio_kind[i]:
            msg = (f"A {kinds[i]} sample is not diluted, yet a ratio 1:{n_[i]:g} was given."
                   if kinds[i] != "paste" else
                   "A saturated paste has no soil:water ratio, yet one was given: was this "
                   "a 1:N extract?")
            act = "Clear the ratio, or choose the sample kind that was diluted (extract, media)."
        else:
            msg = (f"1:{n_[i]:g} is outside the ratios the published methods use "
                   f"(1:{lo[i]:g} to 1:{hi[i]:g}).")
            act = "Check the ratio you mixed; the ECe estimate is doubtful."
        return Flag("ratio_implausible", "warning", msg, act)
    return mask, make


@rule
def ratio_below_saturation(out):
    n_ = _f(out, "ratio_n")
    sp = _col(out, "sp_used_pct")
    kinds = np.asarray(out["sample"], dtype=object)
    with np.errstate(invalid="ignore"):
        mask = (kinds == "extract") & (100 * n_ < sp)
    return mask, lambda i: Flag(
        "ratio_below_saturation", "error",
        f"1:{n_[i]:g} is {100 * n_[i]:g} g of water per 100 g of soil, less than the soil's "
        f"saturation percentage ({sp[i]:g} %): no extract could be drawn.",
        "Check the ratio and the SP or texture.")


@rule
def ece_implausible(out):
    ece = _f(out, "ece_dS_m")
    ec25 = _f(out, "ec25_dS_m")
    with np.errstate(all="ignore"):
        factor = np.where(ec25 > 0, ece / ec25, np.nan)
        brine = ece > ECE_MAX_PLAUSIBLE_dS_m
        diluted = factor > DILUTION_FACTOR_MAX
    mask = brine | diluted

    def make(i):
        if brine[i]:
            return Flag("ece_implausible", "error",
                        f"An ECe of {ece[i]:.0f} dS/m is brine, beyond what a soil extract holds.",
                        "Check the unit, the ratio and the SP; confirm with a laboratory paste.")
        return Flag("ece_implausible", "warning",
                    f"The extract is multiplied by {factor[i]:.0f} to reach ECe, so small "
                    "reading errors become large ECe errors.",
                    "Prefer a 1:1 or 1:2 extract or a laboratory saturated paste.",
                    {"dilution_factor": round(float(factor[i]), 1)})
    return mask, make


@rule
def temperature_range(out):
    t = _f(out, "temp_c")
    tmin = _col(out, "meter_temp_min_c")
    tmax = _col(out, "meter_temp_max_c")
    lo, hi = FIELD_TEMP_RANGE_C
    with np.errstate(invalid="ignore"):
        field = (t < lo) | (t > hi)
        meter = (t < tmin) | (t > tmax)
    mask = field | meter

    def make(i):
        if meter[i]:
            msg = (f"{t[i]:g} °C is outside the meter's compensation range "
                   f"({tmin[i]:g} to {tmax[i]:g} °C).")
        else:
            msg = f"{t[i]:g} °C is unusual for a field sample (expected {lo:g} to {hi:g} °C)."
        return Flag("temperature_range", "warning", msg,
                    "Let the sample reach air temperature and measure again, or check the "
                    "thermometer.")
    return mask, make
