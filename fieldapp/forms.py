"""Typed text -> validated values: what a person typed in a form, a CSV cell or
a command-line option, checked and turned into the numbers and words the
science/ functions take.

Decimal comma ("1,5"), dilution ratios as typed ("1:2,5", "1 to 5"), yes/no
words, salt types, meter ranges "MIN:MAX". Every parser is linear in the length
of what was typed and refuses, with a message naming the field, input that
cannot be a reading. Nothing here computes a result or touches disk.

Units as a meter displays them are read by :func:`fieldapp.science.units.parse_unit`
(its spelling table is the definition of each unit's SI factor, and the science
functions accept a displayed spelling); :func:`validate_reading` calls it.
"""
from __future__ import annotations

import math

from .lazy import Later
from .lazy import numpy as np  # imported at the first np.name: a faster start
from .science import InputError, extracts, tolerance, units
from .science.extracts import MAX_RATIO_N

temperature = Later("fieldapp.science.temperature")   # its tables are numpy arrays

# --------------------------------------------------------------------------
# Numbers and words
# --------------------------------------------------------------------------


def parse_number(text, field: str, what: str = "a number") -> float | None:
    """Parse a typed number; '' or None is None. A decimal comma is accepted
    only when it is the only separator ("1,5" -> 1.5); "1,500" is refused as
    ambiguous rather than guessed."""
    if text is None:
        return None
    if isinstance(text, bool):
        raise InputError(f"Type {what} for {field}.", field)
    if isinstance(text, (int, float)):
        x = float(text)
    else:
        s = str(text).strip().replace("\u2212", "-")
        if s == "":
            return None
        if "," in s:
            if "." in s or s.count(",") > 1 or len(s.split(",")[1]) == 3:
                raise InputError(
                    f"{s!r} is ambiguous: use a point as the decimal separator "
                    f"and no thousands separator (e.g. 1500 or 1.5).", field)
            s = s.replace(",", ".")
        if not all(c in "0123456789.+-eE" for c in s):
            raise InputError(f"{s!r} is not a number; type {what} in digits, e.g. 1.25.", field)
        try:
            x = float(s)
        except ValueError:
            raise InputError(f"{s!r} is not a number; type {what} in digits, e.g. 1.25.",
                             field) from None
    if not math.isfinite(x):
        raise InputError(f"Type a finite number for {field}.", field)
    return x


def parse_bool(x) -> bool:
    if isinstance(x, bool):
        return x
    if x is None:
        return False
    s = str(x).strip().lower()
    if s in ("1", "true", "yes", "y", "on", "atc"):
        return True
    if s in ("", "0", "false", "no", "n", "off"):
        return False
    raise InputError(f"{x!r} is not yes or no.", "compensated")


#: Accepted spellings of the one salt type with its own route.
SALT_TYPES = {"sea_salt": "sea_salt", "sea salt": "sea_salt", "seawater": "sea_salt",
              "sea": "sea_salt", "sea_water": "sea_salt"}


def parse_salt_type(x) -> str | None:
    """None (mixed salts or unknown: the NaCl and Handbook 60 routes) or
    "sea_salt" (coastal wells, seawater intrusion: the PSS-78 seawater route
    is added beside the NaCl route)."""
    if x is None or (isinstance(x, str) and x.strip().lower() in ("", "mixed", "nacl", "none")):
        return None
    if isinstance(x, str) and x.strip().lower() in SALT_TYPES:
        return SALT_TYPES[x.strip().lower()]
    raise InputError("Salt type must be empty (mixed salts) or sea_salt (water like "
                     "diluted seawater: coastal wells, seawater intrusion).", "salt_type")



# --------------------------------------------------------------------------
# Dilution ratio
# --------------------------------------------------------------------------

#: Longest ratio text read at all: "1 : 2.5" is 7 characters; anything much
#: longer is not a ratio and is refused before it is scanned.
RATIO_TEXT_MAX = 40
_DIGITS = frozenset("0123456789")      # ASCII only: other scripts' digits are refused
_RATIO_SEPARATORS = (":", "/", "\u2236")


