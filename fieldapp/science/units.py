"""EC and TDS units: exact SI factors, and a parser for what a handheld
meter displays.

Why this module exists: scouts type the unit exactly as the meter shows it
("µS", "mS/cm", "mmhos/cm", "ppm" ...). Everything downstream works in dS/m,
so the spelling must be understood once, here, and the reading must be
refused only when the unit cannot be understood at all.

Conventions
-----------
* EC (electrical conductivity) units are all conductance per length.
  1 mho = 1 S (the mho is the old name of the siemens, the reciprocal ohm;
  SI definition, BIPM SI Brochure, 9th ed. 2019, Table 4).
  Hence 1 dS/m = 1 mS/cm = 1 mmhos/cm = 1000 µS/cm = 0.1 S/m = 100 mS/m.
* Matching is case-insensitive. The only case-sensitive clash is mS (milli)
  versus MS (mega): no meter shows megasiemens per centimetre (a million
  times saltier than sea water), so "MS/cm" is read as mS/cm and a note
  says so. "ppt" on a TDS meter means parts per thousand (g/L), never parts
  per trillion.
* The micro sign may be typed as U+00B5 (µ), U+03BC (Greek mu, μ) or plain u.
* A bare "µS", "mS", "µmho" or "mmho" is a meter's shorthand for the
  per-centimetre unit; it is accepted with a note.
* TDS units (ppm, mg/L, ppt, g/L) are not measured by a meter: the meter
  multiplies its EC by a factor. The factor must be stated to get EC back:
  EC (µS/cm) = TDS (mg/L) / factor.
"""
from __future__ import annotations

import re
from dataclasses import dataclass

from fieldapp.lazy import numpy as np  # imported at the first np.name: a faster start

from fieldapp.science import InputError

# ---------------------------------------------------------------------------
# Factors
# ---------------------------------------------------------------------------
# Every factor is a power of ten fixed by the SI (BIPM SI Brochure, 9th ed.
# 2019: prefixes d = 1e-1, c = 1e-2, m = 1e-3, µ = 1e-6; the siemens is the
# reciprocal ohm, and the mho is its old name, 1 mho = 1 S). They are written
# here as exact numbers instead of asking a units library at import time,
# which cost more than half a second of every start; the tests check each one
# against pint as an independent reference.
#
# EC, value of one unit in dS/m:
#   1 S/m = 10 dS/m; 1 S/cm = 100 S/m = 1000 dS/m; 1 mS/cm = 1 dS/m;
#   1 µS/cm = 1e-3 dS/m; 1 mS/m = 1e-2 dS/m.
# TDS, value of one unit in mg/L: a TDS meter's "ppm" is 1 mg/L and its
# "ppt" 1 g/L = 1000 mg/L, assuming a litre of sample weighs a kilogram
# (common practice); they are not pint's dimensionless ppm.
_EC_dS_m = {"us/cm": 1e-3, "ms/cm": 1.0, "s/cm": 1e3, "ds/m": 1.0, "ms/m": 1e-2,
            "s/m": 10.0, "umho/cm": 1e-3, "mmho/cm": 1.0, "mho/cm": 1e3}
_TDS_mg_L = {"ppm": 1.0, "mg/l": 1.0, "ppt": 1e3, "g/l": 1e3}

# ---------------------------------------------------------------------------
# Spellings
# ---------------------------------------------------------------------------
# normalized key -> (display spelling, the unit as a units library spells it, kind)
_UNITS: dict[str, tuple[str, str, str]] = {
    "us/cm": ("µS/cm", "uS/cm", "ec"),
    "ms/cm": ("mS/cm", "mS/cm", "ec"),
    "s/cm": ("S/cm", "S/cm", "ec"),
    "ds/m": ("dS/m", "dS/m", "ec"),
    "ms/m": ("mS/m", "mS/m", "ec"),
    "s/m": ("S/m", "S/m", "ec"),
    "umho/cm": ("µmhos/cm", "umho/cm", "ec"),
    "mmho/cm": ("mmhos/cm", "mmho/cm", "ec"),
    "mho/cm": ("mho/cm", "mho/cm", "ec"),
    "ppm": ("ppm", "ppm_tds", "tds"),
    "mg/l": ("mg/L", "mg/L", "tds"),
    "ppt": ("ppt", "ppt_tds", "tds"),
    "g/l": ("g/L", "g/L", "tds"),
}

