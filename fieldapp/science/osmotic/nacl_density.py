"""Density of NaCl(aq) and the molarity <-> molality conversion."""
from __future__ import annotations

import numpy as np

from ._base import NACL_MOLAR_MASS_KG_MOL, _arr, _in
from .water import water_density_kg_m3

#: Rogers & Pitzer (1982), J. Phys. Chem. Ref. Data 11, 15, as tabulated in
#: the CRC Handbook "Volumetric properties of aqueous sodium chloride
#: solutions": specific volume of NaCl(aq) at 1 bar, cm³/g.
#: Rows: temperature °C; columns: molality mol/kg.
ROGERS_PITZER_1982_NACL_MOLALITY = (0.1, 0.25, 0.5, 0.75, 1.0, 2.0, 3.0, 4.0, 5.0)
ROGERS_PITZER_1982_NACL_TEMP_C = (0.0, 10.0, 20.0, 25.0, 30.0, 40.0, 50.0)
ROGERS_PITZER_1982_NACL_SPECIFIC_VOLUME = (
    (0.995732, 0.989259, 0.978889, 0.968991, 0.959525, 0.925426, 0.896292, 0.870996, 0.848646),
    (0.995998, 0.989781, 0.979804, 0.970256, 0.961101, 0.927905, 0.899262, 0.874201, 0.851958),
    (0.997620, 0.991564, 0.981833, 0.972505, 0.963544, 0.930909, 0.902565, 0.877643, 0.855469),
    (0.998834, 0.992832, 0.983185, 0.973932, 0.965038, 0.932590, 0.904339, 0.879457, 0.857301),
    (1.000279, 0.994319, 0.984735, 0.975539, 0.966694, 0.934382, 0.906194, 0.881334, 0.859185),
    (1.003796, 0.997883, 0.988374, 0.979243, 0.970455, 0.938287, 0.910145, 0.885276, 0.863108),
    (1.008064, 1.002161, 0.992668, 0.983551, 0.974772, 0.942603, 0.914411, 0.889473, 0.867241),
)


def nacl_solution_density_kg_m3(molality, temp_c=25.0) -> np.ndarray:
    """Density of NaCl(aq) at 1 bar.

    Interpolates the Rogers & Pitzer (1982) specific-volume table
    (:data:`ROGERS_PITZER_1982_NACL_SPECIFIC_VOLUME`): the excess over pure
    water (Kell 1975, m = 0) is interpolated linearly in molality and
    temperature, which keeps the interpolation error below 1e-4.

    Parameters
    ----------
    molality : array_like
        NaCl molality, mol/kg; valid 0-5.
    temp_c : array_like, default 25
        Temperature, °C; valid 0-50 (the table rows carried here).

    Returns
    -------
    numpy.ndarray
        Density, kg/m³; NaN outside the ranges.

    References
    ----------
    Rogers, P.S.Z., Pitzer, K.S. 1982. J. Phys. Chem. Ref. Data 11, 15, as
    tabulated in the CRC Handbook; the tests also check a second published
    table at 20 °C.

    Examples
    --------
    The table's 0.965038 cm³/g at 1 mol/kg and 25 °C is 1000 / 0.965038 =
    1036.23 kg/m³:

    >>> round(float(nacl_solution_density_kg_m3(1.0, 25.0)), 2)
    1036.23
    """
    m = _arr(molality, "molality")
    t = _arr(temp_c, "temp_c")
    m, t = np.broadcast_arrays(m, t)
    ms = np.array((0.0,) + ROGERS_PITZER_1982_NACL_MOLALITY)
    ts = np.array(ROGERS_PITZER_1982_NACL_TEMP_C)
    v = np.array(ROGERS_PITZER_1982_NACL_SPECIFIC_VOLUME)
    vw = 1000.0 / water_density_kg_m3(ts)  # cm³/g at each table temperature
    excess = np.hstack([np.zeros((len(ts), 1)), v - vw[:, None]])
    ok = _in(m, 0.0, ms[-1]) & _in(t, ts[0], ts[-1])
    mm = np.where(ok, m, 0.0)
    tc = np.where(ok, t, ts[0])
    # bilinear interpolation on the (t, m) grid
    i = np.clip(np.searchsorted(ts, tc, side="right") - 1, 0, len(ts) - 2)
    j = np.clip(np.searchsorted(ms, mm, side="right") - 1, 0, len(ms) - 2)
    ft = (tc - ts[i]) / (ts[i + 1] - ts[i])
    fm = (mm - ms[j]) / (ms[j + 1] - ms[j])
    ex = ((1 - ft) * (1 - fm) * excess[i, j] + (1 - ft) * fm * excess[i, j + 1]
          + ft * (1 - fm) * excess[i + 1, j] + ft * fm * excess[i + 1, j + 1])
    v_sol = 1000.0 / water_density_kg_m3(tc) + ex
    return np.where(ok, 1000.0 / v_sol, np.nan)


def nacl_molarity_from_molality(molality, temp_c=25.0) -> np.ndarray:
    r"""Molarity from molality for NaCl(aq).

    .. math:: c = \frac{10^{-3}\, m\, \rho}{1 + m M_{NaCl}}

    rho from :func:`nacl_solution_density_kg_m3`. At 0.6 mol/kg the two
    scales differ by about 1.4 %, at 0.1 mol/kg by 0.3 %.

    Parameters
    ----------
    molality : array_like
        mol/kg; valid 0-5.
    temp_c : array_like, default 25
        °C; valid 0-50.

    Returns
    -------
    numpy.ndarray
        Molarity, mol/L.

    References
    ----------
    Definitions of the two scales; density from Rogers & Pitzer (1982);
    M_NaCl from the IUPAC atomic weights (:data:`NACL_MOLAR_MASS_KG_MOL`).

    Examples
    --------
    From the table density at 1 mol/kg and 25 °C, 1.036229 kg/L:
    c = 1.036229 / 1.05844277 = 0.979 mol/L.

    >>> round(float(nacl_molarity_from_molality(1.0, 25.0)), 3)
    0.979
    """
    m = _arr(molality, "molality")
    rho = nacl_solution_density_kg_m3(m, temp_c)
    return 1e-3 * m * rho / (1.0 + m * NACL_MOLAR_MASS_KG_MOL)


def nacl_molality_from_molarity(molarity, temp_c=25.0) -> np.ndarray:
    """Molality from molarity for NaCl(aq): the inverse of
    :func:`nacl_molarity_from_molality` by fixed-point iteration.

    Parameters
    ----------
    molarity : array_like
        mol/L; same validity as the forward conversion (0-5 mol/kg).
    temp_c : array_like, default 25
        °C; valid 0-50.

    Returns
    -------
    numpy.ndarray
        Molality, mol/kg.

    References
    ----------
    As :func:`nacl_molarity_from_molality`.

    Examples
    --------
    0.979 mol/L is 1 mol/kg at 25 °C (the same table point, 1.036229 kg/L):

    >>> round(float(nacl_molality_from_molarity(0.979, 25.0)), 3)
    1.0
    """
    c = _arr(molarity, "molarity")
    m = c.copy()
    for _ in range(30):
        rho = nacl_solution_density_kg_m3(m, temp_c)
        m = 1e3 * c / (rho - 1e3 * c * NACL_MOLAR_MASS_KG_MOL)
    return m
