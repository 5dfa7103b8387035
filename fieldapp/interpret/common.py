"""Helpers every part of the interpretation shares: which readings count,
how a value is read from a record, rounding for JSON, the cautions."""
from __future__ import annotations

import math
from typing import Iterable, Mapping

from ..fmt import number as short_number   # the one formatter (3 significant digits)
from ..results import CAUTIONS as CONVERT_CAUTIONS
from ..results import crop_summary, round_sig
from ..science import InputError, tolerance

SOIL_KINDS = ("paste", "extract")
#: Solutions drawn on the second trend chart, in legend order.
SOLUTION_KINDS = ("water", "feed", "leachate", "drain", "sme", "media")

CAUTIONS = tuple(CONVERT_CAUTIONS) + (
    tolerance.YIELD_CAUTION,
    "Relative yield uses the mean ECe of the depths sampled, as the published tolerance "
    "data use the root-zone mean; a single depth or a single visit is a rough guide.",
)

# --------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------

def _r(x, digits: int = 4):
    """Round for JSON (4 significant digits here); None for None/NaN/inf."""
    return round_sig(x, digits)


def _mean(values) -> float | None:
    v = [float(x) for x in values if x is not None and math.isfinite(float(x))]
    return sum(v) / len(v) if v else None


def _day(r: Mapping) -> str:
    return r.get("visit_date") or str(r.get("taken_at") or "")[:10]


def _ec25(r: Mapping) -> float | None:
    v = r.get("ec25_dS_m")
    if v is None:
        v = (r.get("result") or {}).get("ec25_dS_m")
    return None if v is None else float(v)


def _ece(r: Mapping) -> float | None:
    v = r.get("ece_dS_m")
    if v is None:
        v = (r.get("result") or {}).get("ece_dS_m")
    return None if v is None else float(v)


def _flags(r: Mapping) -> list[dict]:
    fl = r.get("flag_list")           # store.view_readings: from reading_flags
    if fl is not None:
        return fl
    return list((r.get("result") or {}).get("flags") or [])


def _unc(r: Mapping):
    """The ECe uncertainty stated for the reading's method (± %), or None."""
    if "ece_uncertainty_pct" in r:    # a column (store.view_readings)
        return r["ece_uncertainty_pct"]
    return (r.get("result") or {}).get("ece_uncertainty_pct")


def is_flagged(r: Mapping) -> bool:
    """A warning or error was raised on the reading (info notes do not count)."""
    return any(f.get("severity") in ("warning", "error") for f in _flags(r))


def depth_label(depth_cm) -> str:
    return "depth not given" if depth_cm is None else f"{short_number(depth_cm)} cm"


def current_readings(readings: Iterable[Mapping], as_of: str | None = None) -> list[Mapping]:
    """Current readings (not corrected, not void), on or before ``as_of``
    (a YYYY-MM-DD date), oldest first."""
    out = [r for r in readings if r.get("status", "current") == "current"
           and (as_of is None or _day(r) <= as_of)]
    return sorted(out, key=lambda r: (str(r.get("taken_at") or ""), r.get("id") or 0))


def site_crop(site: Mapping):
    """The site's :class:`~fieldapp.science.tolerance.Crop`, or None."""
    name = site.get("crop")
    if not name:
        return None
    try:
        return tolerance.find_crop(name)
    except InputError:
        return None


def crop_dict(crop) -> dict | None:
    return None if crop is None else crop_summary(crop)


def soil_class(ece: float | None) -> tuple[str | None, str | None]:
    if ece is None:
        return None, None
    key = tolerance.soil_salinity_class_one(ece)
    labels = {k: lab for k, lab, *_ in tolerance.SOIL_SALINITY_CLASSES}
    return key, labels.get(key)

