"""Rules that need context beyond the reading: replicates, the site's
history, the meter's last calibration check (silent where the column is absent)."""
from __future__ import annotations

import numpy as np

from ..flags import Flag
from .registry import _col, _f, rule

#: Replicates disagreeing by more than this coefficient of variation
#: (common practice: 10 %).
REPLICATE_CV_MAX_PCT = 10.0
#: Robust outlier rule: modified z-score 0.6745 (x - median) / MAD above 3.5
#: (Iglewicz and Hoaglin 1993, "How to detect and handle outliers"), with at
#: least this many earlier readings.
HISTORY_Z_MAX = 3.5
HISTORY_MIN_N = 5
HISTORY_MIN_SCALE_dS_m = 0.01


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
