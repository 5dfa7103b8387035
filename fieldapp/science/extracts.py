"""Sample kinds, dilution ratios and estimation of the saturated-paste ECe.

Crop salt-tolerance data are stated as ECe, the electrical conductivity of the
extract of a saturated soil paste at 25 °C. Field and small laboratories often
measure something else: a 1:1, 1:2 or 1:5 soil:water extract, a substrate test
(saturated media extract, 1:2 by volume, pour-through leachate), irrigation
water or a nutrient solution. This module says which of those can be turned
into a soil ECe and how, with the expected uncertainty of each route.

Every estimate here is an approximation. A laboratory saturated-paste analysis
remains the reference before costly decisions (reclamation, replanting).

Routes (see :func:`estimate_ece`):

* ``paste``        the reading already is ECe.
* ``sp_dilution``  ECe ≈ EC(1:N) · 100·N / SP (ideal dilution; needs SP or texture).
* ``regression:<name>``  a published empirical line for one ratio (data table
  ``fieldapp/data/ece_regressions.csv``), within its range of use; with only a
  texture, 1:5 uses Slavich and Petterson (1993) and 1:1/1:2 the Hogg and Henry
  (1984) line of the texture group.
* ``proportional_below_range:<name>``  below a line's range of use with
  nothing else known: the line's ECe/EC ratio at its lower limit.

No ECe is below the EC of the extract it came from.

Tables: ``textures.csv`` (saturation percentage by USDA texture class),
``ece_regressions.csv``, ``substrate_ranges.csv`` (interpretation of substrate
tests). Each row carries its source.
"""
from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass

import numpy as np

from . import InputError
from ..data import load_table

# --------------------------------------------------------------------------
# Sample kinds
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class SampleKind:
    """What was put in the meter's cup.

    ``is_soil``: the reading can be turned into a soil ECe.
    ``takes_ratio``: the sample was diluted by a stated ratio (1:N).
    ``ratio_basis``: "mass" (soil:water by weight), "volume" or None.
    """
    key: str
    label: str
    description: str
    is_soil: bool
    takes_ratio: bool
    default_ratio: float | None
    ratio_basis: str | None
    interpretation_note: str


SAMPLE_KINDS: dict[str, SampleKind] = {k.key: k for k in (
    SampleKind(
        "paste", "Saturated paste extract (ECe)",
        "Soil wetted to saturation, extract drawn off and measured.",
        True, False, None, None,
        "This is ECe itself, the basis of crop salt-tolerance tables."),
    SampleKind(
        "extract", "Soil:water extract 1:N (by mass)",
        "Dry soil shaken with N parts of water by weight (1:1, 1:2, 1:2.5, 1:5).",
        True, True, 1.0, "mass",
        "More dilute than the paste; converted to an ECe estimate by saturation "
        "percentage or a published regression for that ratio."),
    SampleKind(
        "water", "Irrigation or source water (ECw)",
        "Water from a well, canal, pond or tap used for irrigation.",
        False, False, None, None,
        "Judged against water-quality guidelines and used for the leaching requirement."),
    SampleKind(
        "feed", "Nutrient solution (feed)",
        "Fertigation or hydroponic solution as delivered to the plants.",
        False, False, None, None,
        "Compared with the crop's target feed EC; not a soil value."),
    SampleKind(
        "leachate", "Pour-through or container leachate",
        "Solution collected from the bottom of a container after watering.",
        False, False, None, None,
        "Interpreted with pour-through ranges for substrates; not a soil value."),
    SampleKind(
        "drain", "Drainage or runoff water",
        "Water leaving a field, bed or bench through drains or as runoff.",
        False, False, None, None,
        "Shows how much salt leaves the root zone; compare with the water applied."),
    SampleKind(
        "sme", "Saturated media extract (substrate)",
        "Potting substrate wetted to saturation and the solution drawn off.",
        False, False, None, None,
        "Interpreted with saturated-media-extract ranges; substrates are not turned "
        "into a soil ECe."),
    SampleKind(
        "media", "Substrate:water extract 1:N (by volume)",
        "Substrate mixed with N volumes of water, usually 1:2.",
        False, True, 2.0, "volume",
        "Interpreted with 1:2 substrate ranges; substrates are not turned into a soil ECe."),
)}

# --------------------------------------------------------------------------
# Dilution ratio
# --------------------------------------------------------------------------

#: The most dilute extract any method here reads (1:N with N at most this).
MAX_RATIO_N = 1000.0


def check_ratio_n(n) -> float:
    """N of a 1:N extract as a number: finite, above 0, at most :data:`MAX_RATIO_N`.

    The pipeline passes N as a float. Text as typed ("1:5", "1:2,5") and any
    number out of range are handed to :func:`fieldapp.forms.parse_ratio`,
    which reads the text and words the message (field ``"ratio"``).

    >>> check_ratio_n(5), check_ratio_n("1:2.5")
    (5.0, 2.5)
    """
    if (isinstance(n, (int, float, np.integer, np.floating)) and not isinstance(n, bool)
            and math.isfinite(n) and 0 < n <= MAX_RATIO_N):
        return float(n)
    from ..forms import parse_ratio   # typed text is the forms' job
    return parse_ratio(n)


