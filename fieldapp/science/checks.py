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


# --------------------------------------------------------------------------
# Meter, unit, dilution, temperature, replicate, history and calibration rules
# (context columns come from the meter profile, the site's history and the
# last calibration check; a rule is silent where its column is NaN/None).

#: Where readings of each sample kind can plausibly lie, dS/m at 25 °C, and
#: where they usually lie. Common practice (orders of magnitude from field and
#: greenhouse work: irrigation water 0.05-10, seawater about 55, nutrient
#: feeds 0.5-5, substrate tests 0.2-8, saturated pastes up to about 100 in the
#: most saline soils); used only to recognise a thousandfold unit slip.
PLAUSIBLE_dS_m = {
    "paste": (0.05, 150.0), "extract": (0.005, 60.0), "water": (0.01, 60.0),
    "feed": (0.05, 15.0), "leachate": (0.05, 30.0), "drain": (0.01, 100.0),
    "sme": (0.02, 20.0), "media": (0.01, 10.0),
}
TYPICAL_dS_m = {
    "paste": (0.2, 60.0), "extract": (0.02, 20.0), "water": (0.05, 10.0),
    "feed": (0.2, 6.0), "leachate": (0.2, 15.0), "drain": (0.05, 30.0),
    "sme": (0.1, 10.0), "media": (0.05, 5.0),
}
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
#: Readings closer to zero than this many display steps carry a rounding
#: error of more than 5 % (half a step / value).
RESOLUTION_STEPS_MIN = 10
#: Replicates disagreeing by more than this coefficient of variation
#: (common practice: 10 %).
REPLICATE_CV_MAX_PCT = 10.0
#: Robust outlier rule: modified z-score 0.6745 (x - median) / MAD above 3.5
#: (Iglewicz and Hoaglin 1993, "How to detect and handle outliers"), with at
#: least this many earlier readings.
HISTORY_Z_MAX = 3.5
HISTORY_MIN_N = 5
HISTORY_MIN_SCALE_dS_m = 0.01


def _col(out, key, default=np.nan):
    v = out.get(key)
    if v is None:
        return np.full(len(out["value"]), default, dtype=float if default is not None else object)
    return np.asarray(v, dtype=float if default is not None else object)


def _per_kind(out, table):
    kinds = np.asarray(out["sample"], dtype=object)
    lo = np.full(len(kinds), np.nan)
    hi = np.full(len(kinds), np.nan)
    for k, (a, b) in table.items():
        m = kinds == k
        lo[m], hi[m] = a, b
    return lo, hi


def _shown(out, i, x_dS_m):
    """A dS/m figure in the unit the meter showed, for messages."""
    ec, val = float(out["ec_dS_m"][i]), float(out["value"][i])
    factor = val / ec if ec else 1.0
    return f"{x_dS_m * factor:g} {out['unit'][i]}"


@rule
def over_range(out):
    hi = _col(out, "meter_max_dS_m")
    ec = _f(out, "ec_dS_m")
    with np.errstate(invalid="ignore"):
        mask = ec >= hi * (1 - 1e-9)

    def make(i):
        return Flag("over_range", "error",
                    f"The reading is at or above the meter's full scale ({_shown(out, i, hi[i])}): "
                    "the display is pegged and the real value may be much higher.",
                    "Dilute the sample with distilled water (and enter the ratio) or use a "
                    "meter with a higher range.")
    return mask, make


@rule
def under_range(out):
    lo = _col(out, "meter_min_dS_m")
    ec = _f(out, "ec_dS_m")
    with np.errstate(invalid="ignore"):
        mask = (lo > 0) & (ec < lo)
    return mask, lambda i: Flag(
        "under_range", "warning",
        f"The reading is below the meter's range (which starts at {_shown(out, i, lo[i])}).",
        "Use a more sensitive range or meter; treat the value as 'below range'.")


@rule
def below_resolution(out):
    res = _col(out, "meter_resolution_dS_m")
    ec = _f(out, "ec_dS_m")
    ece = _f(out, "ece_dS_m")
    ec25 = _f(out, "ec25_dS_m")
    with np.errstate(all="ignore"):
        mask = (res > 0) & (ec < RESOLUTION_STEPS_MIN * res)
        rel = np.where(ec > 0, 0.5 * res / ec, np.inf)

    def make(i):
        pct = rel[i] * 100
        msg = (f"The reading is only {ec[i] / res[i]:.0f} display steps above zero, so rounding "
               f"alone is ±{pct:.0f} %." if np.isfinite(rel[i]) else
               "The reading is zero on this meter: below its resolution.")
        data = {"relative_error_pct": round(float(pct), 1) if np.isfinite(pct) else None}
        if np.isfinite(ece[i]) and ec25[i] > 0 and ece[i] / ec25[i] > 1.5:
            f = ece[i] / ec25[i]
            abs_err = 0.5 * res[i] * f
            msg += (f" The ×{f:.1f} dilution factor turns one half step into ±{abs_err:.2g} dS/m "
                    "of ECe.")
            data["ece_abs_error_dS_m"] = round(float(abs_err), 4)
        return Flag("below_resolution", "warning", msg,
                    "Use a more sensitive range, or a smaller dilution (for example 1:2 "
                    "instead of 1:5).", data)
    return mask, make