# What a meter's display shows without the length: the per-cm unit.
_SHORTHAND = {"us": "us/cm", "ms": "ms/cm", "umho": "umho/cm", "mmho": "mmho/cm"}

#: The picker list, in the order a meter shows them.
DISPLAY_UNITS: list[str] = [
    "µS/cm", "mS/cm", "dS/m", "mmhos/cm", "µmhos/cm", "S/m", "mS/m",
    "ppm", "mg/L", "ppt",
]

#: Spellings quoted to the user when a unit is not understood.
ACCEPTED_SPELLINGS: list[str] = [
    "µS/cm", "μS/cm", "uS/cm", "mS/cm", "S/cm", "dS/m", "mS/m", "S/m",
    "mho/cm", "mmho/cm", "mmhos/cm", "µmho/cm", "µmhos/cm", "umhos/cm",
    "dS m-1", "µS cm-1",
    "µS", "uS", "mS", "mmho", "µmho",
    "ppm", "mg/L", "ppt", "g/L",
]

#: TDS factors meters commonly use (mg/L per µS/cm). Common practice; 0.64
#: is the USDA Handbook 60 relation (Richards 1954): 640 mg/L per dS/m.
TDS_FACTOR_PRESETS: dict[float, str] = {
    0.5: "NaCl basis (common practice)",
    0.64: "USDA Handbook 60 relation, 640 mg/L per dS/m (Richards 1954)",
    0.7: "natural-water salt mix basis (common practice)",
}
#: Factors a meter can plausibly be set to (common practice range).
TDS_FACTOR_RANGE = (0.4, 1.0)

#: Range of EC25 (dS/m) over which the Handbook 60 TDS and cation relations
#: hold approximately (Richards 1954, USDA Handbook 60, ch. 2).
TDS_APPROX_VALID_dS_m = (0.1, 5.0)

_PREFIX_WORDS = {"micro": "u", "milli": "m", "deci": "d"}
_EC_RE = re.compile(
    r"^(?P<p>micro|milli|deci|u|m|d)?(?P<b>siemens|mhos|mho|s)"
    r"(?:/(?P<l1>cm|m)|[*·.]?(?P<l2>cm|m)\^?-1)?$"
)
_TDS_RE = re.compile(r"^(?:ppm|ppt|mg/l|g/l|(?P<m>mg|g)[*·.]?l\^?-1)$")


@dataclass(frozen=True)
class ParsedUnit:
    """A unit as understood.

    ``factor_to_dS_m`` multiplies a value in this unit to give dS/m for EC
    units. For TDS units it multiplies a value to give mg/L (1 for ppm and
    mg/L, 1000 for ppt and g/L); see also :attr:`factor_to_mg_L`.
    """

    text: str
    canonical: str
    kind: str  # "ec" or "tds"
    factor_to_dS_m: float
    note: str | None = None

    @property
    def factor_to_mg_L(self) -> float | None:
        return self.factor_to_dS_m if self.kind == "tds" else None


_FACTORS = {**_EC_dS_m, **_TDS_mg_L}
assert set(_FACTORS) == set(_UNITS)
_BY_CANONICAL = {disp: key for key, (disp, _, _) in _UNITS.items()}
_UM_TO_DS_M = _EC_dS_m["us/cm"]


def _unknown(text: str) -> InputError:
    return InputError(
        f"Unit {text!r} is not understood. Type the unit the meter shows, "
        f"one of: {', '.join(ACCEPTED_SPELLINGS)}.",
        "unit",
    )


