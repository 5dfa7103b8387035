"""Solute potential from EC at 25 °C by each route (Handbook 60, the
−0.04 rule, the NaCl-equivalent with Pitzer), the routes table and the caution."""
from __future__ import annotations

import numpy as np

from ._base import ATM_MPa, KELVIN_OFFSET, R_J_MOL_K, _arr, _in
from .conductivity import NACL_EC25_MAX_dS_m
from .nacl_inversion import nacl_molality_from_ec25
from .pitzer import PITZER_NACL_VALID_TEMP_C, nacl_osmotic_coefficient
from .water import water_density_kg_m3

#: USDA Handbook 60 (Richards, ed., 1954), "Diagnosis and Improvement of
#: Saline and Alkali Soils", Chapter 2: osmotic pressure of soil saturation
#: extracts OP (atm) ≈ 0.36 × EC (mmhos/cm at 25 °C), given as an
#: approximation over roughly 3-30 mmhos/cm -- coefficient and range from
#: memory (the figure number was not re-read).
HANDBOOK60_OP_atm_PER_dS_m = 0.36
HANDBOOK60_VALID_dS_m = (3.0, 30.0)

#: −0.04 MPa per dS/m for NaCl-dominated water (common practice). Range: up
#: to 30 dS/m, where it stays within 20 % of the NaCl thermodynamic route of
#: this module (checked in the tests); beyond, the rule understates the
#: potential more and more as the molar conductivity falls.
RULE_004_MPa_PER_dS_m = -0.04
RULE_004_VALID_dS_m = (0.0, 30.0)

#: Caution shown with every solute-potential estimate.
CAUTION = (
    "Solute potential from EC is an estimate: it assumes the salts behave "
    "like the reference solution (sodium chloride or a typical soil extract). "
    "Mixed salts, gypsum and organic solutes shift the true value. Before a "
    "costly decision (reclamation, leaching, crop choice) confirm with a "
    "laboratory analysis and local extension or licensed advice."
)


def psi_s_handbook60(ec25) -> np.ndarray:
    r"""Solute potential from USDA Handbook 60.

    .. math:: \psi_s = -0.36\,EC_{25}\ \text{atm} = -0.36 \times 0.101325\,EC_{25}\ \text{MPa}

    The Handbook gives OP ≈ 0.36 × EC as an approximation for soil saturation
    extracts over roughly 3-30 mmhos/cm (:data:`HANDBOOK60_VALID_dS_m`).
    Conversion: 1 atm = 0.101325 MPa.

    Parameters
    ----------
    ec25 : array_like
        EC at 25 °C, dS/m (= mmhos/cm).

    Returns
    -------
    numpy.ndarray
        Solute potential, MPa (negative); NaN outside 3-30 dS/m.

    References
    ----------
    USDA Handbook 60 (Richards 1954), Chapter 2 -- from memory.

    Examples
    --------
    10 mmhos/cm: OP = 0.36 × 10 = 3.6 atm = 0.365 MPa:

    >>> round(float(psi_s_handbook60(10.0)), 3)
    -0.365
    """
    ec = _arr(ec25, "ec25")
    psi = -HANDBOOK60_OP_atm_PER_dS_m * ATM_MPa * ec
    return np.where(_in(ec, *HANDBOOK60_VALID_dS_m), psi, np.nan)


def psi_s_rule_004(ec25) -> np.ndarray:
    """Solute potential by the rule of thumb psi_s = −0.04 MPa × EC25.

    For NaCl-dominated water (common practice).

    Parameters
    ----------
    ec25 : array_like
        EC at 25 °C, dS/m; valid 0-30 (:data:`RULE_004_VALID_dS_m`).

    Returns
    -------
    numpy.ndarray
        Solute potential, MPa (negative); NaN outside the range.

    References
    ----------
    Common practice (no published table behind it); the tests hold it within
    20 % of :func:`psi_s_nacl_pitzer` up to 30 dS/m.

    Examples
    --------
    >>> float(psi_s_rule_004(10.0))   # -0.04 × 10, the rule itself
    -0.4
    """
    ec = _arr(ec25, "ec25")
    psi = RULE_004_MPa_PER_dS_m * ec
    return np.where(_in(ec, *RULE_004_VALID_dS_m), psi, np.nan) + 0.0


