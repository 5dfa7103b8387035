"""EC -> NaCl molality: the inverse of the NaCl conductivity model."""
from __future__ import annotations

import numpy as np

from ._base import _arr, _in
from .conductivity import (MCCLESKEY_MAX_IONIC_STRENGTH, MCCLESKEY_VALID_TEMP_C,
                           NACL_CONDUCTIVITY_25C, nacl_ec_from_molality)

_BISECTION_STEPS = 56  # 0.7 / 2**56 ~ 1e-17 mol/kg


def nacl_molality_from_ec25(ec25, temp_c=25.0) -> np.ndarray:
    """NaCl molality whose EC equals the given EC.

    Inverts :func:`nacl_ec_from_molality` by vectorized bisection on
    0-0.7 mol/kg (the model is checked to be strictly increasing there at
    import time); at 25 °C a grid and two Newton steps give the same answer
    faster. The model is molal, so no molarity/molality conversion (and no
    solution density) enters here; :func:`nacl_molarity_from_molality` exists
    for comparing with tables given per litre.

    Parameters
    ----------
    ec25 : array_like
        EC, dS/m, at ``temp_c``.
    temp_c : array_like, default 25
        Temperature the EC refers to, °C (25 for a compensated reading, which
        is what the app stores); valid 0-95.

    Returns
    -------
    numpy.ndarray
        Molality, mol/kg; NaN for EC < 0, EC above the 0.7 mol/kg limit
        (about 62 dS/m at 25 °C), or temperature outside 0-95 °C.

    References
    ----------
    The forward model :func:`nacl_ec_from_molality` and its sources.

    Examples
    --------
    Chambers, Stokes & Stokes (1956): 46.3 dS/m is 0.5 mol/kg NaCl at 25 °C:

    >>> round(float(nacl_molality_from_ec25(46.3)), 2)
    0.5
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