def _normalize(text: str) -> tuple[str | None, str | None]:
    """Return (key, note) for a typed unit, or (None, None) if unknown."""
    s = text.replace("\u00b5", "u").replace("\u03bc", "u")
    s = s.replace("⁻¹", "-1").replace("−", "-")
    s = re.sub(r"\s+", "", s)
    note = None
    if re.match(r"^M(S|mho)", s):
        note = f"{text!r} read as milli (mS); meters never show megasiemens."
    s = s.lower()
    for word in ("tds", "(tds)"):
        if s.startswith(word) and len(s) > len(word):
            s = s[len(word):]
        if s.endswith(word) and len(s) > len(word):
            s = s[: -len(word)]
    if _TDS_RE.match(s):
        m = _TDS_RE.match(s)
        key = f"{m.group('m')}/l" if m.group("m") else s
        if key == "ppt":
            note = "'ppt' read as parts per thousand (g/L), as TDS meters use it."
        return key, note
    m = _EC_RE.match(s)
    if not m:
        return None, None
    prefix = m.group("p") or ""
    prefix = _PREFIX_WORDS.get(prefix, prefix)
    base = "s" if m.group("b") in ("s", "siemens") else "mho"
    length = m.group("l1") or m.group("l2")
    if length is None:
        short = _SHORTHAND.get(prefix + base)
        if short is None:
            return None, None
        disp = _UNITS[short][0]
        shown = text.strip()
        note = (f"{shown!r} read as {disp}: meters that show no length "
                "mean per centimetre.")
        return short, note
    key = f"{prefix}{base}/{length}"
    if key not in _UNITS:
        return None, None
    return key, note


def parse_unit(text: str) -> ParsedUnit:
    """Understand a unit as typed from a meter display.

    Parameters
    ----------
    text : str
        e.g. "µS/cm", "uS", "dS / m", "mmhos/cm", "dS m-1", "ppm".

    Returns
    -------
    ParsedUnit

    Raises
    ------
    InputError (field "unit")
        for an empty, unknown or ambiguous unit; the message lists the
        accepted spellings.

    Notes
    -----
    Factors are the SI definitions (BIPM SI Brochure, 9th ed., 2019):
    prefixes d = 1e-1, m = 1e-3, µ = 1e-6; 1 mho = 1 S.
    """
    if isinstance(text, ParsedUnit):
        return text
    if not isinstance(text, str) or not text.strip():
        raise InputError(
            "The unit is missing. Type the unit the meter shows, one of: "
            f"{', '.join(ACCEPTED_SPELLINGS)}.",
            "unit",
        )
    stripped = text.strip()
    key, note = _normalize(stripped)
    if key is None:
        raise _unknown(stripped)
    disp, _, kind = _UNITS[key]
    return ParsedUnit(stripped, disp, kind, _FACTORS[key], note)


def _as_float_array(value, field: str = "value") -> np.ndarray:
    if value is None:
        raise InputError("The number is missing. Type the number the meter shows, "
                         "e.g. 1.25.", field)
    try:
        return np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(
            f"{value!r} is not a number. Type the number the meter shows, "
            "e.g. 1.25 (use a point for decimals).",
            field,
        ) from None


def check_tds_factor(tds_factor) -> np.ndarray:
    """Validate a TDS meter factor (mg/L per µS/cm); return it as an array.

    Plausible factors run 0.4 to 1.0 (common practice); 0.5, 0.64 and 0.7
    are the usual meter settings (see :data:`TDS_FACTOR_PRESETS`).
    """
    presets = ", ".join(str(k) for k in TDS_FACTOR_PRESETS)
    if tds_factor is None:
        raise InputError(
            "A TDS reading (ppm, mg/L, ppt, g/L) needs the meter's TDS factor "
            f"to get back to EC. Type the factor set on the meter (often {presets}).",
            "tds_factor",
        )
    f = _as_float_array(tds_factor, "tds_factor")
    lo, hi = TDS_FACTOR_RANGE
    if not np.all(np.isfinite(f)) or np.any(f < lo) or np.any(f > hi):
        raise InputError(
            f"TDS factor must be between {lo} and {hi}. Type the factor set on "
            f"the meter (often {presets}).",
            "tds_factor",
        )
    return f


def to_ec_dS_m(value, unit, tds_factor=None) -> np.ndarray:
    """Convert a displayed reading to EC in dS/m (no temperature change).

    Equations
    ---------
    EC units:  EC_dS_m = value * factor_to_dS_m  (SI definitions)
    TDS units: EC_µS_cm = TDS_mg_L / tds_factor, then µS/cm -> dS/m
               (the inverse of what the meter did; the factor is the
               meter's setting, common practice 0.5 to 0.7)

    Parameters
    ----------
    value : float or array-like
        The number as displayed.
    unit : str or ParsedUnit
    tds_factor : float or array-like, optional
        Required for TDS units (mg/L per µS/cm, 0.4 to 1.0); ignored for EC
        units.

    Returns
    -------
    np.ndarray of float64 (0-d for scalar input). Negative or huge values are
    converted, not refused: plausibility checks flag them.
    """
    pu = parse_unit(unit)
    v = _as_float_array(value)
    if pu.kind == "ec":
        return np.asarray(v * pu.factor_to_dS_m)
    f = check_tds_factor(tds_factor)
    return np.asarray((v * pu.factor_to_dS_m) / f * _UM_TO_DS_M)


