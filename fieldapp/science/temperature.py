"""Compensation of EC readings to 25 °C, and the calibration standard's EC
versus temperature.

Why: EC rises about 2 % per °C, so a reading means nothing for a crop until
it is referred to 25 °C, the reference temperature of salinity tables
(USDA Handbook 60, Richards 1954). Many meters compensate themselves; for
those that do not, the app applies one of two published models:

* ``iso7888`` - the non-linear factor f25 for natural waters tabulated in
  ISO 7888:1985 (EN 27888:1993). Suited to ground, surface and irrigation
  water and to dilute soil extracts. The standard tabulates 0.0-35.9 °C in
  0.1 °C steps; the whole-degree values 0-35 °C and the rows 35.1-35.3 °C
  were read and are stored here (interpolated linearly between them; the
  reprint read does not show 35.4-35.9 °C). Beyond the stored table the
  factor is continued by the linear model anchored at the table's end
  (see :func:`iso7888_f25_extended`), so the result stays continuous and
  monotone from -5 to 60 °C; the result names that method
  (``iso7888_linear_beyond_table``).
* ``linear`` - EC25 = EC_T / (1 + α (T − 25)), the constant-coefficient
  model described in ISO 7888 and APHA Standard Methods 2510; α about
  0.019 to 0.021 per °C for natural waters (common practice; the default
  0.02 is the usual meter default). Hayashi (2004, Environ. Monit. Assess.
  96:119-128) found 0.0175 to 0.0198 per °C for natural waters of very
  different salinity.

USDA Handbook 60 itself gives a table of temperature factors; the ISO table
is used here because it is the current standard for natural waters.
"""
from __future__ import annotations

import numpy as np

from fieldapp.science import InputError

# ---------------------------------------------------------------------------
# ISO 7888:1985 non-linear correction for natural waters
# ---------------------------------------------------------------------------
#: Temperatures (°C) of the rows of :data:`ISO7888_F25`: whole degrees
#: 0..35, then the read tenth-degree rows 35.1, 35.2, 35.3.
ISO7888_T_C = np.concatenate([np.arange(0.0, 36.0, 1.0), [35.1, 35.2, 35.3]])
#: f25(T) for natural water, EC25 = f25(T) × EC_T, at :data:`ISO7888_T_C`.
#: Source: ISO 7888:1985 (EN 27888:1993), table of f25 for natural waters
#: (0.0 to 35.9 °C in 0.1 °C steps), read from a reprint of that table in an
#: instrument manual appendix (its columns ",0" to ",3" for every row; the
#: columns ",4" to ",9" of the rows above 9 °C were not in the copy read, so
#: 35.4-35.9 °C are not stored). The whole-degree column and the 35.1-35.3
#: row are stored; the other tenths check the interpolation in the tests.
ISO7888_F25 = np.array([
    1.918, 1.857, 1.800, 1.745, 1.693, 1.643, 1.596, 1.551, 1.508, 1.467,  # 0-9
    1.428, 1.390, 1.354, 1.320, 1.287, 1.256, 1.225, 1.196, 1.168, 1.141,  # 10-19
    1.116, 1.091, 1.067, 1.044, 1.021, 1.000, 0.979, 0.959, 0.940, 0.921,  # 20-29
    0.903, 0.886, 0.869, 0.853, 0.837, 0.822,                              # 30-35
    0.820, 0.819, 0.817,                                                   # 35.1-35.3
])
#: Range (°C) over which :func:`iso7888_f25` returns a value.
ISO7888_RANGE_C = (float(ISO7888_T_C[0]), float(ISO7888_T_C[-1]))

#: Default linear coefficient per °C (common practice).
DEFAULT_ALPHA_PER_C = 0.02
#: Accepted range for a user-set linear coefficient (per °C). Natural waters
#: 0.0175-0.0198 (Hayashi 2004); salts and acids 0.01-0.03 (common
#: practice); 0 means "no compensation".
ALPHA_RANGE_PER_C = (0.0, 0.1)

#: Accepted sample temperatures for one typed reading (°C).
TEMP_RANGE_C = (-5.0, 60.0)

