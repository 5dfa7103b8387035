"""Crop salt tolerance, relative yield, leaching requirement, salinity classes.

The crop table (``fieldapp/data/crops.csv``) gives for each crop the
Maas-Hoffman threshold *a* (ECe in dS/m at which yield starts to fall) and
slope *b* (% yield lost per dS/m above it), with the tolerance class
(S sensitive, MS moderately sensitive, MT moderately tolerant, T tolerant)
and the source of every row.

These numbers are guidance for relative tolerance. Absolute tolerance varies
with climate, soil, irrigation method, rootstock and variety. A yield or
leaching figure here is an estimate: confirm with a laboratory analysis and
local extension or licensed advice before costly decisions.
"""
from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass

from fieldapp.lazy import numpy as np  # imported at the first np.name: a faster start

from . import InputError
from ..data import load_table

TOLERANCE_CLASSES = {
    "S": "sensitive",
    "MS": "moderately sensitive",
    "MT": "moderately tolerant",
    "T": "tolerant",
}
CROP_GROUPS = ("field", "forage", "vegetable", "fruit")

YIELD_CAUTION = ("Relative yield from published averages; varieties, rootstocks, climate and "
                 "growth stage change it. Confirm with a laboratory analysis and local "
                 "extension or licensed advice before costly decisions.")
LEACHING_CAUTION = ("The leaching requirement is a steady-state estimate; drainage, soil "
                    "permeability, sodicity and local water rules matter. Ask local extension "
                    "or a licensed adviser before changing irrigation or reclaiming land.")


@dataclass(frozen=True)
class Crop:
    """Maas-Hoffman parameters of one crop (ECe basis, dS/m)."""
    name: str
    group: str
    threshold_dS_m: float
    slope_pct_per_dS_m: float
    tolerance_class: str
    aliases: tuple[str, ...]
    source: str
    #: True where the row was checked against a published table that was
    #: read (``verified`` column "yes"); the screen shows "unverified" otherwise.
    verified: bool = False
    #: Where published values disagree, the other value and why this one.
    note: str = ""

    @property
    def tolerance_label(self) -> str:
        return TOLERANCE_CLASSES[self.tolerance_class]


def _norm(name) -> str:
    s = str(name).strip().lower().replace("_", " ").replace("-", " ")
    s = re.sub(r"[^a-z0-9 ]+", " ", s)
    return re.sub(r"\s+", " ", s).strip()


def _load_crops() -> dict[str, Crop]:
    crops: dict[str, Crop] = {}
    for r in load_table("crops"):
        c = Crop(
            name=r["name"], group=r["group"], threshold_dS_m=float(r["threshold_dS_m"]),
            slope_pct_per_dS_m=float(r["slope_pct_per_dS_m"]),
            tolerance_class=r["tolerance_class"],
            aliases=tuple(a.strip() for a in r["aliases"].split(";") if a.strip()),
            source=r["source"], verified=r.get("verified", "").lower() == "yes",
            note=r.get("note", ""))
        if c.group not in CROP_GROUPS or c.tolerance_class not in TOLERANCE_CLASSES:
            raise RuntimeError(f"crops.csv: bad group or class in row {c.name!r}")
        if not (c.threshold_dS_m > 0 and c.slope_pct_per_dS_m > 0):
            raise RuntimeError(f"crops.csv: threshold and slope must be positive ({c.name!r})")
        crops[c.name] = c
    return crops


CROPS: dict[str, Crop] = _load_crops()

_LOOKUP: dict[str, str] = {}
for _c in CROPS.values():
    for _n in (_c.name, *_c.aliases):
        for _k in (_norm(_n), _norm(_n).replace(" ", "")):
            _LOOKUP.setdefault(_k, _c.name)


def find_crop(name) -> Crop:
    """A :class:`Crop` by name or common alias (case, spaces, ``_``, ``-`` and
    punctuation ignored: "Maize", "sugar_beet", "corn, sweet").

    Raises :class:`InputError` (field "crop") naming similar crops.
    """
    if isinstance(name, Crop):
        return name
    if name is None or not str(name).strip():
        raise InputError("Choose a crop from the list.", "crop")
    k = _norm(name)
    hit = _LOOKUP.get(k) or _LOOKUP.get(k.replace(" ", ""))
    if hit:
        return CROPS[hit]
    names = sorted(set(_LOOKUP))
    close = difflib.get_close_matches(k, names, n=4, cutoff=0.6)
    close = list(dict.fromkeys(_LOOKUP[c] for c in close))
    msg = f"Unknown crop {str(name)!r}."
    if close:
        msg += " Did you mean " + ", ".join(close) + "?"
    else:
        msg += " Pick one from the crop list (" + str(len(CROPS)) + " crops)."
    raise InputError(msg, "crop")