# --------------------------------------------------------------------------
# Texture classes and saturation percentage
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class Texture:
    """A USDA texture class with a typical saturation percentage SP (g water
    per 100 g oven-dry soil in a saturated paste) and its usual range."""
    name: str
    sp_pct: float
    sp_low_pct: float
    sp_high_pct: float
    source: str
    #: "derived" (computed from a read table by a stated rule) or "unverified".
    verified: str = "unverified"


def _norm(name: str) -> str:
    s = str(name).strip().lower().replace("_", " ").replace("-", " ")
    s = re.sub(r"[^a-z0-9. ]+", " ", s)
    return re.sub(r"\s+", " ", s).strip()


TEXTURES: dict[str, Texture] = {
    r["name"]: Texture(r["name"], float(r["sp_pct"]), float(r["sp_low_pct"]),
                       float(r["sp_high_pct"]), r["source"], r.get("verified") or "unverified")
    for r in load_table("textures")
}
_TEXTURE_KEYS = {_norm(k).replace(" ", ""): k for k in TEXTURES}


def find_texture(name) -> Texture:
    """The :class:`Texture` for a class name; case, spaces, ``_`` and ``-`` are ignored."""
    if name is None or not str(name).strip():
        raise InputError("Choose a soil texture class, e.g. " + ", ".join(TEXTURES) + ".",
                         "texture")
    key = _norm(name).replace(" ", "")
    if key in _TEXTURE_KEYS:
        return TEXTURES[_TEXTURE_KEYS[key]]
    close = difflib.get_close_matches(_norm(name), list(TEXTURES), n=3, cutoff=0.6)
    msg = f"Unknown soil texture {str(name)!r}."
    if close:
        msg += " Did you mean " + " or ".join(close) + "?"
    msg += " Known textures: " + ", ".join(TEXTURES) + "."
    raise InputError(msg, "texture")


def sp_for_texture(name) -> float:
    """Typical saturation percentage SP (%) of a USDA texture class.

    A class-average value; real soils vary (see ``Texture.sp_low_pct`` and
    ``sp_high_pct``; organic matter, swelling clays and gypsum move SP a lot).
    A measured SP always beats this. Source per row in ``textures.csv``.
    """
    return find_texture(name).sp_pct


# --------------------------------------------------------------------------
# ECe estimation: ideal dilution
# --------------------------------------------------------------------------

#: Expected relative uncertainty of the SP-dilution route (±, %): common
#: practice puts it at 20-30 %; we report the middle.
SP_DILUTION_UNCERTAINTY_PCT = 25.0
SP_DILUTION_UNCERTAINTY_SOURCE = "common practice (±20-30 % for the dilution estimate)"

#: Reproducibility of a laboratory saturated-paste analysis: "generally
#: reproducible within 8 %" (UC Davis Analytical Laboratory, saturated paste
#: method note).
PASTE_UNCERTAINTY_PCT = 8.0
PASTE_UNCERTAINTY_SOURCE = "UC Davis ANLAB saturated paste method note (reproducible within 8 %)"

ESTIMATE_CAUTION = ("An estimate, not a laboratory ECe: confirm with a saturated-paste "
                    "analysis and local extension or licensed advice before costly decisions.")


