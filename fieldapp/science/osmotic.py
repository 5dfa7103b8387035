"""Solute (osmotic) potential from EC, the soil solution as the soil dries, and
total water potential.

Three routes turn an EC at 25 °C into a solute potential (MPa, negative):

``handbook60``
    The USDA Handbook 60 rule OP (atm) ≈ 0.36 × EC (mmhos/cm), made for
    saturation extracts of mixed-salt soils.
``rule_004``
    −0.04 MPa per dS/m, a rule of thumb for NaCl-dominated water.
``nacl_pitzer`` (the default)
    A thermodynamic NaCl-equivalent: the EC is read as the EC of an NaCl
    solution (an NaCl conductivity equation fitted to published NaCl data at
    25 °C, inverted; McCleskey et al. 2012 for its temperature dependence),
    and the osmotic coefficient of that solution comes from the Pitzer
    equations.

All three are estimates. A real soil solution is a mixture (Ca, Mg, SO4,
HCO3 ...) whose osmotic effect per unit EC differs from NaCl by several
percent; for seawater (SP 35, 25 °C) the NaCl-equivalent route reads about
2.8 % more negative than the IAPWS-08 seawater value, which is the
composition effect (Mg and SO4 conduct more per unit osmotic effect than
Na and Cl). See :data:`CAUTION`.

Conventions: every function accepts scalars or arrays (numpy broadcasting)
and returns ``np.ndarray`` of float64 (0-d for scalar input). Outside a
model's stated range the result is NaN, never an extrapolation; the caller
decides what to show (e.g. fall back from ``nacl_pitzer`` to ``handbook60``
and flag it). Input that is not a number at all raises
:class:`fieldapp.science.InputError`.
"""
from __future__ import annotations

import numpy as np

from . import InputError

# ---------------------------------------------------------------------------
# Physical constants
# ---------------------------------------------------------------------------
#: Molar gas constant, J/(mol K) -- CODATA 2018 (exact: N_A * k_B).
R_J_MOL_K = 8.314462618
#: Elementary charge, C -- SI 2019 exact value (CODATA 2018).
ELEMENTARY_CHARGE_C = 1.602176634e-19
#: Boltzmann constant, J/K -- SI 2019 exact value (CODATA 2018).
BOLTZMANN_J_K = 1.380649e-23
#: Avogadro constant, 1/mol -- SI 2019 exact value (CODATA 2018).
AVOGADRO_PER_MOL = 6.02214076e23
#: Vacuum permittivity, F/m -- CODATA 2018 recommended value.
VACUUM_PERMITTIVITY_F_M = 8.8541878128e-12
#: One standard atmosphere in MPa (definition: 101 325 Pa).
ATM_MPa = 0.101325
#: Zero of the Celsius scale, K (definition).
KELVIN_OFFSET = 273.15
#: Molar mass of NaCl, kg/mol -- IUPAC standard atomic weights
#: Na 22.98976928 + Cl 35.453 (conventional value).
NACL_MOLAR_MASS_KG_MOL = 0.05844277

# ---------------------------------------------------------------------------
# Parameter tables (named data, source beside each)
# ---------------------------------------------------------------------------
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

#: McCleskey, Nordstrom, Ryan & Ball (2012), "A new method of calculating
#: electrical conductivity with applications to natural waters",
#: Geochim. Cosmochim. Acta 77, 369-382, Table 1: ionic molal conductivity
#:   lambda_i = lambda0_i(t) - A_i(t) * sqrt(I) / (1 + B_i sqrt(I))
#:   lambda0_i(t) = l0 + l1 t + l2 t^2 ;  A_i(t) = a0 + a1 t + a2 t^2
#: t in °C, I ionic strength in mol/kg, lambda in S cm^2/mol.
#: Coefficients transcribed from an open-source implementation of that table
#: (PlanetProfile, ``elecCondMcCleskey2012``), not re-read from the paper.
#: K+ is kept so the model can be checked against the NIST KCl standards.
#: Stated validity of the method (abstract of McCleskey et al. 2011, Applied
#: Geochemistry, "Electrical conductivity method for natural waters";
#: volume/page from memory: 26, S227): effective ionic strength
#: 0.0004-0.7 mol/kg, 0-95 °C.
MCCLESKEY_2012_IONS = {
    "Na+": {"z": 1, "lambda0": (26.23, 0.877, 0.003763),
            "A": (32.07, 1.141, 0.00027), "B": 1.7},
    "K+": {"z": 1, "lambda0": (40.7, 1.261, 0.003046),
           "A": (22.59, 0.9316, 0.00535), "B": 1.5},
    "Cl-": {"z": -1, "lambda0": (40.99, 1.337, 0.003817),
            "A": (22.01, 0.9469, 0.00613), "B": 1.5},
}
#: Range of the conductivity model (see MCCLESKEY_2012_IONS). Below
#: I = 0.0004 mol/kg the model tends to the infinite-dilution limit, which
#: is exact physics, so the range is taken down to zero concentration.
MCCLESKEY_MAX_IONIC_STRENGTH = 0.7
MCCLESKEY_VALID_TEMP_C = (0.0, 95.0)