def _as_array(x, field: str, what: str) -> np.ndarray:
    try:
        a = np.asarray(x, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(f"{what} must be a number in dS/m.", field) from None
    if np.any(np.isinf(a)):
        raise InputError(f"{what} must be a finite number.", field)
    if np.any(a[np.isfinite(a)] < 0):
        raise InputError(f"{what} cannot be negative.", field)
    return a


def relative_yield_pct(ece, crop) -> np.ndarray:
    """Relative yield (%) by the Maas-Hoffman two-piece linear model.

    .. math::
        Y_r = 100 \\quad (EC_e \\le a), \\qquad
        Y_r = \\max(0,\\; 100 - b\\,(EC_e - a)) \\quad (EC_e > a)

    Parameters
    ----------
    ece : array_like
        Mean root-zone ECe, dS/m (saturated paste basis). NaN passes through.
    crop : Crop or str
        A crop or its name/alias.

    Returns
    -------
    numpy.ndarray
        Relative yield, % of the yield under non-saline conditions.

    Notes
    -----
    Valid for ECe averaged over the root zone and the season, for the
    commercially relevant part of the response; it does not apply at
    germination or seedling stage, where several crops are more sensitive.

    References
    ----------
    Maas, E.V., Hoffman, G.J. 1977. Crop salt tolerance - current assessment.
    J. Irrig. Drain. Div. ASCE 103(IR2): 115-134. Eq. (1) as reproduced in FAO
    Irrigation and Drainage Paper 61, Annex 1 (Yr = 100 - b(ECe - a)).
    """
    c = find_crop(crop)
    x = _as_array(ece, "ece", "ECe")
    y = 100.0 - c.slope_pct_per_dS_m * (x - c.threshold_dS_m)
    y = np.clip(y, 0.0, 100.0)
    return np.where(np.isnan(x), np.nan, y)


def ece_at_yield(crop, yield_pct) -> np.ndarray:
    """ECe (dS/m) at which the Maas-Hoffman model gives ``yield_pct``.

    .. math:: EC_e = a + (100 - Y)/b

    ``yield_pct`` between 0 and 100 (100 returns the threshold; FAO 29
    Table 4 tabulates 100, 90, 75 and 50 %).
    """
    c = find_crop(crop)
    try:
        y = np.asarray(yield_pct, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError("Target yield must be a percentage between 0 and 100.", "yield") from None
    if np.any(~np.isfinite(y)) or np.any((y < 0) | (y > 100)):
        raise InputError("Target yield must be a percentage between 0 and 100.", "yield")
    return c.threshold_dS_m + (100.0 - y) / c.slope_pct_per_dS_m


def leaching_requirement(ecw, crop=None, target_yield_pct=None, ece_target=None) -> np.ndarray:
    """Leaching requirement (fraction of applied water to drain below the roots).

    .. math:: LR = \\frac{EC_w}{5\\,EC_e - EC_w}

    with ECe the tolerable root-zone ECe: ``ece_target`` if given, otherwise
    the crop's ECe at ``target_yield_pct`` (default 100 %, the threshold).

    Parameters
    ----------
    ecw : array_like
        Irrigation water EC, dS/m.
    crop : Crop or str, optional
    target_yield_pct : float, optional
        Accepted relative yield, % (e.g. 90).
    ece_target : float, optional
        Tolerable ECe, dS/m; overrides crop and yield.

    Returns
    -------
    numpy.ndarray
        LR as a fraction (0.15 = 15 % extra). ``numpy.inf`` where
        ECw ≥ 5·ECe: that water cannot keep the root zone at the target by
        leaching alone (the caller flags it). NaN passes through.

    Notes
    -----
    Steady-state; assumes good drainage and a conventional root-zone water
    uptake pattern (FAO 29 discusses a 40-30-20-10 pattern - from memory);
    rainfall and leaching efficiency are not included. Valid for ECw up to a
    few dS/m.

    References
    ----------
    Rhoades, J.D. 1974. Drainage for salinity control (citation details from
    memory). As FAO Irrigation and Drainage Paper 29 Rev. 1 (Ayers and
    Westcot 1985), equation 7. Worked example checked in the tests: an
    extension calculator note (avocadosource.com) with ECw 0.6 and ECe 0.4
    gives LR = 0.6/(5 x 0.4 - 0.6) = 0.43.
    """
    w = _as_array(ecw, "ecw", "Water EC")
    if ece_target is not None:
        try:
            e = float(ece_target)
        except (TypeError, ValueError):
            raise InputError("Target ECe must be a number in dS/m.", "ece_target") from None
        if not math.isfinite(e) or e <= 0:
            raise InputError("Target ECe must be a positive number in dS/m.", "ece_target")
    elif crop is not None:
        e = float(ece_at_yield(crop, 100.0 if target_yield_pct is None else target_yield_pct))
    else:
        raise InputError("Choose a crop (or give a target ECe) to compute the leaching "
                         "requirement.", "crop")
    denom = 5.0 * e - w
    with np.errstate(divide="ignore", invalid="ignore"):
        lr = np.where(denom > 0, w / denom, np.inf)
    return np.where(np.isnan(w), np.nan, lr)


# --------------------------------------------------------------------------
# Water salinity hazard (FAO 29 Table 1)
# --------------------------------------------------------------------------

#: FAO Irrigation and Drainage Paper 29 Rev. 1 (Ayers and Westcot 1985), Table 1,
#: salinity (ECw): none < 0.7, slight to moderate 0.7-3.0, severe > 3.0 dS/m.
WATER_HAZARD_BOUNDS_dS_m = (0.7, 3.0)
WATER_HAZARD_LABELS = {
    "none": "No restriction on use",
    "slight_to_moderate": "Slight to moderate restriction on use",
    "severe": "Severe restriction on use",
}
WATER_HAZARD_SOURCE = ("FAO Irrigation and Drainage Paper 29 Rev. 1 (Ayers and Westcot 1985) "
                       "Table 1, degree of restriction on use, salinity ECw")


def water_salinity_hazard(ecw) -> np.ndarray:
    """Degree of restriction on use of an irrigation water by its salinity.

    ``"none"`` (ECw < 0.7 dS/m), ``"slight_to_moderate"`` (0.7 ≤ ECw ≤ 3.0),
    ``"severe"`` (ECw > 3.0); None where ECw is NaN. Returns an object array
    of these keys (same shape as the input). Source: FAO 29 Table 1.
    The guideline assumes average conditions (soil, drainage, climate, crop);
    local rules may differ.
    """
    w = _as_array(ecw, "ecw", "Water EC")
    lo, hi = WATER_HAZARD_BOUNDS_dS_m
    keys = np.array([None, "none", "slight_to_moderate", "severe"], dtype=object)
    idx = np.where(np.isnan(w), 0, np.where(w < lo, 1, np.where(w <= hi, 2, 3)))
    return keys[np.atleast_1d(idx)].reshape(np.shape(idx))


def water_salinity_hazard_one(ecw: float) -> str | None:
    """Scalar form of :func:`water_salinity_hazard`."""
    return water_salinity_hazard(float(ecw)).item()


# --------------------------------------------------------------------------
# Soil salinity classes (NRCS / Soil Survey Manual)
# --------------------------------------------------------------------------

#: Lower bounds (dS/m, ECe) of the soil salinity classes above non-saline.
SOIL_SALINITY_BOUNDS_dS_m = (2.0, 4.0, 8.0, 16.0)
SOIL_SALINITY_CLASSES = (
    ("non_saline", "Non-saline", 0.0, 2.0),
    ("very_slightly_saline", "Very slightly saline", 2.0, 4.0),
    ("slightly_saline", "Slightly saline", 4.0, 8.0),
    ("moderately_saline", "Moderately saline", 8.0, 16.0),
    ("strongly_saline", "Strongly saline", 16.0, math.inf),
)
SOIL_SALINITY_SOURCE = ("USDA-NRCS soil salinity classes (Soil Survey Manual): non-saline 0 to <2, "
                        "very slightly 2 to <4, slightly 4 to <8, moderately 8 to <16, "
                        "strongly >=16 dS/m (ECe), as published with an NRCS soil salinity map layer; the same "
                        "2/4/8/16 breaks appear in Richards 1954 USDA Handbook 60 (from memory)")


def soil_salinity_class(ece) -> np.ndarray:
    """Soil salinity class key for each ECe (dS/m): lower bound inclusive.

    Returns an object array of keys from :data:`SOIL_SALINITY_CLASSES`
    (None where ECe is NaN). Source: :data:`SOIL_SALINITY_SOURCE`.
    """
    x = _as_array(ece, "ece", "ECe")
    keys = np.array([k for k, *_ in SOIL_SALINITY_CLASSES], dtype=object)
    idx = np.searchsorted(np.asarray(SOIL_SALINITY_BOUNDS_dS_m), np.nan_to_num(x), side="right")
    out = keys[idx]
    out = np.asarray(out, dtype=object)
    out[np.isnan(x)] = None
    return out


def soil_salinity_class_one(ece: float) -> str | None:
    """Scalar form of :func:`soil_salinity_class`."""
    return soil_salinity_class(float(ece)).item()


def soil_salinity_bands() -> list[dict]:
    """Class bands for charts: key, label, lo_dS_m, hi_dS_m (None = open), source."""
    return [{"key": k, "label": lab, "lo_dS_m": lo,
             "hi_dS_m": None if math.isinf(hi) else hi, "source": SOIL_SALINITY_SOURCE}
            for k, lab, lo, hi in SOIL_SALINITY_CLASSES]
