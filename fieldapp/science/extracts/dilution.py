"""ECe from a 1:N extract by ideal dilution with the saturation percentage,
the checks of an EC and an SP, and the uncertainty of the route."""
from __future__ import annotations

import math

from fieldapp.lazy import numpy as np  # imported at the first np.name: a faster start

from .. import InputError
from .kinds import check_ratio_n

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
    r"""ECe from a 1:N soil:water extract by ideal dilution.

    .. math:: EC_e \approx EC_{1:N} \cdot \frac{100\,N}{SP}

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

    Examples
    --------
    A 1:5 extract of 0.5 dS/m from a soil of SP 40 %: 500 g of water per 100 g
    of soil against 40 g in the paste, so ECe = 0.5 × 500 / 40 = 6.25 dS/m:

    >>> float(ece_sp_dilution(0.5, 5, 40.0))
    6.25
    """
    ec = _as_ec(ec_1N_dS_m)
    n = check_ratio_n(n)
    sp = _check_sp(sp_pct)
    return ec * (100.0 * n / sp)
