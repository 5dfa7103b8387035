"""The published relation for a 1:N extract when only the texture is known:
Slavich and Petterson (1993) for 1:5, Hogg and Henry (1984) for 1:1 and 1:2."""
from __future__ import annotations

from fieldapp.lazy import numpy as np  # imported at the first np.name: a faster start

from .kinds import check_ratio_n
from .regressions import REGRESSIONS, Regression, _same_ratio
from .textures import Texture, find_texture

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
    """The Hogg and Henry (1984) line for a 1:1 or 1:2 extract of a texture class.

    Parameters
    ----------
    n : float or str
        N of the 1:N extract.
    texture : str
        A USDA texture class name.

    Returns
    -------
    Regression or None
        The line of the texture's group (:data:`HOGG_HENRY_GROUP`), or None
        for ratios other than 1:1 and 1:2.

    References
    ----------
    Hogg, T.J., Henry, J.L. 1984, coefficients as printed in PLoS ONE
    13(6):e0198290 Table 2; the class-to-group assignment is this project's
    (common practice).

    Examples
    --------
    Clay is a fine soil; the 1:2 line for fine soils is ECe = 2.16 EC1:2 + 0.03:

    >>> r = hogg_henry_for_texture(2, "clay")
    >>> r.name, r.a, r.b
    ('hogg_henry_1to2_fine', 2.16, 0.03)
    """
    n = check_ratio_n(n)
    tex = find_texture(texture)
    ratio = "1to1" if _same_ratio(n, 1.0) else "1to2" if _same_ratio(n, 2.0) else None
    if ratio is None:
        return None
    return REGRESSIONS.get(f"hogg_henry_{ratio}_{HOGG_HENRY_GROUP[tex.name]}")
