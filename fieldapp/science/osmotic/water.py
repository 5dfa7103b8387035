"""Pure water at 1 atm: density, relative permittivity and the Debye-Hückel
osmotic slope built from them."""
from __future__ import annotations

import numpy as np

from ._base import (AVOGADRO_PER_MOL, BOLTZMANN_J_K, ELEMENTARY_CHARGE_C, KELVIN_OFFSET,
                    VACUUM_PERMITTIVITY_F_M, _arr, _in)

#: Kell (1975), J. Chem. Eng. Data 20, 97-105, eq. for the density of
#: air-free water at 1 atm, 0-150 °C (IPTS-68):
#: rho = (a0 + a1 t + ... + a5 t^5) / (1 + b t), kg/m^3.
#: Coefficients from memory; the tests pin them to IAPWS-95 (``iapws``).
KELL_1975_WATER_DENSITY = {
    "a": (999.83952, 16.945176, -7.9870401e-3, -46.170461e-6,
          105.56302e-9, -280.54253e-12),
    "b": 16.879850e-3,
    "valid_temp_c": (0.0, 100.0),  # liquid at 1 atm; Kell states 0-150 °C
}

#: Malmberg & Maryott (1956), J. Res. NBS 56, 1-8: static relative
#: permittivity of water, eps = c0 + c1 t + c2 t^2 + c3 t^3, 0-100 °C.
#: Coefficients from memory; the tests pin them to the IAPWS R8-97
#: formulation as implemented in ``iapws``.
MALMBERG_MARYOTT_1956_PERMITTIVITY = {
    "c": (87.740, -0.40008, 9.398e-4, -1.410e-6),
    "valid_temp_c": (0.0, 100.0),
}


def water_density_kg_m3(temp_c) -> np.ndarray:
    r"""Density of pure, air-free water at 1 atm.

    .. math:: \rho_w = \frac{a_0 + a_1 t + a_2 t^2 + a_3 t^3 + a_4 t^4
                             + a_5 t^5}{1 + b\,t}

    Parameters
    ----------
    temp_c : array_like
        Temperature, °C. Valid 0-100 °C; NaN outside.

    Returns
    -------
    numpy.ndarray
        Density, kg/m³.

    References
    ----------
    Kell, G.S. 1975. J. Chem. Eng. Data 20, 97 (see
    :data:`KELL_1975_WATER_DENSITY`); agrees with IAPWS-95 within 2e-5
    (tests/test_osmotic.py, ``iapws``).

    Examples
    --------
    IAPWS-95 gives 997.048 kg/m³ at 25 °C and 0.101325 MPa (``iapws.IAPWS95``,
    the oracle of the tests):

    >>> abs(float(water_density_kg_m3(25.0)) - 997.048) < 0.01
    True
    """
    t = _arr(temp_c, "temp_c")
    a = KELL_1975_WATER_DENSITY["a"]
    b = KELL_1975_WATER_DENSITY["b"]
    num = a[0] + t * (a[1] + t * (a[2] + t * (a[3] + t * (a[4] + t * a[5]))))
    rho = num / (1.0 + b * t)
    lo, hi = KELL_1975_WATER_DENSITY["valid_temp_c"]
    return np.where(_in(t, lo, hi), rho, np.nan)


def water_relative_permittivity(temp_c) -> np.ndarray:
    r"""Static relative permittivity (dielectric constant) of water, 1 atm.

    .. math:: \varepsilon_r = c_0 + c_1 t + c_2 t^2 + c_3 t^3

    Parameters
    ----------
    temp_c : array_like
        Temperature, °C. Valid 0-100 °C; NaN outside.

    Returns
    -------
    numpy.ndarray
        Relative permittivity, dimensionless.

    References
    ----------
    Malmberg, C.G., Maryott, A.A. 1956. J. Res. NBS 56, 1 (see
    :data:`MALMBERG_MARYOTT_1956_PERMITTIVITY`).

    Examples
    --------
    IAPWS R8-97 gives 78.41 at 25 °C, 0.101325 MPa (``iapws``, the oracle of
    the tests, which hold the cubic within 0.4 %):

    >>> abs(float(water_relative_permittivity(25.0)) / 78.41 - 1) < 0.004
    True
    """
    t = _arr(temp_c, "temp_c")
    c = MALMBERG_MARYOTT_1956_PERMITTIVITY["c"]
    eps = c[0] + t * (c[1] + t * (c[2] + t * c[3]))
    lo, hi = MALMBERG_MARYOTT_1956_PERMITTIVITY["valid_temp_c"]
    return np.where(_in(t, lo, hi), eps, np.nan)


def debye_huckel_aphi(temp_c) -> np.ndarray:
    r"""Debye-Hückel osmotic coefficient slope A_phi.

    .. math:: A_\phi = \frac{1}{3}\sqrt{2\pi N_A \rho_w}
              \left(\frac{e^2}{4\pi\varepsilon_0\varepsilon_r k_B T}\right)^{3/2}

    with rho_w from :func:`water_density_kg_m3` (kg/m³) and eps_r from
    :func:`water_relative_permittivity`.

    Parameters
    ----------
    temp_c : array_like
        Temperature, °C. Valid 0-100 °C; NaN outside.

    Returns
    -------
    numpy.ndarray
        A_phi, kg^0.5 mol^-0.5.

    References
    ----------
    The definition of A_phi in Pitzer (1973), J. Phys. Chem. 77, 268
    (citation from memory), evaluated with Kell (1975) and Malmberg &
    Maryott (1956); the tests compare it with the same definition on IAPWS
    inputs.

    Examples
    --------
    Pitzer (1973) used A_phi = 0.392 at 25 °C:

    >>> round(float(debye_huckel_aphi(25.0)), 3)
    0.392
    """
    t = _arr(temp_c, "temp_c")
    T = t + KELVIN_OFFSET
    rho = water_density_kg_m3(t)
    eps = water_relative_permittivity(t)
    e2 = ELEMENTARY_CHARGE_C ** 2
    bjerrum = e2 / (4.0 * np.pi * VACUUM_PERMITTIVITY_F_M * eps * BOLTZMANN_J_K * T)
    return np.sqrt(2.0 * np.pi * AVOGADRO_PER_MOL * rho) * bjerrum ** 1.5 / 3.0
