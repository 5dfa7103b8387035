"""Osmotic coefficient of aqueous NaCl from the Pitzer equations."""
from __future__ import annotations

import numpy as np

from ._base import KELVIN_OFFSET, _arr, _in
from .water import debye_huckel_aphi

#: Pitzer & Mayorga (1973), J. Phys. Chem. 77, 2300: NaCl at 25 °C.
PITZER_MAYORGA_1973_NACL = {"beta0": 0.0765, "beta1": 0.2664, "cphi": 0.00127}
#: Silvester & Pitzer (1978), J. Solution Chem. 7, 327, Table I: first
#: temperature derivatives for NaCl, per K (as copied in the open-source
#: ``pytzer`` function ``bC_Na_Cl_SP78``; the brief's recalled values agree).
SILVESTER_PITZER_1978_NACL_DT = {"beta0": 7.159e-4, "beta1": 7.005e-4,
                                 "cphi": -10.54e-5}
#: Pitzer (1973) universal constants for 1:1 electrolytes.
PITZER_B = 1.2
PITZER_ALPHA = 2.0
#: Range used for the linear temperature extension: 0-50 °C (the range the
#: ``pytzer`` library assigns to these first-derivative parameters) and
#: molality up to 6 mol/kg (the maximum listed for NaCl in Table I).
PITZER_NACL_VALID_TEMP_C = (0.0, 50.0)
PITZER_NACL_MAX_MOLALITY = 6.0


def nacl_osmotic_coefficient(molality, temp_c=25.0) -> np.ndarray:
    r"""Osmotic coefficient phi of aqueous NaCl (Pitzer equations).

    .. math::
        \phi - 1 = -A_\phi \frac{\sqrt I}{1 + b\sqrt I}
                   + m\left(\beta^{(0)} + \beta^{(1)} e^{-\alpha\sqrt I}\right)
                   + m^2 C^\phi,\qquad I = m,\ b = 1.2,\ \alpha = 2.0

    beta0, beta1, Cphi at 25 °C from Pitzer & Mayorga (1973), extended
    linearly in T with the derivatives of Silvester & Pitzer (1978) Table I;
    A_phi from :func:`debye_huckel_aphi`.

    Parameters
    ----------
    molality : array_like
        NaCl molality, mol/kg; valid 0-6.
    temp_c : array_like, default 25
        Temperature, °C; valid 0-50.

    Returns
    -------
    numpy.ndarray
        phi, dimensionless; NaN outside the ranges.

    References
    ----------
    Pitzer, K.S., Mayorga, G. 1973. J. Phys. Chem. 77, 2300. Silvester, L.F.,
    Pitzer, K.S. 1978. J. Solution Chem. 7, 327.

    Examples
    --------
    Robinson & Stokes (1959), Appendix 8.10: phi = 0.921 for 0.5 mol/kg NaCl
    at 25 °C (from memory; the same value is checked in tests/test_osmotic.py,
    which also compares other temperatures with PHREEQC's Pitzer database):

    >>> round(float(nacl_osmotic_coefficient(0.5, 25.0)), 3)
    0.921
    """
    m = _arr(molality, "molality")
    t = _arr(temp_c, "temp_c")
    dT = t + KELVIN_OFFSET - 298.15
    p25, dp = PITZER_MAYORGA_1973_NACL, SILVESTER_PITZER_1978_NACL_DT
    beta0 = p25["beta0"] + dp["beta0"] * dT
    beta1 = p25["beta1"] + dp["beta1"] * dT
    cphi = p25["cphi"] + dp["cphi"] * dT
    sq = np.sqrt(np.where(m >= 0, m, np.nan))
    f = -debye_huckel_aphi(t) * sq / (1.0 + PITZER_B * sq)
    phi = 1.0 + f + m * (beta0 + beta1 * np.exp(-PITZER_ALPHA * sq)) + m * m * cphi
    ok = _in(m, 0.0, PITZER_NACL_MAX_MOLALITY) & _in(t, *PITZER_NACL_VALID_TEMP_C)
    return np.where(ok, phi, np.nan)