def _decimal(part: str) -> float | None:
    """'2.5', '2,5', '.5' or '5' -> float; anything else (including '5.',
    '1e3', '1_0' and non-ASCII digits) -> None. One pass over the text,
    no regular expression: linear time whatever is typed."""
    if not part:
        return None
    sep = -1
    for i, c in enumerate(part):
        if c in _DIGITS:
            continue
        if c in ".," and sep < 0:
            sep = i
            continue
        return None
    if sep == len(part) - 1:
        return None
    return float(part.replace(",", ".") if sep >= 0 else part)


def _ratio_parts(s: str) -> tuple[str, str] | None:
    """Split 'a:b', 'a/b', 'a∶b' or 'a to b' at its one separator."""
    found = [(i, len(c)) for c in _RATIO_SEPARATORS for i in [s.find(c)] if i >= 0]
    low = s.lower()
    if "to" in low:
        found.append((low.find("to"), 2))
    if len(found) != 1:
        return None
    i, n = found[0]
    a, b = s[:i], s[i + n:]
    if any(c in b for c in _RATIO_SEPARATORS) or "to" in b.lower():
        return None
    return a.strip(), b.strip()


def parse_ratio(text_or_number) -> float:
    """Water parts N per 1 part soil (or substrate) from what was typed.

    Accepts ``"1:5"``, ``"1 : 2.5"``, ``"1/5"``, ``"1 to 5"``, ``"5"``, ``5`` and
    ``"1:2,5"`` (decimal comma). A general ``a:b`` with a ≤ b gives N = b/a.

    ``"5:1"`` (more soil than water) is almost always a swapped ratio and is
    refused with a message suggesting ``1:5``. N must be finite, > 0 and
    ≤ 1000; unusual but possible values such as 1:100 pass (a plausibility
    check flags them later).

    Returns
    -------
    float
        N in "1:N".

    Raises
    ------
    InputError
        field ``"ratio"``, with a message that says what to type instead.
    """
    hint = "Type the soil:water ratio as 1:N, for example 1:1, 1:2, 1:2.5 or 1:5."
    if text_or_number is None or (isinstance(text_or_number, str) and not text_or_number.strip()):
        raise InputError("The dilution ratio is missing. " + hint, "ratio")
    if isinstance(text_or_number, bool):
        raise InputError("The dilution ratio must be a number. " + hint, "ratio")
    if isinstance(text_or_number, (int, float, np.integer, np.floating)):
        n = float(text_or_number)
    elif isinstance(text_or_number, str):
        s = text_or_number.strip()
        if len(s) > RATIO_TEXT_MAX:
            raise InputError(f"That ratio is {len(s)} characters long; a ratio is short. "
                             + hint, "ratio")
        parts = _ratio_parts(s)
        if parts is not None:
            a, b = _decimal(parts[0]), _decimal(parts[1])
            if a is None or b is None:
                raise InputError(f"{s!r} is not a ratio. " + hint, "ratio")
            if a <= 0 or b <= 0:
                raise InputError(f"{s!r} has a zero part. " + hint, "ratio")
            if a > b:
                swapped = a / b
                raise InputError(
                    f"{s!r} means more soil than water, which is almost certainly "
                    f"swapped: type 1:{swapped:g} (soil first, then water).", "ratio")
            n = b / a
        else:
            n = _decimal(s)
            if n is None:
                raise InputError(f"{s!r} is not a ratio. " + hint, "ratio")
    else:
        raise InputError("The dilution ratio must be text like 1:5 or a number. " + hint,
                         "ratio")
    if not math.isfinite(n) or n <= 0:
        raise InputError("The water part of the ratio must be a positive number. " + hint,
                         "ratio")
    if n > MAX_RATIO_N:
        raise InputError(f"1:{n:g} is beyond any soil or substrate extract "
                         f"(at most 1:{MAX_RATIO_N:g}). " + hint, "ratio")
    return n



# --------------------------------------------------------------------------
# A whole reading, and a meter given in the reading's unit
# --------------------------------------------------------------------------


