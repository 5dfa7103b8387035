"""Conductivity of salt solutions: the McCleskey et al. (2012) ion model and the
NaCl fit at 25 °C (the forward model, molality -> EC)."""
from __future__ import annotations

import numpy as np

from .. import InputError
from ._base import _arr, _in

#: McCleskey, Nordstrom, Ryan & Ball (2012), "A new method of calculating
#: electrical conductivity with applications to natural waters",
#: Geochim. Cosmochim. Acta 77, 369-382, Table 1: ionic molal conductivity
#:   lambda_i = lambda0_i(t) - A_i(t) * sqrt(I) / (1 + B_i sqrt(I))
#:   lambda0_i(t) = l0 + l1 t + l2 t^2 ;  A_i(t) = a0 + a1 t + a2 t^2
#: t in °C, I ionic strength in mol/kg, lambda in S cm^2/mol.
#: Coefficients copied from an open-source implementation of that table
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


def ionic_molal_conductivity(ion: str, ionic_strength, temp_c) -> np.ndarray:
    r"""Ionic molal conductivity lambda_i.

    .. math:: \lambda_i = \lambda_i^0(t) - A_i(t)\frac{\sqrt I}{1 + B_i\sqrt I}

    Parameters
    ----------
    ion : str
        A key of :data:`MCCLESKEY_2012_IONS` ("Na+", "K+", "Cl-").
    ionic_strength : array_like
        Ionic strength, mol/kg; valid 0-0.7.
    temp_c : array_like
        Temperature, °C; valid 0-95.

    Returns
    -------
    numpy.ndarray
        lambda_i, S cm² mol⁻¹; NaN outside the ranges.

    References
    ----------
    McCleskey, R.B., Nordstrom, D.K., Ryan, J.N., Ball, J.W. 2012. Geochim.
    Cosmochim. Acta 77, 369, Table 1 (see :data:`MCCLESKEY_2012_IONS`).

    Examples
    --------
    The NIST primary standard 0.01 mol/kg KCl reads 1408.23 µS/cm at 25 °C
    (Wu, Koch & Pratt 1991, via the CRC Handbook; tests/test_osmotic.py holds
    the model within 2 % of it from 0 to 50 °C):

    >>> lam = (ionic_molal_conductivity("K+", 0.01, 25.0)
    ...        + ionic_molal_conductivity("Cl-", 0.01, 25.0))
    >>> abs(float(lam) * 0.01 / 1.40823 - 1) < 0.02
    True
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
    r"""EC of a single 1:1 salt solution.

    .. math:: \kappa = (\lambda_+ + \lambda_-)\, m, \qquad I = m

    with lambda in S cm²/mol (:func:`ionic_molal_conductivity`) and m in
    mol/kg, which gives mS/cm directly (the model is defined on molality).

    Parameters
    ----------
    molality : array_like
        Salt molality, mol/kg; valid 0-0.7.
    temp_c : array_like, default 25
        Temperature, °C; valid 0-95.
    cation, anion : str
        Keys of :data:`MCCLESKEY_2012_IONS`.

    Returns
    -------
    numpy.ndarray
        EC, dS/m (= mS/cm); NaN outside the ranges.

    References
    ----------
    McCleskey et al. (2012), GCA 77, 369: the ionic molal conductivities
    summed over the ions.

    Examples
    --------
    NIST primary standard 0.1 mol/kg KCl at 25 °C: 12 824.6 µS/cm (Wu, Koch &
    Pratt 1991, via the CRC Handbook; the oracle of the tests, within 2 %):

    >>> abs(float(ec_from_molality_1_1(0.1, 25.0, "K+", "Cl-")) / 12.8246 - 1) < 0.02
    True
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
    r"""Molal conductivity of aqueous NaCl at 25 °C.

    .. math:: \Lambda(m) = \Lambda^0 - \frac{A\sqrt m}{1 + B\sqrt m} + C\,m

    Parameters
    ----------
    molality : array_like
        NaCl molality, mol/kg; valid 0-1.0 (the range of the data fitted).

    Returns
    -------
    numpy.ndarray
        Lambda, S cm² mol⁻¹ (EC = Lambda × m in dS/m); NaN outside the range.

    References
    ----------
    The fit and the published NaCl data it was fitted to (Chambers, Stokes &
    Stokes 1956; the classical dilute data): :data:`NACL_CONDUCTIVITY_25C`.

    Examples
    --------
    Chambers, Stokes & Stokes (1956): 4.63 S/m at 0.5 mol/kg, i.e. Lambda =
    46.3 / 0.5 = 92.6 S cm²/mol:

    >>> round(float(nacl_molal_conductivity_25c(0.5)), 1)
    92.6
    """
    m = _arr(molality, "molality")
    lo, hi = NACL_CONDUCTIVITY_25C["valid_molality"]
    ok = _in(m, lo, hi)
    return np.where(ok, _nacl_lambda25(np.where(ok, m, 0.0)), np.nan)


def nacl_ec_from_molality(molality, temp_c=25.0) -> np.ndarray:
    r"""EC of an NaCl solution at ``temp_c`` (the forward model).

    .. math:: \kappa(m, t) = m\,\Lambda_{25}(m)\,
              \frac{\lambda_{Na}(m, t) + \lambda_{Cl}(m, t)}
                   {\lambda_{Na}(m, 25) + \lambda_{Cl}(m, 25)}

    Lambda_25: the NaCl fit at 25 °C (:func:`nacl_molal_conductivity_25c`,
    published NaCl data); the ratio: the temperature dependence of the
    McCleskey et al. (2012) ion model (:func:`ionic_molal_conductivity`),
    which is exactly 1 at 25 °C. Assumption: the ion model's relative error
    for NaCl found at 25 °C holds at other temperatures (the tests check
    20 °C against the CRC Handbook table, values from memory, within 2 %).

    Parameters
    ----------
    molality : array_like
        NaCl molality, mol/kg; valid 0-0.7.
    temp_c : array_like, default 25
        Temperature, °C; valid 0-95.

    Returns
    -------
    numpy.ndarray
        EC, dS/m; NaN outside the ranges.

    References
    ----------
    Chambers, Stokes & Stokes (1956) and the classical data at 25 °C (see
    :data:`NACL_CONDUCTIVITY_25C`); McCleskey et al. (2012), GCA 77, 369 for
    the temperature ratio.

    Examples
    --------
    Chambers, Stokes & Stokes (1956), Table II: 4.63 S/m = 46.3 dS/m for
    0.5 mol/kg NaCl at 25 °C (checked in tests/test_osmotic.py):

    >>> round(float(nacl_ec_from_molality(0.5, 25.0)), 1)
    46.3
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