COMPENSATION_METHODS: dict[str, str] = {
    "iso7888": "Non-linear natural-water factor of ISO 7888 (table 0-35.3 °C); beyond the "
               "table, the linear model continued from the table's end value.",
    "linear": "Linear: EC25 = EC / (1 + α (T − 25)), α set per reading "
              "(default 0.02 per °C).",
}

# ---------------------------------------------------------------------------
# 0.01 mol/L KCl calibration standard
# ---------------------------------------------------------------------------
#: Temperatures (°C) of :data:`KCL_001_MOLAL_uS_cm`.
KCL_T_C = np.array([0.0, 5.0, 10.0, 15.0, 18.0, 20.0, 25.0, 30.0, 35.0,
                    40.0, 45.0, 50.0])
#: EC (µS/cm) of 0.01 mol/kg KCl, CO2 contribution removed. Source: Wu, Koch
#: & Pratt 1991, J. Res. NIST 96:191 (primary standard measurements), as
#: tabulated in the CRC Handbook of Chemistry and Physics, "Standard KCl
#: solutions for calibrating conductivity cells".
KCL_001_MOLAL_uS_cm = np.array([
    772.92, 890.96, 1013.95, 1141.45, 1219.93, 1273.03, 1408.23,
    1546.63, 1687.79, 1831.27, 1976.62, 2123.43,
])
#: Nominal EC of the 0.01 mol/L KCl standard at 25 °C, µS/cm: the value
#: printed on such standards (common practice).
KCL_001_AT_25_uS_cm = 1413.0