#: NaCl(aq) at 25 °C: molal conductivity fitted to published NaCl data,
#:   Lambda(m) = lambda0 - A sqrt(m) / (1 + B sqrt(m)) + C m,   kappa = Lambda m
#: (Lambda in S cm^2/mol, m in mol/kg, kappa in mS/cm = dS/m), the extended
#: Debye-Hückel-Onsager form that McCleskey et al. (2012) use per ion.
#: Why: the McCleskey ion model, summed for Na+ + Cl-, reads NaCl 0.5 % high
#: at 0.001 mol/L and 1.9-2.5 % low from 0.1 to 0.5 mol/kg against the
#: classical NaCl data, which pushes the inferred molality (and |psi_s|) up.
#: lambda0 = 126.45 S cm^2/mol is held at the limiting molar conductivity of
#: NaCl at 25 °C (Robinson & Stokes 1959, Appendix 6.2 -- from memory);
#: A, B and C are a least-squares fit (relative kappa residuals, this
#: project) to these published points, all at 25 °C:
#:   * 0.001, 0.01, 0.02, 0.05, 0.1 mol/L: kappa = 1.237e-2, 11.85e-2,
#:     23.15e-2, 55.53e-2, 106.74e-2 S/m -- the classical NaCl data set, as
#:     reproduced in a worked problem on byjus.com (Robinson & Stokes
#:     Appendix 6.2 gives the same numbers -- from memory); converted to
#:     molality with :func:`nacl_molality_from_molarity`;
#:   * 0.25, 0.5, 1.0 mol/kg: kappa = 2.48, 4.63, 8.42 S/m -- Chambers,
#:     Stokes & Stokes (1956), J. Phys. Chem. 60, 985, Table II, as converted
#:     from their equivalent conductances to S/m per molality in a public
#:     research script (not re-read from the paper; Robinson & Stokes
#:     Appendix 6.3, Lambda(0.5 mol/L) = 93.6, agrees -- from memory).
#: Residuals: 0.15 % at 0.001 mol/L, under 0.05 % at the others (tested).
#: The fit is used on 0-0.7 mol/kg in the app (the range of the temperature
#: model); the function itself is valid over its data, 0-1.0 mol/kg.
NACL_CONDUCTIVITY_25C = {
    "lambda0": 126.45, "A": 97.83, "B": 1.889, "C": -8.39,
    "valid_molality": (0.0, 1.0),
}

#: Pitzer & Mayorga (1973), J. Phys. Chem. 77, 2300: NaCl at 25 °C.
PITZER_MAYORGA_1973_NACL = {"beta0": 0.0765, "beta1": 0.2664, "cphi": 0.00127}
#: Silvester & Pitzer (1978), J. Solution Chem. 7, 327, Table I: first
#: temperature derivatives for NaCl, per K (as transcribed in the open-source
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

#: Caution shown with every solute-potential estimate.
CAUTION = (
    "Solute potential from EC is an estimate: it assumes the salts behave "
    "like the reference solution (sodium chloride or a typical soil extract). "
    "Mixed salts, gypsum and organic solutes shift the true value. Before a "
    "costly decision (reclamation, leaching, crop choice) confirm with a "
    "laboratory analysis and local extension or licensed advice."
)