def validate_reading(d: dict) -> dict:
    """Check typed fields of one reading; return clean keyword arguments for
    :func:`make_batch`. Raises InputError naming the field."""
    value = parse_number(d.get("value"), "value", "a reading")
    if value is None:
        raise InputError("Type the number the meter shows.", "value")
    if value < 0:
        raise InputError("EC cannot be negative; type the number the meter shows.", "value")
    if value > 1e7:
        raise InputError("That number is too large for any EC meter; check the digits.", "value")
    unit = (d.get("unit") or "").strip()
    if not unit:
        raise InputError("Choose the unit the meter displays, e.g. µS/cm or mS/cm.", "unit")
    units.parse_unit(unit)
    sample = (d.get("sample") or "paste").strip().lower()
    if sample not in extracts.SAMPLE_KINDS:
        raise InputError("Unknown sample kind; use one of: "
                         + ", ".join(extracts.SAMPLE_KINDS), "sample")
    ratio = d.get("ratio")
    ratio_n = None
    if ratio not in (None, ""):
        ratio_n = parse_ratio(ratio)
    temp_c = parse_number(d.get("temp_c"), "temp_c", "a temperature")
    if temp_c is not None:
        temperature.check_temp_c(temp_c)
    sp = parse_number(d.get("sp"), "sp", "a saturation percentage")
    if sp is not None and not (5 <= sp <= 400):
        raise InputError("Saturation percentage must be between 5 and 400 %.", "sp")
    texture = (d.get("texture") or "").strip() or None
    if texture:
        extracts.sp_for_texture(texture)
    tds_factor = parse_number(d.get("tds_factor"), "tds_factor", "a factor")
    theta = parse_number(d.get("theta_g_pct"), "theta_g_pct", "a water content")
    if theta is not None and not (1 <= theta <= 400):
        raise InputError("Gravimetric water content must be between 1 and 400 %.", "theta_g_pct")
    matric = parse_number(d.get("matric_MPa"), "matric_MPa", "a matric potential")
    if matric is not None:
        if matric > 0:
            matric = -matric  # a tensiometer shows suction; the potential is negative
        if matric < -10:
            raise InputError("Matric potential must be between 0 and −10 MPa.", "matric_MPa")
    crop = (d.get("crop") or "").strip() or None
    if crop:
        crop = tolerance.find_crop(crop).name
    method = (d.get("ece_method") or "").strip() or None
    salt_type = parse_salt_type(d.get("salt_type"))
    return dict(value=value, unit=unit, sample=sample, ratio_n=ratio_n, temp_c=temp_c,
                compensated=parse_bool(d.get("compensated")), sp_pct=sp, texture=texture,
                tds_factor=tds_factor, theta_g_pct=theta, matric_MPa=matric,
                ece_method=method, crop=crop, salt_type=salt_type)


def parse_meter_range(text) -> tuple[float, float]:
    """'MIN:MAX' in the reading's unit, e.g. '0:1999'."""
    parts = str(text).replace(" ", "").split(":")
    if len(parts) != 2:
        raise InputError("Give the meter range as MIN:MAX in the reading's unit, e.g. 0:1999.",
                         "meter_range")
    lo = parse_number(parts[0], "meter_range", "a range minimum")
    hi = parse_number(parts[1], "meter_range", "a range maximum")
    if lo is None or hi is None or lo < 0 or hi <= lo:
        raise InputError("The meter range needs 0 <= MIN < MAX, e.g. 0:1999.", "meter_range")
    return lo, hi


def meter_context(kw: dict, range_min=None, range_max=None, resolution=None,
                  units_shown=None, temp_min_c=None, temp_max_c=None) -> dict:
    """Context columns for a meter given in the reading's own unit (what a
    scout reads off the meter's label): range and resolution -> dS/m."""
    ctx = {}
    factor = units.to_ec_dS_m(1.0, kw["unit"], tds_factor=kw.get("tds_factor")).item()
    for key, v in (("meter_min_dS_m", range_min), ("meter_max_dS_m", range_max),
                   ("meter_resolution_dS_m", resolution)):
        if v is not None:
            ctx[key] = float(v) * factor
    if units_shown:
        ctx["meter_units"] = tuple(units_shown)
    if temp_min_c is not None:
        ctx["meter_temp_min_c"] = float(temp_min_c)
    if temp_max_c is not None:
        ctx["meter_temp_max_c"] = float(temp_max_c)
    return ctx
