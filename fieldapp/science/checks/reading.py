"""Rules on the converted reading itself: unit shorthand, temperature,
the solute-potential route, the TDS approximation, the leaching requirement."""
from __future__ import annotations

import numpy as np

from ..flags import Flag
from .registry import _f, rule

#: Difference from 25 °C beyond which an uncompensated reading is worth a note.
#: Common practice: EC changes about 2 % per °C, so 5 °C is about 10 %.
UNCOMPENSATED_NOTE_DELTA_C = 5.0


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