# ---------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------
def _arr(value, name: str) -> np.ndarray:
    """Convert to a float64 array, or raise InputError naming the field."""
    try:
        out = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(
            f"{name} must be a number (for example 2.5), got {value!r}.",
            field=name,
        ) from None
    return out


def _in(x: np.ndarray, lo: float, hi: float) -> np.ndarray:
    """True where lo <= x <= hi (NaN is never in range)."""
    return (x >= lo) & (x <= hi)


# ---------------------------------------------------------------------------
# water properties
# ---------------------------------------------------------------------------
def water_density_kg_m3(temp_c) -> np.ndarray:
    r"""Density of pure, air-free water at 1 atm.

    .. math:: \rho_w = \frac{a_0 + a_1 t + a_2 t^2 + a_3 t^3 + a_4 t^4
                             + a_5 t^5}{1 + b\,t}

    Parameters
    ----------
    temp_c : temperature, °C. Valid 0-100 °C; NaN outside.

    Returns
    -------
    Density, kg/m³.

    Source: Kell (1975), J. Chem. Eng. Data 20, 97 (see
    :data:`KELL_1975_WATER_DENSITY`); agrees with IAPWS-95 within 1e-5.
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

    ``temp_c`` in °C, valid 0-100 °C (NaN outside). Dimensionless.

    Source: Malmberg & Maryott (1956), J. Res. NBS 56, 1 (see
    :data:`MALMBERG_MARYOTT_1956_PERMITTIVITY`).
    """
    t = _arr(temp_c, "temp_c")
    c = MALMBERG_MARYOTT_1956_PERMITTIVITY["c"]
    eps = c[0] + t * (c[1] + t * (c[2] + t * c[3]))
    lo, hi = MALMBERG_MARYOTT_1956_PERMITTIVITY["valid_temp_c"]
    return np.where(_in(t, lo, hi), eps, np.nan)


def debye_huckel_aphi(temp_c) -> np.ndarray:
    r"""Debye-Hückel osmotic coefficient slope A_phi, kg^0.5 mol^-0.5.

    .. math:: A_\phi = \frac{1}{3}\sqrt{2\pi N_A \rho_w}
              \left(\frac{e^2}{4\pi\varepsilon_0\varepsilon_r k_B T}\right)^{3/2}

    with rho_w from :func:`water_density_kg_m3` (kg/m³) and eps_r from
    :func:`water_relative_permittivity`. Valid 0-100 °C (NaN outside).
    About 0.392 at 25 °C (Pitzer 1973 used 0.392).

    Source: the definition of A_phi in Pitzer (1973), J. Phys. Chem. 77, 268
    (citation from memory), evaluated with Kell (1975) and Malmberg &
    Maryott (1956); the tests compare it with IAPWS inputs.
    """
    t = _arr(temp_c, "temp_c")
    T = t + KELVIN_OFFSET
    rho = water_density_kg_m3(t)
    eps = water_relative_permittivity(t)
    e2 = ELEMENTARY_CHARGE_C ** 2
    bjerrum = e2 / (4.0 * np.pi * VACUUM_PERMITTIVITY_F_M * eps * BOLTZMANN_J_K * T)
    return np.sqrt(2.0 * np.pi * AVOGADRO_PER_MOL * rho) * bjerrum ** 1.5 / 3.0