def psi_s_nacl_pitzer(ec25, temp_c=25.0) -> np.ndarray:
    r"""Thermodynamic NaCl-equivalent solute potential.

    1. m: NaCl molality whose EC at 25 °C equals ``ec25``
       (:func:`nacl_molality_from_ec25`: the NaCl conductivity fit of
       :data:`NACL_CONDUCTIVITY_25C`, inverted).
    2. phi: osmotic coefficient at the solution temperature
       (:func:`nacl_osmotic_coefficient`, Pitzer).
    3. .. math:: \psi_s = -\nu\, m\, \phi\, R\, T\, \rho_w,\qquad \nu = 2

       R = 8.314462618 J/(mol K), T in K, rho_w (kg/m³) of pure water at T
       (Kell 1975). This is -RT ln(a_w)/V_w with ln a_w = -nu m phi M_w and
       V_w = M_w/rho_w; result converted from Pa to MPa.

    Pure water gives 0. For seawater (SP 35 at 25 °C, EC 53.1 dS/m) this
    gives -2.66 MPa against -2.59 MPa from IAPWS-08, +2.8 %: the composition
    effect of a mixed salt read as NaCl (tested).

    Parameters
    ----------
    ec25 : array_like
        EC compensated to 25 °C, dS/m. Valid 0 to :data:`NACL_EC25_MAX_dS_m`
        (about 62 dS/m).
    temp_c : array_like, default 25
        Solution temperature, °C. Valid 0-50 (Pitzer T-extension).

    Returns
    -------
    numpy.ndarray
        Solute potential, MPa (negative); NaN outside either range (the
        caller may fall back to :func:`psi_s_handbook60` and flag it).

    References
    ----------
    See :data:`PSI_S_ROUTES` ("nacl_pitzer"): the NaCl conductivity data,
    McCleskey et al. 2012, Pitzer & Mayorga 1973, Silvester & Pitzer 1978,
    Kell 1975.

    Examples
    --------
    46.3 dS/m is 0.5 mol/kg NaCl (Chambers, Stokes & Stokes 1956), whose
    phi is 0.921 (Robinson & Stokes 1959, from memory); with rho_w =
    997.05 kg/m³ (IAPWS-95): -2 × 0.5 × 0.921 × 8.314462618 × 298.15 ×
    997.05 Pa = -2.28 MPa.

    >>> round(float(psi_s_nacl_pitzer(46.3, 25.0)), 2)
    -2.28
    """
    ec = _arr(ec25, "ec25")
    t = _arr(temp_c, "temp_c")
    m = nacl_molality_from_ec25(ec, 25.0)
    phi = nacl_osmotic_coefficient(m, t)
    T = t + KELVIN_OFFSET
    psi_pa = -2.0 * m * phi * R_J_MOL_K * T * water_density_kg_m3(t)
    return psi_pa / 1e6 + 0.0  # + 0.0 turns -0.0 into 0.0

#: Route key -> description. ``valid_dS_m`` is the EC25 range (dS/m) where the
#: route returns a number; ``valid_temp_c`` the solution temperature range
#: (None: the route ignores temperature).
PSI_S_ROUTES = {
    "handbook60": {
        "label": "USDA Handbook 60: osmotic pressure ≈ 0.36 atm per dS/m",
        "source": "USDA Handbook 60 (Richards 1954), Chapter 2 (from memory)",
        "valid_dS_m": HANDBOOK60_VALID_dS_m,
        "valid_temp_c": None,
    },
    "rule_004": {
        "label": "Rule of thumb: −0.04 MPa per dS/m (sodium chloride water)",
        "source": "common practice",
        "valid_dS_m": RULE_004_VALID_dS_m,
        "valid_temp_c": None,
    },
    "nacl_pitzer": {
        "label": "Sodium chloride equivalent with Pitzer osmotic coefficient",
        "source": ("NaCl conductivity at 25 °C fitted to Chambers, Stokes & "
                   "Stokes 1956 and classical dilute data; McCleskey et al. "
                   "2012 (GCA 77, 369) for its temperature dependence; "
                   "Pitzer & Mayorga 1973; Silvester & Pitzer 1978; Kell 1975"),
        "valid_dS_m": (0.0, NACL_EC25_MAX_dS_m),
        "valid_temp_c": PITZER_NACL_VALID_TEMP_C,
    },
}
DEFAULT_ROUTE = "nacl_pitzer"


def psi_s_all_routes(ec25, temp_c=25.0) -> dict[str, np.ndarray]:
    """All solute potential routes, keyed as in :data:`PSI_S_ROUTES`.

    Each value is NaN where that route is out of range; choosing a fallback
    and flagging it is the caller's job.

    Parameters
    ----------
    ec25 : array_like
        EC at 25 °C, dS/m.
    temp_c : array_like, default 25
        Solution temperature, °C; only ``nacl_pitzer`` uses it.

    Returns
    -------
    dict of str to numpy.ndarray
        Solute potential by route, MPa.

    References
    ----------
    Each route's own function: :func:`psi_s_handbook60`,
    :func:`psi_s_rule_004`, :func:`psi_s_nacl_pitzer`.

    Examples
    --------
    At 10 dS/m the Handbook 60 rule gives 3.6 atm and the rule of thumb
    0.4 MPa:

    >>> r = psi_s_all_routes(10.0)
    >>> sorted(r), round(float(r["handbook60"]), 3), float(r["rule_004"])
    (['handbook60', 'nacl_pitzer', 'rule_004'], -0.365, -0.4)
    """
    return {
        "handbook60": psi_s_handbook60(ec25),
        "rule_004": psi_s_rule_004(ec25),
        "nacl_pitzer": psi_s_nacl_pitzer(ec25, temp_c),
    }