def from_dS_m(value_dS_m, unit) -> np.ndarray:
    """Express EC given in dS/m in another EC unit: value / factor_to_dS_m.

    Only EC units; a TDS unit raises InputError(field="unit"), because going
    back to TDS needs a factor and is not a unit change.
    """
    pu = parse_unit(unit)
    if pu.kind != "ec":
        raise InputError(
            f"{pu.canonical} is a TDS unit; choose an EC unit such as "
            "µS/cm, mS/cm or dS/m.",
            "unit",
        )
    return np.asarray(_as_float_array(value_dS_m) / pu.factor_to_dS_m)


_ALTERNATIVE_ORDER = DISPLAY_UNITS + [u for u, *_ in _UNITS.values() if u not in DISPLAY_UNITS]


def unit_thousandfold_alternatives(unit) -> tuple[str | None, str | None]:
    """The units 1000 times smaller and 1000 times larger than ``unit``.

    Returns ``(smaller, larger)`` where one ``smaller`` equals 1/1000 of one
    ``unit`` and one ``larger`` equals 1000 ``unit``. A reading typed as
    "1500 dS/m" that was really "1500 µS/cm" is found by trying ``smaller``:
    the same number in that unit is 1000 times less EC. Examples:

    ========  =========  ========
    unit      smaller    larger
    ========  =========  ========
    mS/cm     µS/cm      S/cm
    dS/m      µS/cm      S/cm
    µS/cm     None       mS/cm
    S/m       mS/m       None
    mmhos/cm  µmhos/cm   mho/cm
    ppm       None       ppt
    ========  =========  ========

    The same family (siemens, mho, ppm/ppt, mg/L-g/L) is preferred, then
    the picker order; None where no accepted unit fits. TDS units give TDS
    units (mg/L pairs with g/L, ppm with ppt).
    """
    pu = parse_unit(unit)

    def family(p: ParsedUnit) -> str:
        if p.kind == "tds":
            return "tds_pp" if p.canonical.startswith("pp") else "tds_per_L"
        return "mho" if "mho" in p.canonical else "siemens"

    fam = family(pu)
    candidates = [parse_unit(c) for c in _ALTERNATIVE_ORDER]
    candidates = [c for c in candidates if c.kind == pu.kind]
    candidates.sort(key=lambda c: family(c) != fam)  # stable: family first

    def find(ratio: float) -> str | None:
        for c in candidates:
            if np.isclose(c.factor_to_dS_m, pu.factor_to_dS_m * ratio, rtol=1e-9):
                return c.canonical
        return None

    return find(1e-3), find(1e3)


def tds_mg_L_from_ec(ec25_dS_m) -> np.ndarray:
    """Approximate total dissolved solids from EC at 25 °C.

    Equation: TDS (mg/L) ≈ 640 × EC25 (dS/m)
    Source: Richards (ed.) 1954, USDA Agriculture Handbook 60, ch. 2
    (relation of salt concentration to EC). Valid roughly for EC25 from 0.1
    to 5 dS/m (:data:`TDS_APPROX_VALID_dS_m`); values outside are returned
    anyway and the caller flags them. An estimate: a laboratory analysis
    gives the real figure.
    """
    return np.asarray(640.0 * _as_float_array(ec25_dS_m))


def cations_meq_L_from_ec(ec25_dS_m) -> np.ndarray:
    """Approximate total soluble cations from EC at 25 °C.

    Equation: total cations (meq/L) ≈ 10 × EC25 (dS/m)
    Source: Richards (ed.) 1954, USDA Agriculture Handbook 60, ch. 2.
    Valid roughly for EC25 from 0.1 to 5 dS/m (:data:`TDS_APPROX_VALID_dS_m`);
    values outside are returned anyway and the caller flags them.
    """
    return np.asarray(10.0 * _as_float_array(ec25_dS_m))