# ---------------------------------------------------------------------------
# NaCl solutions: conductivity, osmotic coefficient
# ---------------------------------------------------------------------------
def ionic_molal_conductivity(ion: str, ionic_strength, temp_c) -> np.ndarray:
    r"""Ionic molal conductivity lambda_i, S cm² mol⁻¹.

    .. math:: \lambda_i = \lambda_i^0(t) - A_i(t)\frac{\sqrt I}{1 + B_i\sqrt I}

    Parameters
    ----------
    ion : a key of :data:`MCCLESKEY_2012_IONS` ("Na+", "K+", "Cl-").
    ionic_strength : mol/kg, valid 0-0.7.
    temp_c : °C, valid 0-95.

    NaN outside the ranges. Source: McCleskey et al. (2012), GCA 77, 369,
    Table 1 (see :data:`MCCLESKEY_2012_IONS`).
    """
    if ion not in MCCLESKEY_2012_IONS:
        raise InputError(
            f"unknown ion {ion!r}; use one of {sorted(MCCLESKEY_2012_IONS)}.",
            field="ion",
        )
    p = MCCLESKEY_2012_IONS[ion]
    i_s = _arr(ionic_strength, "ionic_strength")
    t = _arr(temp_c, "temp_c")
    l0 = p["lambda0"][0] + t * (p["lambda0"][1] + t * p["lambda0"][2])
    a = p["A"][0] + t * (p["A"][1] + t * p["A"][2])
    sq = np.sqrt(np.where(i_s >= 0, i_s, np.nan))
    lam = l0 - a * sq / (1.0 + p["B"] * sq)
    ok = _in(i_s, 0.0, MCCLESKEY_MAX_IONIC_STRENGTH) & _in(t, *MCCLESKEY_VALID_TEMP_C)
    return np.where(ok, lam, np.nan)


def ec_from_molality_1_1(molality, temp_c=25.0, cation: str = "Na+",
                         anion: str = "Cl-") -> np.ndarray:
    r"""EC of a single 1:1 salt solution, dS/m (= mS/cm).

    .. math:: \kappa = (\lambda_+ + \lambda_-)\, m, \qquad I = m

    with lambda in S cm²/mol (:func:`ionic_molal_conductivity`) and m in
    mol/kg, which gives mS/cm directly (the model is defined on molality).
    Valid 0 <= m <= 0.7 mol/kg and 0-95 °C; NaN outside.

    Source: McCleskey et al. (2012), GCA 77, 369, eqs. for the ionic molal
    conductivity summed over ions.
    """
    m = _arr(molality, "molality")
    lam = (ionic_molal_conductivity(cation, m, temp_c)
           + ionic_molal_conductivity(anion, m, temp_c))
    return lam * m


def _nacl_lambda25(m: np.ndarray) -> np.ndarray:
    """Molal conductivity of NaCl at 25 °C, S cm²/mol, for m >= 0 (no checks)."""
    p = NACL_CONDUCTIVITY_25C
    s = np.sqrt(m)
    return p["lambda0"] - p["A"] * s / (1.0 + p["B"] * s) + p["C"] * m


def nacl_molal_conductivity_25c(molality) -> np.ndarray:
    r"""Molal conductivity of aqueous NaCl at 25 °C, S cm² mol⁻¹.

    .. math:: \Lambda(m) = \Lambda^0 - \frac{A\sqrt m}{1 + B\sqrt m} + C\,m

    ``molality`` in mol/kg, valid 0-1.0 (the range of the data fitted); NaN
    outside. EC = Lambda × m in dS/m. Parameters and the published data they
    were fitted to: :data:`NACL_CONDUCTIVITY_25C`.
    """
    m = _arr(molality, "molality")
    lo, hi = NACL_CONDUCTIVITY_25C["valid_molality"]
    ok = _in(m, lo, hi)
    return np.where(ok, _nacl_lambda25(np.where(ok, m, 0.0)), np.nan)


def nacl_ec_from_molality(molality, temp_c=25.0) -> np.ndarray:
    r"""EC of an NaCl solution, dS/m, at ``temp_c`` (the forward model).

    .. math:: \kappa(m, t) = m\,\Lambda_{25}(m)\,
              \frac{\lambda_{Na}(m, t) + \lambda_{Cl}(m, t)}
                   {\lambda_{Na}(m, 25) + \lambda_{Cl}(m, 25)}

    Lambda_25: the NaCl fit at 25 °C (:func:`nacl_molal_conductivity_25c`,
    published NaCl data); the ratio: the temperature dependence of the
    McCleskey et al. (2012) ion model (:func:`ionic_molal_conductivity`),
    which is exactly 1 at 25 °C. Assumption: the ion model's relative error
    for NaCl found at 25 °C holds at other temperatures (the tests check
    20 °C against the CRC Handbook table, values from memory, within 2 %).
    ``molality`` in mol/kg (0-0.7),
    ``temp_c`` in °C (0-95); NaN outside.
    """
    m = _arr(molality, "molality")
    t = _arr(temp_c, "temp_c")
    ok = _in(m, 0.0, MCCLESKEY_MAX_IONIC_STRENGTH) & _in(t, *MCCLESKEY_VALID_TEMP_C)
    mm = np.where(ok, m, 0.0)
    tt = np.where(ok, t, 25.0)
    lam_t = (ionic_molal_conductivity("Na+", mm, tt)
             + ionic_molal_conductivity("Cl-", mm, tt))
    lam_25 = (ionic_molal_conductivity("Na+", mm, 25.0)
              + ionic_molal_conductivity("Cl-", mm, 25.0))
    kappa = mm * _nacl_lambda25(mm) * (lam_t / lam_25)
    return np.where(ok, kappa, np.nan)


