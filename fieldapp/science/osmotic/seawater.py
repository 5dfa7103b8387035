"""Sea-salt water: practical salinity (PSS-78) and a seawater solute potential."""
from __future__ import annotations

import numpy as np

from ._base import KELVIN_OFFSET, R_J_MOL_K, _arr, _in
from .pitzer import nacl_osmotic_coefficient
from .water import water_density_kg_m3

#: Practical Salinity Scale 1978 (UNESCO 1981; algorithm of Fofonoff &
#: Millard 1983, UNESCO Technical Papers in Marine Science 44):
#:   S = sum a_i Rt^(i/2) + (t - 15)/(1 + k (t - 15)) sum b_i Rt^(i/2),
#:   Rt = R / (Rp rt(t)),  rt(t) = sum c_i t^i,  R = C / C(35, 15, 0)
#: at atmospheric pressure (Rp = 1). Coefficients and C(35, 15, 0) =
#: 42.914 mS/cm as printed in several public implementations of the UNESCO
#: 1983 algorithm (read; they agree digit for digit); the tests check the
#: function against TEOS-10's ``gsw.SP_from_C``. Valid 2 <= S <= 42 and
#: -2 to 35 °C (the range of the scale).
PSS78 = {
    "a": (0.0080, -0.1692, 25.3851, 14.0941, -7.0261, 2.7081),
    "b": (0.0005, -0.0056, -0.0066, -0.0375, 0.0636, -0.0144),
    "c": (0.6766097, 2.00564e-2, 1.104259e-4, -6.9698e-7, 1.0031e-9),
    "k": 0.0162,
    "C35_15_mS_cm": 42.914,
    "valid_S": (2.0, 42.0),
    "valid_temp_c": (-2.0, 35.0),
}
#: Reference-Composition seawater (Millero, Feistel, Wright & McDougall
#: 2008, Deep-Sea Res. I 55, 50): Reference Salinity S_R = (35.16504/35) S_P
#: g/kg, and the mean molar mass of sea salt M_S = 31.4038218 g/mol, so the
#: total solute molality is m_SW = S_R / ((1 - S_R) M_S) (S_R in kg/kg).
#: Values as used in TEOS-10 (IOC et al. 2010); from memory, and the
#: seawater oracle test computes m_SW the same way.
REFERENCE_COMPOSITION = {"uPS_g_kg": 35.16504 / 35.0, "M_S_kg_mol": 0.0314038218}


def practical_salinity_pss78(ec_dS_m, temp_c=25.0) -> np.ndarray:
    r"""Practical salinity S_P (PSS-78) from conductivity at temperature t.

    .. math:: S = \sum_{i=0}^{5} a_i R_t^{i/2} + \frac{t - 15}{1 + k (t - 15)}
              \sum_{i=0}^{5} b_i R_t^{i/2},\qquad R_t = \frac{C / 42.914}{r_t(t)}

    Parameters
    ----------
    ec_dS_m : array_like
        Conductivity at the temperature ``temp_c`` (not compensated), dS/m
        (= mS/cm).
    temp_c : array_like
        Temperature of that conductivity, °C (25 for a value already at 25 °C).

    Returns
    -------
    numpy.ndarray
        S_P (dimensionless, about g/kg); NaN outside 2-42 or -2-35 °C.

    References
    ----------
    UNESCO (1981); Fofonoff & Millard (1983), UNESCO Technical Papers in
    Marine Science 44 (see :data:`PSS78`); checked against TEOS-10's
    ``gsw.SP_from_C`` in the tests.

    Examples
    --------
    By the definition of the scale, C = C(35, 15, 0) = 42.914 mS/cm at 15 °C
    (IPTS-68) is S_P = 35; and TEOS-10 (``gsw.C_from_SP(35, 25, 0)``) puts
    S_P 35 at 53.071 mS/cm at 25 °C:

    >>> round(float(practical_salinity_pss78(42.914, 15.0 / 1.00024)), 4)  # 15 °C IPTS-68
    35.0
    >>> round(float(practical_salinity_pss78(53.071, 25.0)), 3)
    35.0
    """
    c = _arr(ec_dS_m, "ec")
    t90 = _arr(temp_c, "temp_c")
    t = 1.00024 * t90   # PSS-78 is defined on IPTS-68: t68 = 1.00024 t90 (from memory)
    p = PSS78
    rt = sum(ci * t ** i for i, ci in enumerate(p["c"]))
    with np.errstate(invalid="ignore", divide="ignore"):
        Rt = (c / p["C35_15_mS_cm"]) / rt
        q = np.sqrt(np.where(Rt >= 0, Rt, np.nan))
    s1 = sum(ai * q ** i for i, ai in enumerate(p["a"]))
    s2 = sum(bi * q ** i for i, bi in enumerate(p["b"]))
    S = s1 + (t - 15.0) / (1.0 + p["k"] * (t - 15.0)) * s2
    lo, hi = p["valid_S"]
    ok = _in(S, lo - 0.005, hi + 0.005) & _in(t90, *p["valid_temp_c"])  # ends: rounding
    return np.where(ok, S, np.nan)


