"""The user's own target ranges: what they may be kept for, their check, and
how a value compares with them."""
from __future__ import annotations

from typing import Iterable, Mapping

from ..forms import parse_number
from ..science import InputError, tolerance
from .common import short_number

# --------------------------------------------------------------------------
# User targets
# --------------------------------------------------------------------------

#: What a user target may be kept for, and the value it is compared with.
TARGET_MEASURES = {
    "ece": "Soil ECe (root-zone mean)",
    "water": "Irrigation water EC",
    "feed": "Feed EC",
    "leachate": "Leachate / pour-through EC",
    "drain": "Drain EC",
    "sme": "Saturated media extract EC",
    "media": "1:2 substrate extract EC",
}
TARGET_MAX_dS_m = 50.0
TARGET_NOTE_MAX = 500


def validate_target(body: Mapping) -> dict:
    """A target range from a form or JSON body: crop, measure, lo, hi, note.

    Raises :class:`InputError` naming the field, with what to type instead.
    At least one of lo and hi is needed; a missing one means "no limit".
    """
    if not isinstance(body, Mapping):
        raise InputError("Send the target as a JSON object.", "body")
    crop = tolerance.find_crop(body.get("crop"))
    measure = str(body.get("measure") or "").strip().lower()
    if measure not in TARGET_MEASURES:
        raise InputError("Choose what the target is for: " + ", ".join(TARGET_MEASURES) + ".",
                         "measure")
    lo = parse_number(body.get("lo_dS_m"), "lo_dS_m", "the lower limit")
    hi = parse_number(body.get("hi_dS_m"), "hi_dS_m", "the upper limit")
    if lo is None and hi is None:
        raise InputError("Type a lower limit, an upper limit, or both (dS/m).", "lo_dS_m")
    for v, f in ((lo, "lo_dS_m"), (hi, "hi_dS_m")):
        if v is not None and not (0 <= v <= TARGET_MAX_dS_m):
            raise InputError(f"A target must be between 0 and {TARGET_MAX_dS_m:g} dS/m.", f)
    if lo is not None and hi is not None and hi <= lo:
        raise InputError("The upper limit must be above the lower limit.", "hi_dS_m")
    note = " ".join(str(body.get("note") or "").split())
    if len(note) > TARGET_NOTE_MAX:
        raise InputError(f"The note is at most {TARGET_NOTE_MAX} characters.", "note")
    return {"crop": crop.name, "measure": measure, "lo_dS_m": lo, "hi_dS_m": hi, "note": note}


def compare_to_target(value: float | None, target: Mapping | None) -> dict | None:
    """'below', 'within' or 'above' the user's range (limits inclusive)."""
    if target is None or value is None:
        return None
    lo, hi = target.get("lo_dS_m"), target.get("hi_dS_m")
    if lo is not None and value < lo:
        where = "below"
    elif hi is not None and value > hi:
        where = "above"
    else:
        where = "within"
    return {"where": where, "lo_dS_m": lo, "hi_dS_m": hi, "note": target.get("note") or "",
            "text": f"{where} your target {_range_text(lo, hi)}"}


def _range_text(lo, hi) -> str:
    if lo is not None and hi is not None:
        return f"{short_number(lo)}–{short_number(hi)} dS/m"
    if lo is not None:
        return f"≥ {short_number(lo)} dS/m"
    return f"≤ {short_number(hi)} dS/m"


def targets_for_crop(targets: Iterable[Mapping], crop) -> dict[str, dict]:
    """The user's targets for this crop, by measure."""
    if crop is None:
        return {}
    return {t["measure"]: dict(t) for t in targets
            if str(t.get("crop") or "").lower() == crop.name.lower()}