def _check_monotonic() -> None:
    """The inversion needs dEC/dm > 0 over the whole model range."""
    m = np.linspace(0.0, MCCLESKEY_MAX_IONIC_STRENGTH, 2001)
    for t in np.arange(MCCLESKEY_VALID_TEMP_C[0], MCCLESKEY_VALID_TEMP_C[1] + 1e-9, 5.0):
        k = nacl_ec_from_molality(m, t)
        if not np.all(np.diff(k) > 0):
            raise RuntimeError(f"NaCl conductivity model not monotonic at {t} °C")


_check_monotonic()

#: Highest EC (dS/m at 25 °C) that the NaCl route can invert: the model EC
#: at the 0.7 mol/kg limit.
NACL_EC25_MAX_dS_m = float(nacl_ec_from_molality(MCCLESKEY_MAX_IONIC_STRENGTH, 25.0))

_BISECTION_STEPS = 56  # 0.7 / 2**56 ~ 1e-17 mol/kg


def nacl_molality_from_ec25(ec25, temp_c=25.0) -> np.ndarray:
    """NaCl molality (mol/kg) whose EC equals the given EC.

    Inverts :func:`nacl_ec_from_molality` by vectorized bisection on
    0-0.7 mol/kg (the model is checked to be strictly increasing there at
    import time). ``ec25`` in dS/m; ``temp_c`` is the temperature the EC
    refers to -- 25 °C for a compensated reading, which is what the app
    stores. NaN for EC < 0, EC above the 0.7 mol/kg limit (about
    62 dS/m at 25 °C), or temperature outside 0-95 °C.

    The model is molal, so no molarity/molality conversion (and no solution
    density) enters here; :func:`nacl_molarity_from_molality` exists for
    comparing with tables given per litre.
    """
    ec = _arr(ec25, "ec25")
    t = _arr(temp_c, "temp_c")
    ec, t = np.broadcast_arrays(ec, t)
    ec_max = nacl_ec_from_molality(MCCLESKEY_MAX_IONIC_STRENGTH, t)
    ok = (ec >= 0.0) & (ec <= ec_max) & _in(t, *MCCLESKEY_VALID_TEMP_C)
    out = np.full(ec.shape, np.nan)
    if not np.any(ok):
        return out
    target = ec[ok]
    tt = t[ok]
    if np.all(tt == _GRID_T_C):
        out[ok] = _invert_on_grid(target)
        return out
    lo = np.zeros_like(target)
    hi = np.full_like(target, MCCLESKEY_MAX_IONIC_STRENGTH)
    for _ in range(_BISECTION_STEPS):
        mid = 0.5 * (lo + hi)
        below = nacl_ec_from_molality(mid, tt) < target
        lo = np.where(below, mid, lo)
        hi = np.where(below, hi, mid)
    # exact zero for pure water (bisection alone would leave ~1e-17)
    out[ok] = np.where(target == 0.0, 0.0, 0.5 * (lo + hi))
    return out


#: Readings are stored at 25 °C, so the inversion at 25 °C has a fast path:
#: a dense grid (uniform in sqrt(m), where EC is nearly linear) gives the
#: starting point and two Newton steps on the 25 °C forward model (which is
#: the NaCl fit alone, the temperature ratio being 1) with its analytic
#: slope polish it to machine precision; the result equals the bisection to
#: ~1e-12 (tested).
_GRID_T_C = 25.0
_GRID_M = np.minimum(np.linspace(0.0, np.sqrt(MCCLESKEY_MAX_IONIC_STRENGTH), 4001) ** 2,
                     MCCLESKEY_MAX_IONIC_STRENGTH)