def seawater_solute_molality(sp) -> np.ndarray:
    r"""Total solute molality of Reference-Composition seawater from S_P.

    .. math:: m_{SW} = \frac{S_R}{(1 - S_R)\, M_S},\qquad S_R = \frac{35.16504}{35} S_P\ \text{g/kg}

    Parameters
    ----------
    sp : array_like
        Practical salinity S_P.

    Returns
    -------
    numpy.ndarray
        Molality of all solutes, mol per kg of water.

    References
    ----------
    Millero, Feistel, Wright & McDougall (2008), Deep-Sea Res. I 55, 50 (see
    :data:`REFERENCE_COMPOSITION`).

    Examples
    --------
    S_P 35: S_R = 35.16504 g/kg and M_S = 31.4038218 g/mol give
    35.16504 / (964.83496 × 0.0314038218) = 1.1606 mol/kg (by hand from the
    published constants):

    >>> round(float(seawater_solute_molality(35.0)), 4)
    1.1606
    """
    sa = _arr(sp, "salinity") * REFERENCE_COMPOSITION["uPS_g_kg"] / 1000.0
    return sa / ((1.0 - sa) * REFERENCE_COMPOSITION["M_S_kg_mol"])


def psi_s_seawater(ec_dS_m, temp_c=25.0, ec_temp_c=None) -> np.ndarray:
    r"""Solute potential of sea-salt water (coastal wells, seawater intrusion).

    1. S_P from the conductivity by PSS-78 (:func:`practical_salinity_pss78`)
       at ``ec_temp_c`` (default: ``temp_c``).
    2. m_SW, the total solute molality of Reference-Composition seawater
       (:func:`seawater_solute_molality`, Millero et al. 2008).
    3. phi: the Pitzer osmotic coefficient of NaCl (:func:`nacl_osmotic_coefficient`)
       at m_SW / 2, i.e. NaCl with the same number of solute particles per kg
       of water. Not a seawater-specific fit: it reads phi 2.0-2.8 % above
       IAPWS-08 for S_P 2-40 at 5-35 °C (measured in the tests), which puts
       psi within 3 % of IAPWS-08 over that range.
    4. .. math:: \psi_s = -\phi\, m_{SW}\, R\, T\, \rho_w

    Parameters
    ----------
    ec_dS_m : array_like
        Conductivity, dS/m, at ``ec_temp_c``.
    temp_c : array_like, default 25
        Solution temperature, °C (0-35).
    ec_temp_c : array_like, optional
        Temperature the conductivity refers to, °C (default ``temp_c``).

    Returns
    -------
    numpy.ndarray
        Solute potential, MPa (negative); NaN outside PSS-78's range (S 2-42,
        -2-35 °C) or Pitzer's (0-50 °C).

    References
    ----------
    See :data:`SEAWATER_ROUTE_INFO`: PSS-78, Millero et al. (2008), Pitzer &
    Mayorga (1973); compared with IAPWS-08 (``iapws.SeaWater``) in the tests.

    Examples
    --------
    IAPWS-08 (``iapws.SeaWater``, the oracle of the tests) gives -2.589 MPa for
    S_P 35 seawater at 25 °C (53.071 mS/cm by ``gsw``); this route is within
    3 % of it:

    >>> abs(float(psi_s_seawater(53.071, 25.0)) / -2.589 - 1) < 0.03
    True
    """
    t = _arr(temp_c, "temp_c")
    tc = t if ec_temp_c is None else _arr(ec_temp_c, "ec_temp_c")
    sp = practical_salinity_pss78(ec_dS_m, tc)
    m = seawater_solute_molality(sp)
    phi = nacl_osmotic_coefficient(m / 2.0, t)
    psi = -phi * m * R_J_MOL_K * (t + KELVIN_OFFSET) * water_density_kg_m3(t) / 1e6
    return psi + 0.0


SEAWATER_ROUTE = "seawater_pss78"

#: The sea-salt route: offered only where the user says the water is
#: sea-salt-like (``salt_type="sea_salt"``), reported beside the NaCl route.
SEAWATER_ROUTE_INFO = {
    "label": "Sea-salt water: practical salinity (PSS-78) and seawater solute molality",
    "source": ("PSS-78 (UNESCO 1981; Fofonoff & Millard 1983); Reference "
               "Composition (Millero et al. 2008); Pitzer NaCl osmotic coefficient "
               "at the same particle molality; only where the water is said to be "
               "sea-salt-like"),
    "valid_salinity": PSS78["valid_S"],
    "valid_temp_c": PSS78["valid_temp_c"],
}