def _as_ec(ec_dS_m, field: str = "ec") -> np.ndarray:
    try:
        x = np.asarray(ec_dS_m, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError("EC must be a number in dS/m.", field) from None
    if np.any(x[np.isfinite(x)] < 0):
        raise InputError("EC cannot be negative; type the number the meter shows.", field)
    if np.any(np.isinf(x)):
        raise InputError("EC must be a finite number.", field)
    return x


def _check_sp(sp_pct) -> float:
    try:
        sp = float(sp_pct)
    except (TypeError, ValueError):
        raise InputError("Saturation percentage must be a number, e.g. 40.", "sp") from None
    if not math.isfinite(sp) or sp <= 0:
        raise InputError("Saturation percentage must be a positive number of % "
                         "(g water per 100 g dry soil), e.g. 40.", "sp")
    if sp > 1000:
        raise InputError("A saturation percentage above 1000 % is not a soil; check the digits.",
                         "sp")
    return sp


def ece_sp_dilution(ec_1N_dS_m, n, sp_pct) -> np.ndarray:
    """ECe from a 1:N soil:water extract by ideal dilution.

    .. math:: EC_e \\approx EC_{1:N} \\cdot \\frac{100\\,N}{SP}

    Parameters
    ----------
    ec_1N_dS_m : array_like
        EC of the 1:N extract at 25 °C, dS/m.
    n : float
        Water parts per 1 part dry soil by mass (1:N).
    sp_pct : float
        Saturation percentage, g water per 100 g oven-dry soil.

    Returns
    -------
    numpy.ndarray
        ECe estimate, dS/m.

    Notes
    -----
    Assumes the salts dissolve completely at both water contents and that EC
    is proportional to concentration. Both fail in practice: gypsum and other
    sparingly soluble salts dissolve further in the more dilute extract (the
    estimate runs high in gypsiferous soils), and EC per unit concentration
    rises on dilution, so measured ECe is usually below the ideal value
    (compare Slavich and Petterson 1993, f = 2.46 + 3.03/θSP against the ideal
    5/θSP for 1:5). Expected uncertainty ±20-30 % (common practice).
    Valid for mineral soils, N between about 1 and 5, SP 10-150 %.

    References
    ----------
    Richards, L.A. (ed.) 1954. Diagnosis and improvement of saline and alkali
    soils. USDA Agriculture Handbook 60 (saturation percentage, saturation
    extract). Rhoades, J.D., Chanduvi, F., Lesch, S. 1999. Soil salinity
    assessment. FAO Irrigation and Drainage Paper 57. Dilution arithmetic:
    common practice.
    """
    ec = _as_ec(ec_1N_dS_m)
    n = check_ratio_n(n)
    sp = _check_sp(sp_pct)
    return ec * (100.0 * n / sp)


# --------------------------------------------------------------------------
# ECe estimation: published regressions
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class Regression:
    """A published empirical relation between EC(1:N) and ECe.

    ``form`` is "linear" (ECe = a·EC + b) or "sp_factor"
    (ECe = (a + b/θSP)·EC with θSP = SP/100, Slavich and Petterson 1993).
    ``uncertainty_pct`` is the paper's reported error when stated; otherwise
    see :meth:`expected_uncertainty`.
    """
    name: str
    ratio_n: float
    form: str
    a: float
    b: float
    authors: str
    year: int | None
    soils: str
    n_samples: int | None
    r2: float | None
    uncertainty_pct: float | None
    default_for_ratio: bool
    source: str
    #: Lowest EC(1:N), dS/m, where the line is used; below it the estimate
    #: falls back to a method that holds there (see :func:`estimate_ece`).
    min_ec_dS_m: float = 0.0
    range_basis: str = ""

    @property
    def label(self) -> str:
        yr = f" {self.year}" if self.year else ""
        return f"{self.authors}{yr}, 1:{self.ratio_n:g} ({self.soils})"

    def expected_uncertainty(self) -> tuple[float | None, str]:
        """(± %, basis). Reported error when the source states one; else a rough
        proxy 100·sqrt(1 − r²) labelled as such; else (None, "not reported")."""
        if self.uncertainty_pct is not None:
            return self.uncertainty_pct, "reported by the source"
        if self.r2 is not None:
            return (round(100.0 * math.sqrt(max(0.0, 1.0 - self.r2)), 1),
                    "rough proxy derived from r² as 100·sqrt(1 − r²); not a prediction interval")
        return None, "not reported by the source"


def _opt_float(s: str) -> float | None:
    return float(s) if s not in ("", None) else None


def _opt_int(s: str) -> int | None:
    return int(float(s)) if s not in ("", None) else None


REGRESSIONS: dict[str, Regression] = {
    r["name"]: Regression(
        name=r["name"], ratio_n=float(r["ratio_n"]), form=r["form"],
        a=float(r["a"]), b=float(r["b"]), authors=r["authors"], year=_opt_int(r["year"]),
        soils=r["soils"], n_samples=_opt_int(r["n_samples"]), r2=_opt_float(r["r2"]),
        uncertainty_pct=_opt_float(r["uncertainty_pct"]),
        default_for_ratio=r["default_for_ratio"].lower() in ("yes", "true", "1"),
        source=r["source"], min_ec_dS_m=_opt_float(r.get("min_ec_dS_m")) or 0.0,
        range_basis=r.get("range_basis", ""))
    for r in load_table("ece_regressions")
}
for _r in REGRESSIONS.values():
    if _r.form not in ("linear", "sp_factor"):
        raise RuntimeError(f"ece_regressions.csv: unknown form {_r.form!r} for {_r.name}")


def _same_ratio(a: float, b: float, tol: float = 0.01) -> bool:
    return abs(a - b) <= tol * max(a, b)


def regressions_for_ratio(n) -> list[Regression]:
    """Published regressions whose ratio is within 1 % of 1:N (default first)."""
    n = check_ratio_n(n)
    found = [r for r in REGRESSIONS.values() if _same_ratio(r.ratio_n, n)]
    return sorted(found, key=lambda r: (not r.default_for_ratio, r.name))


def default_regression(n) -> Regression | None:
    """The regression used for 1:N when neither SP nor texture is known."""
    for r in regressions_for_ratio(n):
        if r.default_for_ratio:
            return r
    return None


def find_regression(name) -> Regression:
    """A regression by name; a leading ``regression:`` is accepted."""
    key = str(name or "").strip()
    if key.lower().startswith("regression:"):
        key = key.split(":", 1)[1].strip()
    if key in REGRESSIONS:
        return REGRESSIONS[key]
    low = {k.lower(): k for k in REGRESSIONS}
    if key.lower() in low:
        return REGRESSIONS[low[key.lower()]]
    raise InputError(f"Unknown ECe method {str(name)!r}; use one of: "
                     + ", ".join(ECE_METHODS) + ".", "method")


def ece_regression(ec_dS_m, name, sp_pct=None) -> np.ndarray:
    """ECe from EC(1:N) by a published regression.

    .. math:: EC_e = a\\,EC_{1:N} + b \\qquad\\text{(linear)}

    .. math:: EC_e = (a + b/\\theta_{SP})\\,EC_{1:5} \\qquad\\text{(sp\\_factor,
              Slavich and Petterson 1993; } \\theta_{SP} = SP/100\\text{ kg/kg)}

    Parameters
    ----------
    ec_dS_m : array_like
        EC of the extract at 25 °C, dS/m, at the regression's own ratio.
    name : str
        Key of :data:`REGRESSIONS` (``regression:`` prefix allowed).
    sp_pct : float, optional
        Saturation percentage, needed by the ``sp_factor`` form only.

    Returns
    -------
    numpy.ndarray
        ECe, dS/m. A negative intercept can give values below zero for very
        dilute extracts; those are returned as 0 (below the fitted range).

    Notes
    -----
    Each line was fitted on a regional set of soils (see ``soils`` and
    ``source``); outside that population the error can be far larger than
    the fit statistics suggest.
    """
    reg = find_regression(name)
    ec = _as_ec(ec_dS_m)
    if reg.form == "linear":
        out = reg.a * ec + reg.b
    else:
        if sp_pct is None:
            raise InputError(f"{reg.name} needs the saturation percentage (or a texture) "
                             "of the soil; type SP in %, e.g. 40.", "sp")
        theta = _check_sp(sp_pct) / 100.0
        out = (reg.a + reg.b / theta) * ec
    return np.where(np.isnan(out), np.nan, np.maximum(out, 0.0))


#: Names offered by a method picker, with a short label.
ECE_METHODS: dict[str, str] = {
    "paste": "Saturated paste: the reading is ECe",
    "sp_dilution": "Dilution by saturation percentage (SP or texture)",
    **{f"regression:{k}": r.label for k, r in REGRESSIONS.items()},
}

# --------------------------------------------------------------------------
# ECe estimation: texture-dependent published relations
# --------------------------------------------------------------------------

#: The published relation used for a 1:N extract when only the texture is
#: known, by ratio. 1:5: Slavich and Petterson (1993), f = 2.46 + 3.03/θSP
#: with θSP the class-typical SP of ``textures.csv``. 1:1 and 1:2: Hogg and
#: Henry (1984) lines for coarse, medium and fine soils.
SLAVICH_PETTERSON = "slavich_petterson_1993_1to5"

#: Texture class -> Hogg and Henry (1984) texture group. The three groups
#: are named coarse/medium/fine in PLoS ONE 13(6):e0198290 Table 2 without
#: class limits; the assignment of the twelve USDA classes is this
#: project's (common practice: sands and sandy loams coarse, loams and silts
#: medium, clay loams and clays fine).
HOGG_HENRY_GROUP = {
    "sand": "coarse", "loamy sand": "coarse", "sandy loam": "coarse",
    "loam": "medium", "silt loam": "medium", "silt": "medium", "sandy clay loam": "medium",
    "clay loam": "fine", "silty clay loam": "fine", "sandy clay": "fine",
    "silty clay": "fine", "clay": "fine",
}

#: 1:1 extract, nothing known about the soil, EC below the default line's
#: range: the same source's line fitted through the origin.
ORIGIN_FALLBACK = {1.0: "plos2018_ref63_1to1_combined_origin"}


def slavich_petterson_factor(sp_pct) -> np.ndarray:
    r"""Slavich and Petterson (1993) factor f in ECe = f · EC1:5.

    .. math:: f = 2.46 + \frac{3.03}{\theta_{SP}},\qquad \theta_{SP} = SP/100\ \text{kg/kg}

    Parameters
    ----------
    sp_pct : array_like
        Saturation percentage, g water per 100 g oven-dry soil.

    Returns
    -------
    numpy.ndarray
        f, dimensionless. Below the ideal-dilution factor 500/SP for every
        SP above about 20 %, because EC per unit salt rises on dilution.

    Notes
    -----
    Fitted on Australian soils; the abstract states no error figure and warns
    that the uncertainty of θSP estimated from texture "could be significant
    in sandy soils".

    References
    ----------
    Slavich, P.G., Petterson, G.H. 1993. Estimating the electrical
    conductivity of saturated paste extracts from 1:5 soil:water suspensions
    and texture. Aust. J. Soil Res. 31: 73-81 (abstract read on scilit.net;
    journal pages not read).

    Examples
    --------
    >>> round(float(slavich_petterson_factor(18.0)), 2)   # sand, SP 18 %
    19.29
    >>> round(float(slavich_petterson_factor(39.0)), 2)   # loam, SP 39 %
    10.23
    """
    sp = np.asarray(sp_pct, dtype=np.float64)
    reg = REGRESSIONS[SLAVICH_PETTERSON]
    return reg.a + reg.b / (sp / 100.0)


def _texture_spread_pct(tex: Texture) -> float:
    """± % of the Slavich-Petterson factor over the texture's SP range."""
    f = float(slavich_petterson_factor(tex.sp_pct))
    lo = float(slavich_petterson_factor(tex.sp_high_pct))
    hi = float(slavich_petterson_factor(tex.sp_low_pct))
    return round(100.0 * max(hi / f - 1.0, 1.0 - lo / f), 1)


def hogg_henry_for_texture(n, texture) -> Regression | None:
    """The Hogg and Henry (1984) line for a 1:1 or 1:2 extract of a texture class."""
    n = check_ratio_n(n)
    tex = find_texture(texture)
    ratio = "1to1" if _same_ratio(n, 1.0) else "1to2" if _same_ratio(n, 2.0) else None
    if ratio is None:
        return None
    return REGRESSIONS.get(f"hogg_henry_{ratio}_{HOGG_HENRY_GROUP[tex.name]}")


# --------------------------------------------------------------------------
# ECe estimation: routing
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class EceEstimate:
    """Result of :func:`estimate_ece`.

    ``ece_dS_m`` is NaN where ECe is not meaningful (waters, feeds, substrates).
    ``method`` names the route of most rows ("paste", "sp_dilution",
    "sp_dilution:texture:<name>", "regression:<name>",
    "proportional_below_range:<name>") or None; ``methods`` gives it per row,
    because rows below a regression's range of use fall back to another
    route. ``uncertainty_pct`` is the expected ± relative uncertainty of the
    route (None when unknown or not applicable), per row in
    ``uncertainties`` (NaN unknown); ``uncertainty_basis`` says where it
    comes from. ``note`` is one or two plain sentences for the screen, per
    row in ``notes``; ``out_of_range`` marks rows whose first-choice
    regression was outside its range of use.
    """
    ece_dS_m: np.ndarray
    method: str | None
    uncertainty_pct: float | None
    note: str
    uncertainty_basis: str | None = None
    sp_pct: float | None = None
    methods: np.ndarray | None = None
    uncertainties: np.ndarray | None = None
    notes: np.ndarray | None = None
    bases: np.ndarray | None = None
    out_of_range: np.ndarray | None = None

    def per_row(self) -> dict[str, np.ndarray]:
        """Per-row method, uncertainty (NaN unknown), note, basis and range mark."""
        shape = np.shape(self.ece_dS_m)

        def full(v, dtype=object):
            a = np.empty(shape, dtype=dtype)
            a[...] = v
            return a
        unc = np.nan if self.uncertainty_pct is None else self.uncertainty_pct
        return {
            "method": self.methods if self.methods is not None else full(self.method),
            "uncertainty_pct": (self.uncertainties if self.uncertainties is not None
                                else full(unc, float)),
            "note": self.notes if self.notes is not None else full(self.note),
            "basis": self.bases if self.bases is not None else full(self.uncertainty_basis),
            "out_of_range": (self.out_of_range if self.out_of_range is not None
                             else full(False, bool)),
        }


@dataclass
class _Route:
    """One route's answer for some rows (internal)."""
    ece: np.ndarray
    method: str
    unc: float | None
    note: str
    basis: str | None
    sp: float | None = None


def _sp_route(ec, n, sp) -> _Route:
    return _Route(ece_sp_dilution(ec, n, sp), "sp_dilution", SP_DILUTION_UNCERTAINTY_PCT,
                  f"Dilution estimate from 1:{n:g} with SP {sp:g} %.",
                  SP_DILUTION_UNCERTAINTY_SOURCE, sp)


def _texture_route(ec, n, tex: Texture) -> tuple[_Route, Regression | None]:
    """The published texture-dependent relation for 1:N, or dilution with the
    class SP where none is stored. Returns the route and the line used (for
    its range of use) or None."""
    if _same_ratio(n, 5.0):
        reg = REGRESSIONS[SLAVICH_PETTERSON]
        f = float(slavich_petterson_factor(tex.sp_pct))
        return _Route(
            ec * f, f"regression:{reg.name}", _texture_spread_pct(tex),
            f"Estimated with Slavich and Petterson 1993 (Australian soils), "
            f"ECe = (2.46 + 3.03/θSP) × EC1:5, with the typical SP of {tex.name} "
            f"({tex.sp_pct:g} %, range {tex.sp_low_pct:g}-{tex.sp_high_pct:g} %): factor "
            f"{f:.3g}; a measured SP is better.",
            "spread of the Slavich and Petterson factor over the texture's SP range "
            f"({tex.sp_low_pct:g}-{tex.sp_high_pct:g} %); the paper states no error and "
            "warns it can be significant in sandy soils", tex.sp_pct), reg
    hh = hogg_henry_for_texture(n, tex.name)
    if hh is not None:
        unc, basis = hh.expected_uncertainty()
        return _Route(ece_regression(ec, hh.name), f"regression:{hh.name}", unc,
                      f"Estimated with {hh.label}, chosen for {tex.name} "
                      f"({HOGG_HENRY_GROUP[tex.name]} texture).", basis, tex.sp_pct), hh
    return _Route(ece_sp_dilution(ec, n, tex.sp_pct), f"sp_dilution:texture:{tex.name}",
                  SP_DILUTION_UNCERTAINTY_PCT,
                  f"Dilution estimate from 1:{n:g} with the typical SP of {tex.name} "
                  f"({tex.sp_pct:g} %, range {tex.sp_low_pct:g}-{tex.sp_high_pct:g} %); no "
                  f"published texture relation is stored for 1:{n:g}; a measured SP is "
                  "better.", SP_DILUTION_UNCERTAINTY_SOURCE + "; SP from texture adds more",
                  tex.sp_pct), None


def _below_range_route(ec, n, reg: Regression, sp, tex) -> _Route:
    """What replaces a line below its range of use: the measured SP, else the
    texture's relation, else the same source's line through the origin, else
    the line's own ECe/EC ratio at its lower limit held constant below it."""
    lim = reg.min_ec_dS_m
    why = (f"EC1:{n:g} is below {lim:.3g} dS/m, the lowest value where {reg.label} is "
           f"used ({reg.range_basis}); ")
    if sp is not None:
        r = _sp_route(ec, n, sp)
        r.note = why + "estimated by dilution with the SP instead. " + r.note
        return r
    if tex is not None:
        r, treg = _texture_route(ec, n, tex)
        if treg is None or treg.min_ec_dS_m == 0.0 or treg.name == reg.name:
            if treg is not None and treg.name == reg.name:
                r = _Route(ece_sp_dilution(ec, n, tex.sp_pct),
                           f"sp_dilution:texture:{tex.name}", SP_DILUTION_UNCERTAINTY_PCT,
                           f"Dilution estimate with the typical SP of {tex.name} "
                           f"({tex.sp_pct:g} %).",
                           SP_DILUTION_UNCERTAINTY_SOURCE + "; SP from texture adds more",
                           tex.sp_pct)
            r.note = why + "estimated instead as follows. " + r.note
            return r
    origin = ORIGIN_FALLBACK.get(float(n)) if _same_ratio(n, round(n)) else None
    if origin and origin != reg.name:
        o = REGRESSIONS[origin]
        unc, basis = o.expected_uncertainty()
        return _Route(ece_regression(ec, o.name), f"regression:{o.name}", unc,
                      why + f"estimated with the same source's line through the origin, "
                      f"{o.label}.", basis)
    ratio = reg.a + reg.b / lim
    return _Route(ec * ratio, f"proportional_below_range:{reg.name}", None,
                  why + f"estimated as {ratio:.3g} × EC1:{n:g}, the line's own ECe/EC ratio "
                  f"at that limit, held constant below it; adding SP or texture gives a "
                  f"better estimate.",
                  "not known below the line's range of use")


def _line_route(ec, n, reg: Regression, sp_for_reg, note: str) -> _Route:
    unc, basis = reg.expected_uncertainty()
    return _Route(ece_regression(ec, reg.name, sp_pct=sp_for_reg), f"regression:{reg.name}",
                  unc, note, basis, sp_for_reg)


def _combine(ec, first: _Route, below: np.ndarray, fallback: _Route | None,
             n: float) -> EceEstimate:
    """Rows below the range take the fallback; every row is held at or above
    the extract's own EC (a paste is never more dilute than a 1:N extract of
    the same mineral soil, N >= 1)."""
    shape = ec.shape
    ece = np.array(first.ece, dtype=float, copy=True)
    methods = np.empty(shape, dtype=object)
    methods[...] = first.method
    unc = np.full(shape, np.nan if first.unc is None else first.unc)
    notes = np.empty(shape, dtype=object)
    notes[...] = first.note
    bases = np.empty(shape, dtype=object)
    bases[...] = first.basis
    if fallback is not None and below.any():
        ece[below] = np.asarray(fallback.ece)[below]
        methods[below] = fallback.method
        unc[below] = np.nan if fallback.unc is None else fallback.unc
        notes[below] = fallback.note
        bases[below] = fallback.basis
    floor = ~np.isnan(ece) & (ece < ec)
    if floor.any():
        ece[floor] = ec[floor]
        notes[floor] = notes[floor] + (
            f" Held at the EC of the 1:{n:g} extract itself: a saturated paste of a "
            "mineral soil is never more dilute than the extract.")
    notes = np.array([f"{t} {ESTIMATE_CAUTION}" for t in notes.ravel()],
                     dtype=object).reshape(shape)
    main = 0
    if below.any() and below.mean() > 0.5 and fallback is not None:
        main = 1
    r = (first, fallback)[main]
    return EceEstimate(ece, r.method, r.unc, f"{r.note} {ESTIMATE_CAUTION}", r.basis, r.sp,
                       methods, unc, notes, bases, below.copy())


def estimate_ece(ec25_dS_m, sample: str, ratio_n=None, sp_pct=None, texture=None,
                 method=None) -> EceEstimate:
    """Saturated-paste ECe equivalent of a reading, by the best available route.

    Routing rules:

    * ``paste``: ECe = EC25 (method "paste"; uncertainty of the laboratory
      method only).
    * ``extract`` (1:N by mass):

      1. ``method`` names a regression -> use it; its ratio must match
         ``ratio_n`` within 1 % (when ``ratio_n`` is omitted the regression's
         own ratio is taken).
      2. else ``sp_pct`` given -> ideal dilution with that SP.
      3. else ``texture`` given -> the published texture-dependent relation:
         1:5 Slavich and Petterson (1993) with the class-typical SP; 1:1 and
         1:2 the Hogg and Henry (1984) line of the texture's group; other
         ratios ideal dilution with the class SP
         (method "sp_dilution:texture:<name>").
      4. else the default published regression for that ratio, if any.
      5. else :class:`InputError` (field "sp") asking for SP or texture.

      ``method="sp_dilution"`` forces route 2/3 by dilution. A line used
      below its range of use (``Regression.min_ec_dS_m``) is replaced on
      those rows by the measured SP, else the texture's relation, else the
      same source's line through the origin (1:1), else the line's own
      ECe/EC ratio at the limit ("proportional_below_range:<name>"), and
      the row's note says so. No extract's ECe is below its own EC.
    * ``water``, ``feed``, ``leachate``, ``drain``, ``sme``, ``media``: no soil
      ECe (NaN, method None); substrates and solutions are interpreted on
      their own scales.

    Parameters
    ----------
    ec25_dS_m : array_like
        Reading compensated to 25 °C, dS/m.
    sample : str
        Key of :data:`SAMPLE_KINDS`.
    ratio_n : float or str, optional
        N of a 1:N extract (a number, or text :func:`fieldapp.forms.parse_ratio` accepts).
    sp_pct : float, optional
        Measured saturation percentage, %.
    texture : str, optional
        USDA texture class (see :data:`TEXTURES`).
    method : str, optional
        "paste", "sp_dilution" or "regression:<name>" / "<name>".

    Returns
    -------
    EceEstimate

    Examples
    --------
    >>> e = estimate_ece([0.2], "extract", ratio_n="1:5", texture="sand")
    >>> e.method, round(float(e.ece_dS_m[0]), 2)
    ('regression:slavich_petterson_1993_1to5', 3.86)
    """
    ec = _as_ec(ec25_dS_m)
    kind = SAMPLE_KINDS.get(str(sample or "").strip().lower())
    if kind is None:
        raise InputError("Unknown sample kind; use one of: " + ", ".join(SAMPLE_KINDS) + ".",
                         "sample")
    meth = (str(method).strip() or None) if method is not None else None

    if not kind.is_soil:
        return EceEstimate(np.full(ec.shape, np.nan), None, None,
                           f"{kind.label}: {kind.interpretation_note}")

    if kind.key == "paste":
        if meth not in (None, "paste"):
            raise InputError("A saturated paste extract already is ECe; leave the ECe "
                             "method empty or choose 'paste'.", "method")
        return EceEstimate(ec.copy(), "paste", PASTE_UNCERTAINTY_PCT,
                           "Saturated paste extract: the reading is ECe.",
                           PASTE_UNCERTAINTY_SOURCE)

    # kind == extract
    n = check_ratio_n(ratio_n) if ratio_n is not None else None
    if meth == "paste":
        raise InputError("'paste' is for saturated paste extracts; for a 1:N extract "
                         "choose sp_dilution or a regression.", "method")
    sp = _check_sp(sp_pct) if sp_pct is not None else None
    if meth is not None and meth.startswith("sp_dilution:texture:") and texture is None:
        texture = meth.split(":", 2)[2]
    tex = find_texture(texture) if texture else None
    nobelow = np.zeros(ec.shape, dtype=bool)

    if meth is not None and meth != "sp_dilution" and not meth.startswith("sp_dilution:"):
        reg = find_regression(meth)
        if n is None:
            n = reg.ratio_n
        elif not _same_ratio(reg.ratio_n, n):
            raise InputError(
                f"{reg.name} is for 1:{reg.ratio_n:g} extracts but the sample is 1:{n:g}; "
                f"choose a method for 1:{n:g} or correct the ratio.", "method")
        sp_for_reg = None
        if reg.form == "sp_factor":
            sp_for_reg = sp if sp is not None else (tex.sp_pct if tex else None)
        first = _line_route(ec, n, reg, sp_for_reg, f"Estimated with {reg.label}.")
        below = ec < reg.min_ec_dS_m
        fb = _below_range_route(ec, n, reg, sp, tex) if below.any() else None
        return _combine(ec, first, below, fb, n)

    if n is None:
        raise InputError("A soil:water extract needs its ratio; type it as 1:N, "
                         "e.g. 1:1, 1:2 or 1:5.", "ratio")

    if sp is not None:
        return _combine(ec, _sp_route(ec, n, sp), nobelow, None, n)
    if tex is not None:
        if meth is not None:   # dilution asked for by name
            first = _Route(ece_sp_dilution(ec, n, tex.sp_pct),
                           f"sp_dilution:texture:{tex.name}", SP_DILUTION_UNCERTAINTY_PCT,
                           f"Dilution estimate from 1:{n:g} with the typical SP of {tex.name} "
                           f"({tex.sp_pct:g} %, range {tex.sp_low_pct:g}-{tex.sp_high_pct:g} "
                           "%); a measured SP is better.",
                           SP_DILUTION_UNCERTAINTY_SOURCE + "; SP from texture adds more",
                           tex.sp_pct)
            return _combine(ec, first, nobelow, None, n)
        first, treg = _texture_route(ec, n, tex)
        below = ec < treg.min_ec_dS_m if treg is not None else nobelow
        fb = _below_range_route(ec, n, treg, None, tex) if below.any() else None
        return _combine(ec, first, below, fb, n)
    if meth is not None:  # sp_dilution asked for, but nothing to dilute with
        raise InputError("The dilution method needs the saturation percentage (SP, %) or "
                         "the soil texture; type one of them.", "sp")
    reg = default_regression(n)
    if reg is not None:
        first = _line_route(ec, n, reg, None,
                            f"Estimated with {reg.label}; adding SP or texture allows a "
                            "better estimate.")
        below = ec < reg.min_ec_dS_m
        fb = _below_range_route(ec, n, reg, None, None) if below.any() else None
        return _combine(ec, first, below, fb, n)
    raise InputError(f"No published conversion is stored for 1:{n:g} extracts: type the "
                     "saturation percentage (SP, %) or choose the soil texture.", "sp")


# --------------------------------------------------------------------------
# Substrate and solution interpretation ranges
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class SubstrateRange:
    """One interpretation band of a substrate test (dS/m, lo inclusive)."""
    method: str
    level: str
    lo_dS_m: float
    hi_dS_m: float  # math.inf for the open top band
    source: str
    verified: str = "unverified"


_SUBSTRATE_ROWS = [
    SubstrateRange(r["method"], r["level"], float(r["lo_dS_m"]),
                   float(r["hi_dS_m"]) if r["hi_dS_m"] else math.inf, r["source"],
                   r.get("verified") or "unverified")
    for r in load_table("substrate_ranges")
]
SUBSTRATE_METHODS: tuple[str, ...] = tuple(dict.fromkeys(r.method for r in _SUBSTRATE_ROWS))
#: Which table applies to which sample kind.
SUBSTRATE_METHOD_FOR_SAMPLE = {"sme": "sme", "media": "media_1to2", "leachate": "pour_through"}


def substrate_ranges(method) -> list[SubstrateRange]:
    """Interpretation bands (very_low ... extreme) for a substrate test method.

    ``method`` is one of :data:`SUBSTRATE_METHODS` (``sme``, ``media_1to2``,
    ``pour_through``) or a sample kind mapped by
    :data:`SUBSTRATE_METHOD_FOR_SAMPLE`. The bands are general greenhouse
    guidance; crop-specific targets differ.
    """
    key = _norm(method or "").replace(" ", "_")
    key = SUBSTRATE_METHOD_FOR_SAMPLE.get(key, key)
    rows = [r for r in _SUBSTRATE_ROWS if r.method == key]
    if not rows:
        raise InputError(f"No interpretation ranges for {str(method)!r}; known: "
                         + ", ".join(SUBSTRATE_METHODS) + ".", "method")
    return rows