_GRID_EC = nacl_ec_from_molality(_GRID_M, _GRID_T_C)


def _nacl_ec25_and_slope(m: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """EC (dS/m) at 25 °C and dEC/dm for 0 <= m, from the NaCl fit.

    kappa = m Lambda(m); dkappa/dm = lambda0 - A s/(1+Bs) - A s/(2(1+Bs)^2)
    + 2 C m with s = sqrt(m) (finite at m = 0).
    """
    p = NACL_CONDUCTIVITY_25C
    s = np.sqrt(m)
    d = 1.0 + p["B"] * s
    lam = p["lambda0"] - p["A"] * s / d + p["C"] * m
    slope = lam - p["A"] * s / (2.0 * d * d) + p["C"] * m
    return m * lam, slope


def _invert_on_grid(target: np.ndarray) -> np.ndarray:
    m = np.interp(target, _GRID_EC, _GRID_M)
    for _ in range(2):
        ec, slope = _nacl_ec25_and_slope(m)
        m = np.clip(m - (ec - target) / slope, 0.0, MCCLESKEY_MAX_IONIC_STRENGTH)
    return np.where(target == 0.0, 0.0, m)


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
    molality : mol/kg, valid 0-6.
    temp_c : °C, valid 0-50.

    NaN outside the ranges.
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
    """Density of NaCl(aq) at 1 bar, kg/m³.

    Interpolates the Rogers & Pitzer (1982) specific-volume table
    (:data:`ROGERS_PITZER_1982_NACL_SPECIFIC_VOLUME`): the excess over pure
    water (Kell 1975, m = 0) is interpolated linearly in molality and
    temperature, which keeps the interpolation error below 1e-4. Valid
    0-5 mol/kg and 0-50 °C (the table rows carried here); NaN outside.
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
    r"""mol/L from mol/kg for NaCl(aq): c = 1e-3 m rho / (1 + m M_NaCl).

    rho from :func:`nacl_solution_density_kg_m3`. At 0.6 mol/kg the two
    scales differ by about 1.4 %, at 0.1 mol/kg by 0.3 %.
    """
    m = _arr(molality, "molality")
    rho = nacl_solution_density_kg_m3(m, temp_c)
    return 1e-3 * m * rho / (1.0 + m * NACL_MOLAR_MASS_KG_MOL)


def nacl_molality_from_molarity(molarity, temp_c=25.0) -> np.ndarray:
    """Inverse of :func:`nacl_molarity_from_molality` (fixed-point, mol/kg).

    ``molarity`` in mol/L; same validity (0-5 mol/kg, 0-50 °C).
    """
    c = _arr(molarity, "molarity")
    m = c.copy()
    for _ in range(30):
        rho = nacl_solution_density_kg_m3(m, temp_c)
        m = 1e3 * c / (rho - 1e3 * c * NACL_MOLAR_MASS_KG_MOL)
    return m


# ---------------------------------------------------------------------------
# Solute potential routes
# ---------------------------------------------------------------------------
def psi_s_handbook60(ec25) -> np.ndarray:
    r"""Solute potential from USDA Handbook 60, MPa (negative).

    .. math:: \psi_s = -0.36\,EC_{25}\ \text{atm} = -0.36 \times 0.101325\,EC_{25}

    ``ec25``: EC at 25 °C in dS/m (= mmhos/cm). The Handbook gives
    OP ≈ 0.36 × EC as an approximation for soil saturation extracts over
    roughly 3-30 mmhos/cm; NaN outside that range (see
    :data:`HANDBOOK60_VALID_dS_m`). Conversion: 1 atm = 0.101325 MPa.

    Source: USDA Handbook 60 (Richards 1954), Chapter 2 -- from memory.
    """
    ec = _arr(ec25, "ec25")
    psi = -HANDBOOK60_OP_atm_PER_dS_m * ATM_MPa * ec
    return np.where(_in(ec, *HANDBOOK60_VALID_dS_m), psi, np.nan)


def psi_s_rule_004(ec25) -> np.ndarray:
    r"""Solute potential by the rule of thumb psi_s = −0.04 MPa × EC25 (dS/m).

    For NaCl-dominated water (common practice). Valid 0-30 dS/m
    (:data:`RULE_004_VALID_dS_m`); NaN outside.
    """
    ec = _arr(ec25, "ec25")
    psi = RULE_004_MPa_PER_dS_m * ec
    return np.where(_in(ec, *RULE_004_VALID_dS_m), psi, np.nan) + 0.0


def psi_s_nacl_pitzer(ec25, temp_c=25.0) -> np.ndarray:
    r"""Thermodynamic NaCl-equivalent solute potential, MPa (negative).

    1. m: NaCl molality whose EC at 25 °C equals ``ec25``
       (:func:`nacl_molality_from_ec25`: the NaCl conductivity fit of
       :data:`NACL_CONDUCTIVITY_25C`, inverted).
    2. phi: osmotic coefficient at the solution temperature
       (:func:`nacl_osmotic_coefficient`, Pitzer).
    3. .. math:: \psi_s = -\nu\, m\, \phi\, R\, T\, \rho_w,\qquad \nu = 2

       R = 8.314462618 J/(mol K), T in K, rho_w (kg/m³) of pure water at T
       (Kell 1975). This is -RT ln(a_w)/V_w with ln a_w = -nu m phi M_w and
       V_w = M_w/rho_w; result converted from Pa to MPa.

    Parameters
    ----------
    ec25 : EC compensated to 25 °C, dS/m. Valid 0 to
        :data:`NACL_EC25_MAX_dS_m` (about 62 dS/m).
    temp_c : solution temperature, °C. Valid 0-50 (Pitzer T-extension).

    NaN outside either range (the caller may fall back to
    :func:`psi_s_handbook60` and flag it). Pure water gives 0.

    Check: for seawater (SP 35 at 25 °C, EC 53.1 dS/m) this gives -2.66 MPa
    against -2.59 MPa from IAPWS-08, +2.8 %: the composition effect of a
    mixed salt read as NaCl (tested).
    """
    ec = _arr(ec25, "ec25")
    t = _arr(temp_c, "temp_c")
    m = nacl_molality_from_ec25(ec, 25.0)
    phi = nacl_osmotic_coefficient(m, t)
    T = t + KELVIN_OFFSET
    psi_pa = -2.0 * m * phi * R_J_MOL_K * T * water_density_kg_m3(t)
    return psi_pa / 1e6 + 0.0  # + 0.0 turns -0.0 into 0.0


# ---------------------------------------------------------------------------
# Sea-salt water: practical salinity (PSS-78) and a seawater solute potential
# ---------------------------------------------------------------------------
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

    Examples
    --------
    >>> round(float(practical_salinity_pss78(42.914, 15.0 / 1.00024)), 4)  # 15 °C IPTS-68
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
    """Total solute molality of Reference-Composition seawater, mol/kg, from S_P
    (see :data:`REFERENCE_COMPOSITION`)."""
    sa = _arr(sp, "salinity") * REFERENCE_COMPOSITION["uPS_g_kg"] / 1000.0
    return sa / ((1.0 - sa) * REFERENCE_COMPOSITION["M_S_kg_mol"])


def psi_s_seawater(ec_dS_m, temp_c=25.0, ec_temp_c=None) -> np.ndarray:
    r"""Solute potential of sea-salt water (coastal wells, seawater intrusion), MPa.

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
    ec_dS_m : array_like, conductivity, dS/m, at ``ec_temp_c``.
    temp_c : array_like, solution temperature, °C (0-35).
    ec_temp_c : array_like, optional, temperature the conductivity refers to.

    Returns
    -------
    numpy.ndarray, MPa (negative); NaN outside PSS-78's range (S 2-42,
    -2-35 °C) or Pitzer's (0-50 °C).

    Examples
    --------
    >>> round(float(psi_s_seawater(53.071, 25.0)), 2)   # S_P 35 at 25 °C
    -2.65
    """
    t = _arr(temp_c, "temp_c")
    tc = t if ec_temp_c is None else _arr(ec_temp_c, "ec_temp_c")
    sp = practical_salinity_pss78(ec_dS_m, tc)
    m = seawater_solute_molality(sp)
    phi = nacl_osmotic_coefficient(m / 2.0, t)
    psi = -phi * m * R_J_MOL_K * (t + KELVIN_OFFSET) * water_density_kg_m3(t) / 1e6
    return psi + 0.0


SEAWATER_ROUTE = "seawater_pss78"


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



def psi_s_all_routes(ec25, temp_c=25.0) -> dict[str, np.ndarray]:
    """All solute potential routes, MPa, keyed as in :data:`PSI_S_ROUTES`.

    ``temp_c`` (solution temperature) only affects ``nacl_pitzer``. Each
    value is NaN where that route is out of range; choosing a fallback and
    flagging it is the caller's job.
    """
    return {
        "handbook60": psi_s_handbook60(ec25),
        "rule_004": psi_s_rule_004(ec25),
        "nacl_pitzer": psi_s_nacl_pitzer(ec25, temp_c),
    }


# ---------------------------------------------------------------------------
# Soil solution as the soil dries; total water potential
# ---------------------------------------------------------------------------
def soil_solution_ec(ece, sp_pct, theta_g_pct) -> np.ndarray:
    r"""EC of the soil solution at a gravimetric water content, dS/m.

    .. math:: EC_{sw} \approx EC_e \, \frac{SP}{\theta_g}

    Salts of the saturation extract concentrated into less water, with EC
    taken as proportional to concentration. Ignores salt precipitation
    (gypsum, carbonates), anion exclusion and the fall of molar conductivity
    with concentration, so it overstates EC as the soil dries (common
    approximation; the same ratio gives FAO 29's ECsw ≈ 2 ECe at field
    capacity).

    Parameters
    ----------
    ece : EC of the saturated-paste extract, dS/m (>= 0).
    sp_pct : saturation percentage, g water per 100 g dry soil (> 0).
    theta_g_pct : gravimetric water content, % (same basis).

    Valid for SP/4 <= theta_g <= SP (saturation down to about the wilting
    point, :data:`SP_PER_WILTING_POINT`); NaN outside.
    """
    e = _arr(ece, "ece")
    sp = _arr(sp_pct, "sp_pct")
    th = _arr(theta_g_pct, "theta_g_pct")
    ok = (e >= 0) & (sp > 0) & (th >= sp / SP_PER_WILTING_POINT) & (th <= sp)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = e * sp / th
    return np.where(ok, out, np.nan)


def field_capacity_theta_g(sp_pct) -> np.ndarray:
    """Gravimetric water content at field capacity, %: SP / 2.

    Common practice (SP ≈ 2 × field capacity; FAO 29, Ayers & Westcot 1985
    -- from memory). NaN for SP <= 0.
    """
    sp = _arr(sp_pct, "sp_pct")
    return np.where(sp > 0, sp / SP_PER_FIELD_CAPACITY, np.nan)


def soil_solution_ec_at_field_capacity(ece) -> np.ndarray:
    """EC of the soil solution at field capacity, dS/m: 2 × ECe.

    Common practice (FAO 29, Ayers & Westcot 1985 -- from memory); equal to
    :func:`soil_solution_ec` at theta_g = :func:`field_capacity_theta_g`.
    NaN for ECe < 0.
    """
    e = _arr(ece, "ece")
    return np.where(e >= 0, SP_PER_FIELD_CAPACITY * e, np.nan)


def total_water_potential(psi_s_MPa, matric_MPa) -> np.ndarray:
    """Total soil water potential, MPa: matric + solute.

    Both parts are <= 0 (MPa); gravity and overburden are ignored. NaN if
    either part is positive or NaN.
    """
    ps = _arr(psi_s_MPa, "psi_s_MPa")
    pm = _arr(matric_MPa, "matric_MPa")
    return np.where((ps <= 0) & (pm <= 0), ps + pm, np.nan)


def margin_to_wilting_point(total_MPa) -> np.ndarray:
    """MPa left above the permanent wilting point (−1.5 MPa, common practice).

    Positive: the soil water is still above the wilting point; negative:
    beyond it. NaN for a positive (impossible) total potential.
    """
    tot = _arr(total_MPa, "total_MPa")
    return np.where(tot <= 0, tot - PERMANENT_WILTING_POINT_MPa, np.nan)
