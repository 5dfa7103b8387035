"""The soil solution as the soil dries, and total soil water potential."""
from __future__ import annotations

import numpy as np

from ._base import _arr

#: Soil water reference points (common practice): field capacity at
#: −1/3 bar (−0.033 MPa) and the permanent wilting point at −15 bar
#: (−1.5 MPa, Richards & Weaver 1943 -- from memory).
FIELD_CAPACITY_MPa = -0.033
PERMANENT_WILTING_POINT_MPa = -1.5

#: Saturation percentage ≈ 2 × field-capacity water content (common practice;
#: the basis of "ECsw ≈ 2 ECe at field capacity" in FAO Irrigation and
#: Drainage Paper 29, Ayers & Westcot 1985 -- from memory).
SP_PER_FIELD_CAPACITY = 2.0
#: Saturation percentage ≈ 4 × the 15-bar (wilting point) water content
#: (common practice, stated in USDA Handbook 60 -- from memory). Used as the
#: dry end of :func:`soil_solution_ec`.
SP_PER_WILTING_POINT = 4.0


def soil_solution_ec(ece, sp_pct, theta_g_pct) -> np.ndarray:
    r"""EC of the soil solution at a gravimetric water content.

    .. math:: EC_{sw} \approx EC_e \, \frac{SP}{\theta_g}

    Salts of the saturation extract concentrated into less water, with EC
    taken as proportional to concentration. Ignores salt precipitation
    (gypsum, carbonates), anion exclusion and the fall of molar conductivity
    with concentration, so it overstates EC as the soil dries (common
    approximation; the same ratio gives FAO 29's ECsw ≈ 2 ECe at field
    capacity).

    Parameters
    ----------
    ece : array_like
        EC of the saturated-paste extract, dS/m (>= 0).
    sp_pct : array_like
        Saturation percentage, g water per 100 g dry soil (> 0).
    theta_g_pct : array_like
        Gravimetric water content, % (same basis). Valid SP/4 <= theta_g <= SP
        (saturation down to about the wilting point,
        :data:`SP_PER_WILTING_POINT`).

    Returns
    -------
    numpy.ndarray
        EC of the soil solution, dS/m; NaN outside the range.

    References
    ----------
    FAO Irrigation and Drainage Paper 29 (Ayers & Westcot 1985) -- from
    memory; common practice.

    Examples
    --------
    At field capacity (theta_g = SP / 2) the soil solution is twice ECe
    (FAO 29):

    >>> float(soil_solution_ec(4.0, 40.0, 20.0))
    8.0
    """
    e = _arr(ece, "ece")
    sp = _arr(sp_pct, "sp_pct")
    th = _arr(theta_g_pct, "theta_g_pct")
    ok = (e >= 0) & (sp > 0) & (th >= sp / SP_PER_WILTING_POINT) & (th <= sp)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = e * sp / th
    return np.where(ok, out, np.nan)


def field_capacity_theta_g(sp_pct) -> np.ndarray:
    """Gravimetric water content at field capacity: SP / 2.

    Parameters
    ----------
    sp_pct : array_like
        Saturation percentage, %.

    Returns
    -------
    numpy.ndarray
        Water content at field capacity, % (g water per 100 g dry soil); NaN
        for SP <= 0.

    References
    ----------
    Common practice (SP ≈ 2 × field capacity; FAO 29, Ayers & Westcot 1985
    -- from memory).

    Examples
    --------
    >>> float(field_capacity_theta_g(40.0))   # SP 40 %: half of it
    20.0
    """
    sp = _arr(sp_pct, "sp_pct")
    return np.where(sp > 0, sp / SP_PER_FIELD_CAPACITY, np.nan)


def soil_solution_ec_at_field_capacity(ece) -> np.ndarray:
    """EC of the soil solution at field capacity: 2 × ECe.

    Equal to :func:`soil_solution_ec` at theta_g = :func:`field_capacity_theta_g`.

    Parameters
    ----------
    ece : array_like
        EC of the saturated-paste extract, dS/m.

    Returns
    -------
    numpy.ndarray
        EC of the soil solution at field capacity, dS/m; NaN for ECe < 0.

    References
    ----------
    FAO 29 (Ayers & Westcot 1985): ECsw ≈ 2 ECe -- from memory; common
    practice.

    Examples
    --------
    >>> float(soil_solution_ec_at_field_capacity(4.0))   # ECsw = 2 ECe
    8.0
    """
    e = _arr(ece, "ece")
    return np.where(e >= 0, SP_PER_FIELD_CAPACITY * e, np.nan)


def total_water_potential(psi_s_MPa, matric_MPa) -> np.ndarray:
    """Total soil water potential: matric + solute.

    Gravity and overburden are ignored.

    Parameters
    ----------
    psi_s_MPa : array_like
        Solute potential, MPa (<= 0).
    matric_MPa : array_like
        Matric potential, MPa (<= 0).

    Returns
    -------
    numpy.ndarray
        Total potential, MPa; NaN if either part is positive or NaN.

    References
    ----------
    The definition of total water potential as the sum of its components
    (gravity and pressure left out).

    Examples
    --------
    A solute potential of -0.4 MPa at field capacity (-0.033 MPa, common
    practice):

    >>> round(float(total_water_potential(-0.4, -0.033)), 3)
    -0.433
    """
    ps = _arr(psi_s_MPa, "psi_s_MPa")
    pm = _arr(matric_MPa, "matric_MPa")
    return np.where((ps <= 0) & (pm <= 0), ps + pm, np.nan)


def margin_to_wilting_point(total_MPa) -> np.ndarray:
    """MPa left above the permanent wilting point (−1.5 MPa).

    Parameters
    ----------
    total_MPa : array_like
        Total soil water potential, MPa (<= 0).

    Returns
    -------
    numpy.ndarray
        Margin, MPa: positive while the soil water is above the wilting point,
        negative beyond it; NaN for a positive (impossible) total potential.

    References
    ----------
    Permanent wilting point at −15 bar (Richards & Weaver 1943 -- from memory;
    common practice, :data:`PERMANENT_WILTING_POINT_MPa`).

    Examples
    --------
    >>> round(float(margin_to_wilting_point(-0.433)), 3)   # -0.433 - (-1.5)
    1.067
    """
    tot = _arr(total_MPa, "total_MPa")
    return np.where(tot <= 0, tot - PERMANENT_WILTING_POINT_MPa, np.nan)
