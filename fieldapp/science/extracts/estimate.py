"""Saturated-paste ECe equivalent of a reading by the best available route.

Routing rules of :func:`estimate_ece`:

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
"""
from __future__ import annotations

from fieldapp.lazy import numpy as np  # imported at the first np.name: a faster start

from .. import InputError
from .dilution import PASTE_UNCERTAINTY_PCT, PASTE_UNCERTAINTY_SOURCE, _as_ec, _check_sp
from .kinds import SAMPLE_KINDS, check_ratio_n
from .regressions import _same_ratio, default_regression, find_regression
from .routes import (EceEstimate, _below_range_route, _combine, _line_route, _sp_route,
                     _texture_route, class_sp_dilution)
from .textures import Texture, find_texture


def estimate_ece(ec25_dS_m, sample: str, ratio_n=None, sp_pct=None, texture=None,
                 method=None) -> EceEstimate:
    """Saturated-paste ECe equivalent of a reading, by the best available route.

    The routing rules are in this module's docstring.

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
        return _paste_estimate(ec, meth)
    return _extract_estimate(ec, ratio_n, sp_pct, texture, meth)


def _paste_estimate(ec, meth) -> EceEstimate:
    """A saturated paste extract: the reading is ECe."""
    if meth not in (None, "paste"):
        raise InputError("A saturated paste extract already is ECe; leave the ECe "
                         "method empty or choose 'paste'.", "method")
    return EceEstimate(ec.copy(), "paste", PASTE_UNCERTAINTY_PCT,
                       "Saturated paste extract: the reading is ECe.",
                       PASTE_UNCERTAINTY_SOURCE)


def _extract_estimate(ec, ratio_n, sp_pct, texture, meth) -> EceEstimate:
    """A 1:N soil:water extract: the routes 1-5 of :func:`estimate_ece`, in order."""
    n = check_ratio_n(ratio_n) if ratio_n is not None else None
    if meth == "paste":
        raise InputError("'paste' is for saturated paste extracts; for a 1:N extract "
                         "choose sp_dilution or a regression.", "method")
    sp = _check_sp(sp_pct) if sp_pct is not None else None
    if meth is not None and meth.startswith("sp_dilution:texture:") and texture is None:
        texture = meth.split(":", 2)[2]
    tex = find_texture(texture) if texture else None

    if meth is not None and meth != "sp_dilution" and not meth.startswith("sp_dilution:"):
        return _named_line_estimate(ec, n, meth, sp, tex)
    if n is None:
        raise InputError("A soil:water extract needs its ratio; type it as 1:N, "
                         "e.g. 1:1, 1:2 or 1:5.", "ratio")
    nobelow = np.zeros(ec.shape, dtype=bool)
    if sp is not None:
        return _combine(ec, _sp_route(ec, n, sp), nobelow, None, n)
    if tex is not None:
        return _texture_estimate(ec, n, tex, by_name=meth is not None)
    if meth is not None:  # sp_dilution asked for, but nothing to dilute with
        raise InputError("The dilution method needs the saturation percentage (SP, %) or "
                         "the soil texture; type one of them.", "sp")
    return _default_line_estimate(ec, n)


def _named_line_estimate(ec, n, meth, sp, tex) -> EceEstimate:
    """Route 1: the regression the reading names; its ratio must match 1:N."""
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


def _texture_estimate(ec, n, tex: Texture, by_name: bool) -> EceEstimate:
    """Route 3: the texture's published relation, or dilution with the class SP
    when the dilution method was asked for by name."""
    nobelow = np.zeros(ec.shape, dtype=bool)
    if by_name:   # dilution asked for by name
        return _combine(ec, class_sp_dilution(ec, n, tex), nobelow, None, n)
    first, treg = _texture_route(ec, n, tex)
    below = ec < treg.min_ec_dS_m if treg is not None else nobelow
    fb = _below_range_route(ec, n, treg, None, tex) if below.any() else None
    return _combine(ec, first, below, fb, n)


def _default_line_estimate(ec, n) -> EceEstimate:
    """Routes 4 and 5: the default published line for 1:N, or ask for SP or texture."""
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