def _arr(x, field: str) -> np.ndarray:
    try:
        return np.asarray(x, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(
            f"{x!r} is not a number; type a number such as 21.5.", field
        ) from None


def check_temp_c(temp_c) -> float:
    """Validate one typed sample temperature (°C) and return it as float.

    Raises InputError(field="temp_c") unless −5 ≤ T ≤ 60 °C: colder is ice,
    hotter is not a field sample. Used by the command line and the API for a
    single reading; the array functions below never raise for a doubtful
    temperature.
    """
    msg = "Temperature must be between −5 and 60 °C; type the sample temperature in °C."
    try:
        t = float(temp_c)
    except (TypeError, ValueError):
        raise InputError(msg, "temp_c") from None
    lo, hi = TEMP_RANGE_C
    if not (lo <= t <= hi):  # also catches NaN
        raise InputError(msg, "temp_c")
    return t


def linear_to_25(ec, temp_c, alpha_per_c=DEFAULT_ALPHA_PER_C) -> np.ndarray:
    """Linear temperature compensation to 25 °C.

    Equation: EC25 = EC_T / (1 + α (T − 25))

    Parameters
    ----------
    ec : array-like, any EC unit (the result is in the same unit)
    temp_c : array-like, sample temperature in °C
    alpha_per_c : float or array-like, coefficient per °C, default 0.02
        (common practice; 0.019-0.021 for natural waters)

    Returns
    -------
    np.ndarray float64. NaN where 1 + α (T − 25) ≤ 0 (no physical meaning).

    Source: ISO 7888:1985 (linear temperature coefficient); APHA Standard
    Methods 2510 B.
    """
    ec = _arr(ec, "value")
    t = _arr(temp_c, "temp_c")
    a = _arr(alpha_per_c, "alpha_per_c")
    denom = 1.0 + a * (t - 25.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(denom > 0, ec / np.where(denom > 0, denom, 1.0), np.nan)


def iso7888_f25(temp_c) -> np.ndarray:
    """ISO 7888 non-linear temperature factor f25 for natural waters.

    Equation: EC25 = f25(T) × EC_T, f25 interpolated linearly in
    :data:`ISO7888_F25` (whole degrees and 35.1-35.3 °C; the standard's
    other 0.1 °C values are reproduced within 0.001, the table's own
    rounding).

    Parameters
    ----------
    temp_c : array-like, °C

    Returns
    -------
    np.ndarray float64; NaN outside 0-35.3 °C or for NaN input (the caller
    flags those).

    Source: ISO 7888:1985 / EN 27888:1993, "Water quality - Determination of
    electrical conductivity", table of f25 for natural waters. Valid for
    natural waters (ground, surface, drinking water); not for brines or
    concentrated fertiliser solutions.
    """
    t = _arr(temp_c, "temp_c")
    lo, hi = ISO7888_RANGE_C
    f = np.interp(t, ISO7888_T_C, ISO7888_F25)
    inside = (t >= lo) & (t <= hi)  # False for NaN
    return np.where(inside, f, np.nan)


def iso7888_f25_extended(temp_c, alpha_per_c=DEFAULT_ALPHA_PER_C) -> np.ndarray:
    r"""ISO 7888 f25 inside the stored table, continued beyond it by the linear model.

    Equation, with T_end the nearer end of the stored table (0 or 35.3 °C):

    .. math:: f_{25}(T) = f_{25}(T_{end})\,
              \frac{1 + \alpha (T_{end} - 25)}{1 + \alpha (T - 25)}

    i.e. the linear temperature model of ISO 7888 / APHA Standard Methods
    2510 B (EC25 = EC_T / (1 + α (T − 25))) applied to the step from the
    table's end to T, so the factor is continuous at the end of the table
    and falls monotonically with T for any α > 0 (the old rule, linear from
    25 °C, jumped the wrong way at 35 °C: 0.822 at 35.0 °C, 0.826 at 35.5).

    Parameters
    ----------
    temp_c : array-like, °C
    alpha_per_c : float or array-like, per °C (default 0.02, common practice)

    Returns
    -------
    np.ndarray float64; NaN for NaN input or where 1 + α (T − 25) ≤ 0.

    Examples
    --------
    >>> float(iso7888_f25_extended(35.0))
    0.822
    >>> float(iso7888_f25_extended(35.3))
    0.817
    >>> round(float(iso7888_f25_extended(36.0)), 4)
    0.8076
    """
    t = _arr(temp_c, "temp_c")
    a = _arr(alpha_per_c, "alpha_per_c")
    lo, hi = ISO7888_RANGE_C
    inside = iso7888_f25(t)
    end = np.where(t < lo, lo, hi)
    f_end = np.where(t < lo, ISO7888_F25[0], ISO7888_F25[-1])
    denom = 1.0 + a * (t - 25.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        beyond = np.where(denom > 0, f_end * (1.0 + a * (end - 25.0))
                          / np.where(denom > 0, denom, 1.0), np.nan)
    return np.where(np.isnan(inside), beyond, inside)


def iso7888_to_25(ec, temp_c) -> np.ndarray:
    """EC25 = f25(T) × EC_T with the ISO 7888 natural-water factor.

    Same unit in and out; NaN outside 0-35.3 °C (see :func:`iso7888_f25`).
    Source: ISO 7888:1985 / EN 27888:1993.
    """
    return np.asarray(_arr(ec, "value") * iso7888_f25(temp_c))


def _broadcast_inputs(ec, temp_c, compensated):
    ec = _arr(ec, "value")
    t = _arr(temp_c, "temp_c")
    try:
        comp = np.asarray(compensated, dtype=bool)
    except (TypeError, ValueError):
        raise InputError("Say whether the meter compensates: true or false.",
                         "compensated") from None
    return np.broadcast_arrays(ec, t, comp)


def _check_method(method: str, alpha_per_c):
    if method not in COMPENSATION_METHODS:
        raise InputError(
            f"Unknown compensation method {method!r}; choose one of "
            f"{', '.join(COMPENSATION_METHODS)}.",
            "method",
        )
    a = _arr(alpha_per_c, "alpha_per_c")
    lo, hi = ALPHA_RANGE_PER_C
    if not np.all(np.isfinite(a)) or np.any(a < lo) or np.any(a > hi):
        raise InputError(
            f"The temperature coefficient must be between {lo} and {hi} per °C "
            "(2 %/°C is typed 0.02).",
            "alpha_per_c",
        )
    return a


def to_25(ec, temp_c, compensated, method="iso7888",
          alpha_per_c=DEFAULT_ALPHA_PER_C) -> np.ndarray:
    """Refer readings to 25 °C, vectorized over readings.

    Rules, element by element:

    * ``compensated`` true (the meter already shows EC at 25 °C): unchanged.
    * temperature unknown (NaN) and not compensated: unchanged, i.e. the
      sample is assumed to be at 25 °C; the caller flags it.
    * ``method="iso7888"``: EC25 = f25(T) × EC_T (ISO 7888:1985) within
      the stored table (0-35.3 °C); beyond it the linear model with
      ``alpha_per_c`` continued from the table's end value
      (:func:`iso7888_f25_extended`; :func:`applied_method` names it).
    * ``method="linear"``: EC25 = EC_T / (1 + α (T − 25)) (ISO 7888;
      APHA Standard Methods 2510).

    Parameters
    ----------
    ec : array-like, any EC unit (result in the same unit)
    temp_c : array-like, °C (NaN or None = unknown)
    compensated : bool or array-like of bool
    method : "iso7888" or "linear"
    alpha_per_c : float or array-like, per °C, 0 to 0.1

    Returns
    -------
    np.ndarray float64, broadcast shape of the inputs.
    """
    a = _check_method(method, alpha_per_c)
    ec, t, comp = _broadcast_inputs(ec, temp_c, compensated)
    if method == "iso7888":
        out = ec * iso7888_f25_extended(t, a)
    else:
        out = linear_to_25(ec, t, a)
    passthrough = comp | np.isnan(t)
    return np.where(passthrough, ec, out).astype(np.float64)


def applied_method(temp_c, compensated, method="iso7888") -> np.ndarray:
    """Which rule :func:`to_25` applied to each reading, for the log.

    Returns an array of strings: "meter" (compensated by the meter),
    "assumed_25" (temperature unknown, value passed through), "iso7888",
    "linear", or "iso7888_linear_beyond_table" (ISO method asked for a
    temperature beyond the stored table, 0-35.3 °C: the linear model
    continued from the table's end value, :func:`iso7888_f25_extended`).
    Labels and sources: ``fieldapp/data/method_labels.csv``.
    """
    _check_method(method, DEFAULT_ALPHA_PER_C)
    _, t, comp = _broadcast_inputs(0.0, temp_c, compensated)
    lo, hi = ISO7888_RANGE_C
    if method == "iso7888":             # a code per reading, then its label
        code = 2 + ~((t >= lo) & (t <= hi))
    else:
        code = np.full(t.shape, 4, dtype=np.int8)
    code = np.where(comp, 0, np.where(np.isnan(t), 1, code))
    return np.asarray(_APPLIED_LABELS[code], dtype=_APPLIED_LABELS.dtype)   # 0-d stays an array


#: The labels :func:`applied_method` gives, by its codes.
_APPLIED_LABELS = np.array(["meter", "assumed_25", "iso7888", "iso7888_linear_beyond_table",
                            "linear"], dtype="<U27")


def kcl_001_molal_uS_cm(temp_c) -> np.ndarray:
    """EC (µS/cm) of 0.01 mol/kg KCl versus temperature, 0-50 °C.

    Linear interpolation in :data:`KCL_001_MOLAL_uS_cm` (Wu, Koch & Pratt
    1991, J. Res. NIST 96:191; CRC Handbook table of standard KCl
    solutions). NaN outside 0-50 °C.
    """
    t = _arr(temp_c, "temp_c")
    v = np.interp(t, KCL_T_C, KCL_001_MOLAL_uS_cm)
    return np.where((t >= KCL_T_C[0]) & (t <= KCL_T_C[-1]), v, np.nan)


def kcl_001_uS_cm(temp_c) -> np.ndarray:
    """EC (µS/cm) of the 0.01 mol/L KCl calibration standard (1413 µS/cm at
    25 °C) at temperature T, 0-50 °C; NaN outside.

    Equation: κ(T) = 1413 × κ_m(T) / κ_m(25 °C), κ_m = the NIST 0.01 mol/kg
    curve (:func:`kcl_001_molal_uS_cm`).

    Why the ratio: a bottle of standard keeps its composition when it warms
    or cools, so its EC follows the temperature curve of the primary
    0.01 mol/kg standard; the two solutions differ in strength by only about
    0.3 %, which changes the temperature ratio by far less than the meter's
    resolution. Use it to check a meter calibrated with an uncompensated
    reading of the standard. Handle standards with gloves and eye
    protection as the label and safety data sheet say.
    """
    m = kcl_001_molal_uS_cm(temp_c)
    return np.asarray(KCL_001_AT_25_uS_cm * m / KCL_001_MOLAL_uS_cm[KCL_T_C == 25.0][0])