@rule
def unit_slip(out):
    from . import units
    ec = _f(out, "ec_dS_m")
    plo, phi = _per_kind(out, PLAUSIBLE_dS_m)
    tlo, thi = _per_kind(out, TYPICAL_dS_m)
    with np.errstate(invalid="ignore"):
        too_high = (ec > phi) & (ec / 1000 >= tlo) & (ec / 1000 <= thi)
        too_low = (ec > 0) & (ec < plo) & (ec * 1000 >= tlo) & (ec * 1000 <= thi)
        kind_ec = np.asarray(out["unit_kind"], dtype=object) == "ec"
    mask = (too_high | too_low) & kind_ec

    def make(i):
        smaller, larger = units.unit_thousandfold_alternatives(out["unit"][i])
        suggestion = smaller if too_high[i] else larger
        typ = ec[i] / 1000 if too_high[i] else ec[i] * 1000
        kind = out["sample"][i]
        msg = (f"{out['value'][i]:g} {out['unit'][i]} is "
               + ("far too high" if too_high[i] else "far too low")
               + f" for {kind}; it makes sense only if the unit were "
               + (f"{suggestion}" if suggestion else "a thousand times "
                  + ("smaller" if too_high[i] else "larger"))
               + f" ({typ:.3g} dS/m).")
        return Flag("unit_slip", "error", msg,
                    "Check the unit on the meter's display and pick it" +
                    (f": probably {suggestion}." if suggestion else "."),
                    {"suggested_unit": suggestion} if suggestion else {})
    return mask, make


@rule
def unit_not_on_meter(out):
    mu = out.get("meter_units")
    n = len(out["value"])
    if mu is None:
        return np.zeros(n, bool), None
    canon = out["unit_canonical"]
    mask = np.array([m is not None and c not in m for m, c in zip(mu, canon)], dtype=bool)
    return mask, lambda i: Flag(
        "unit_not_on_meter", "warning",
        f"This meter shows {', '.join(mu[i])}, not {canon[i]}.",
        "Pick the unit exactly as the display shows it.")


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


@rule
def replicate_spread(out):
    others = out.get("replicate_others")
    n = len(out["value"])
    if others is None:
        return np.zeros(n, bool), None
    basis = np.where(np.isnan(_f(out, "ece_dS_m")), _f(out, "ec25_dS_m"), _f(out, "ece_dS_m"))
    cv = np.full(n, np.nan)
    for i, o in enumerate(others):
        if o:
            vals = np.asarray(list(o) + [basis[i]], dtype=float)
            vals = vals[np.isfinite(vals)]
            if vals.size >= 2 and vals.mean() > 0:
                cv[i] = 100 * vals.std(ddof=1) / vals.mean()
    with np.errstate(invalid="ignore"):
        mask = cv > REPLICATE_CV_MAX_PCT
    return mask, lambda i: Flag(
        "replicate_spread", "warning",
        f"The replicates of this sample disagree by {cv[i]:.0f} % (coefficient of variation; "
        f"more than {REPLICATE_CV_MAX_PCT:g} % is suspect).",
        "Rinse the probe, stir, and measure the replicates again.",
        {"cv_pct": round(float(cv[i]), 1), "n": len(others[i]) + 1})


@rule
def history_jump(out):
    med = _col(out, "history_median")
    mad = _col(out, "history_mad")
    hn = _col(out, "history_n")
    basis = np.where(np.isnan(_f(out, "ece_dS_m")), _f(out, "ec25_dS_m"), _f(out, "ece_dS_m"))
    with np.errstate(all="ignore"):
        # a flat history still has some noise: at least 5 % of the median and
        # HISTORY_MIN_SCALE_dS_m (a pocket meter's last digit; common practice)
        scale = np.maximum(np.maximum(mad, 0.05 * np.abs(med)), HISTORY_MIN_SCALE_dS_m)
        z = 0.6745 * (basis - med) / scale
        mask = (hn >= HISTORY_MIN_N) & (np.abs(z) > HISTORY_Z_MAX)
    return mask, lambda i: Flag(
        "history_jump", "warning",
        f"This is far from this site's earlier readings of the same kind and depth "
        f"(median {med[i]:.3g} dS/m, now {basis[i]:.3g}).",
        "Check unit, ratio and probe; if it is real, note what changed (irrigation, rain, "
        "fertiliser).",
        {"robust_z": round(float(z[i]), 1), "median_dS_m": round(float(med[i]), 4)})


@rule
def calibration_drift(out):
    passed = _col(out, "cal_passed")
    dev = _col(out, "cal_deviation_pct")
    mask = passed == 0
    return mask, lambda i: Flag(
        "calibration_drift", "warning",
        f"This meter failed its last calibration check (off by {dev[i]:+.1f} %).",
        "Clean and recalibrate the meter, check it against the standard, then measure again.")


@rule
def calibration_stale(out):
    age = _col(out, "cal_age_days")
    max_age = _col(out, "cal_max_age_days")
    has_meter = _col(out, "meter_known")
    with np.errstate(invalid="ignore"):
        never = (has_meter == 1) & np.isnan(age)
        old = age > max_age
    mask = never | old

    def make(i):
        msg = ("This meter has no calibration check on record." if never[i] else
               f"This meter's last calibration check was {age[i]:.0f} days ago "
               f"(more than {max_age[i]:g}).")
        return Flag("calibration_stale", "info", msg,
                    "Check it against a standard solution (e.g. 0.01 mol/L KCl, 1413 µS/cm).")
    return mask, make


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
