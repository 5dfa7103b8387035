"""Rules on the meter and the unit: full scale, range start, resolution, a
thousandfold unit slip, a unit the meter does not show."""
from __future__ import annotations

import numpy as np

from ..flags import Flag
from .registry import _col, _f, _per_kind, _shown, rule

# Context columns come from the meter profile; a rule is silent where its
# column is NaN/None.

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
#: Readings closer to zero than this many display steps carry a rounding
#: error of more than 5 % (half a step / value).
RESOLUTION_STEPS_MIN = 10


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
    from .. import units
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
