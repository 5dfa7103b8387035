"""Temperature compensation and the KCl standard, checked against published
tables.

Sources named beside each check:
* "ISO 7888" = ISO 7888:1985 / EN 27888:1993, table of f25 for natural
  waters, 0.0-35.9 °C in 0.1 °C steps (read from a reprint of the table,
  an instrument manual appendix: columns ",0" to ",3" for every row, ",4"
  to ",6" for rows 0-9; 35.4-35.9 °C were not in the copy read).
  The code stores the whole degrees and 35.1-35.3 °C; the other tenths
  below are NOT in the code, so they test the interpolation.
* "NIST" = Wu, Koch & Pratt 1991, J. Res. NIST 96:191, 0.01 mol/kg KCl, as
  tabulated in the CRC Handbook ("Standard KCl solutions for calibrating
  conductivity cells").
* "J&B 1933" = Jones & Bradshaw 1933, J. Am. Chem. Soc. 55:1780, 0.01 demal
  KCl at 0, 18 and 25 °C: 773.64, 1220.52, 1408.77 µS/cm (from memory);
  independent measurements of nearly the same solution.
* "IAPWS 2008 viscosity" via the iapws package (test-only oracle).
"""
import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from fieldapp.science import InputError
from fieldapp.science import temperature as tc

# ISO 7888: f25 at T + 0.1, + 0.2, + 0.3 °C for T = 0..35 (not stored in code)
ISO7888_TENTHS_1_TO_3 = {
    0: (1.912, 1.906, 1.899), 1: (1.851, 1.845, 1.840), 2: (1.794, 1.788, 1.783),
    3: (1.740, 1.734, 1.729), 4: (1.688, 1.683, 1.678), 5: (1.638, 1.634, 1.629),
    6: (1.591, 1.587, 1.582), 7: (1.547, 1.542, 1.538), 8: (1.504, 1.500, 1.496),
    9: (1.463, 1.459, 1.455), 10: (1.424, 1.420, 1.416), 11: (1.387, 1.383, 1.379),
    12: (1.351, 1.347, 1.344), 13: (1.317, 1.313, 1.310), 14: (1.284, 1.281, 1.278),
    15: (1.253, 1.249, 1.246), 16: (1.222, 1.219, 1.216), 17: (1.193, 1.191, 1.188),
    18: (1.166, 1.163, 1.160), 19: (1.139, 1.136, 1.134), 20: (1.113, 1.111, 1.108),
    21: (1.088, 1.086, 1.083), 22: (1.064, 1.062, 1.060), 23: (1.041, 1.039, 1.037),
    24: (1.019, 1.017, 1.015), 25: (0.998, 0.996, 0.994), 26: (0.977, 0.975, 0.973),
    27: (0.957, 0.955, 0.953), 28: (0.938, 0.936, 0.934), 29: (0.920, 0.918, 0.916),
    30: (0.902, 0.900, 0.898), 31: (0.884, 0.883, 0.881), 32: (0.867, 0.866, 0.864),
    33: (0.851, 0.850, 0.848), 34: (0.835, 0.834, 0.832),
}
# ISO 7888: f25 at 35.1, 35.2, 35.3 °C (same reprint; stored in the code, as
# the end of the table)
ISO7888_35_TENTHS = ((35.1, 0.820), (35.2, 0.819), (35.3, 0.817))
# ISO 7888: f25 at T + 0.4, + 0.5, + 0.6 °C for T = 0..8
ISO7888_TENTHS_4_TO_6 = {
    0: (1.893, 1.887, 1.881), 1: (1.834, 1.829, 1.822), 2: (1.777, 1.772, 1.766),
    3: (1.724, 1.719, 1.713), 4: (1.673, 1.668, 1.663), 5: (1.624, 1.619, 1.615),
    6: (1.578, 1.573, 1.569), 7: (1.534, 1.529, 1.525), 8: (1.491, 1.487, 1.483),
}


def _tenths(table, first):
    for whole, vals in table.items():
        for k, v in enumerate(vals):
            yield round(whole + (first + k) / 10, 1), v


# --- ISO 7888 -----------------------------------------------------------------

@pytest.mark.parametrize("temp_c,f25", [
    (0, 1.918), (5, 1.643), (10, 1.428), (15, 1.256), (20, 1.116),
    (25, 1.000), (30, 0.903), (35, 0.822),
])
def test_iso7888_f25_whole_degrees(temp_c, f25):
    # ISO 7888 table, whole-degree column
    assert tc.iso7888_f25(temp_c) == pytest.approx(f25, abs=5e-4)


@pytest.mark.parametrize("temp_c,f25", list(_tenths(ISO7888_TENTHS_1_TO_3, 1))
                         + list(_tenths(ISO7888_TENTHS_4_TO_6, 4)))
def test_iso7888_f25_tenth_degrees_by_interpolation(temp_c, f25):
    # ISO 7888 table, 0.1 °C columns; 0.001 is the table's rounding step
    assert tc.iso7888_f25(temp_c) == pytest.approx(f25, abs=1.1e-3)


def test_iso7888_table_is_near_two_percent_per_degree():
    # common practice: natural waters change about 1.9-2.2 %/°C referred to
    # 25 °C. The equivalent linear α of every table row must fall there;
    # a mistyped row would not.
    t = tc.ISO7888_T_C[tc.ISO7888_T_C != 25]
    alpha = (1.0 / tc.iso7888_f25(t) - 1.0) / (t - 25.0)
    assert np.all((alpha > 0.019) & (alpha < 0.022))


def test_iso7888_roughly_follows_water_viscosity():
    # IAPWS 2008 viscosity via iapws: Walden's rule (EC × viscosity ≈ const)
    # makes f25 ≈ η(T)/η(25). The rule is approximate for real ions
    # (from memory), hence the 6 % tolerance; it still checks the direction
    # and size of the table independently.
    iapws = pytest.importorskip("iapws")
    eta25 = iapws.IAPWS95(T=298.15, P=0.101325).mu
    for t in (0.5, 10.0, 20.0, 30.0, 35.0):
        ratio = iapws.IAPWS95(T=273.15 + t, P=0.101325).mu / eta25
        assert tc.iso7888_f25(t) == pytest.approx(ratio, rel=0.06)


@pytest.mark.parametrize("temp_c,f25", ISO7888_35_TENTHS)
def test_iso7888_f25_rows_35_1_to_35_3(temp_c, f25):
    # ISO 7888 (reprint, see top): the table's last rows that were read
    assert float(tc.iso7888_f25(temp_c)) == pytest.approx(f25, abs=1e-12)
    assert tc.ISO7888_RANGE_C == (0.0, 35.3)


@pytest.mark.parametrize("temp_c", [-0.1, 35.31, 40.0, -5.0, float("nan")])
def test_iso7888_f25_nan_outside_table(temp_c):
    assert math.isnan(tc.iso7888_f25(temp_c))


def test_iso7888_to_25_applies_factor():
    # ISO 7888: EC25 = f25(T) × EC_T; at 10 °C f25 = 1.428
    assert tc.iso7888_to_25(700.0, 10.0) == pytest.approx(700.0 * 1.428, rel=1e-6)


# --- linear -------------------------------------------------------------------

@pytest.mark.parametrize("ec,temp_c,alpha,expected", [
    (1.0, 15.0, 0.02, 1.0 / 0.8),      # 1 / (1 + 0.02 × (15 − 25))
    (1.0, 30.0, 0.02, 1.0 / 1.1),      # 1 / (1 + 0.02 × 5)
    (2.0, 25.0, 0.02, 2.0),            # reference temperature
    (1.5, 10.0, 0.0191, 1.5 / (1 - 0.0191 * 15)),
])
def test_linear_to_25_is_the_standard_definition(ec, temp_c, alpha, expected):
    # ISO 7888 / APHA Standard Methods 2510: EC25 = EC_T / (1 + α (T − 25))
    assert tc.linear_to_25(ec, temp_c, alpha) == pytest.approx(expected, rel=1e-12)


def test_linear_nan_when_denominator_not_positive():
    assert math.isnan(tc.linear_to_25(1.0, -30.0, 0.05))


def test_linear_with_alpha_zero_is_no_compensation():
    np.testing.assert_array_equal(tc.linear_to_25([1.0, 2.0], [5.0, 40.0], 0.0), [1.0, 2.0])


# --- to_25 --------------------------------------------------------------------

def test_to_25_compensated_readings_pass_through():
    ec = np.array([0.5, 1.2, 3.3])
    np.testing.assert_array_equal(tc.to_25(ec, [5.0, 18.0, 33.0], True), ec)
    np.testing.assert_array_equal(tc.to_25(ec, [5.0, 18.0, 33.0], True, method="linear"), ec)


def test_to_25_unknown_temperature_passes_through():
    out = tc.to_25([1.0, 1.0], [float("nan"), None], False)
    np.testing.assert_array_equal(out, [1.0, 1.0])


def test_to_25_mixed_boolean_array():
    ec = np.array([1.0, 1.0, 1.0, 1.0])
    t = np.array([10.0, 10.0, 20.0, 40.0])
    comp = np.array([False, True, False, False])
    out = tc.to_25(ec, t, comp)
    assert out[0] == pytest.approx(1.428, abs=5e-4)   # ISO 7888 f25(10)
    assert out[1] == 1.0                               # meter compensated
    assert out[2] == pytest.approx(1.116, abs=5e-4)   # ISO 7888 f25(20)
    # beyond the table: ISO 7888's f25(35.3) = 0.817 carried on by the linear
    # model (ISO 7888 / APHA 2510 B), 2 %/°C from 35.3 to 40 °C
    assert out[3] == pytest.approx(0.817 * (1 + 0.02 * 10.3) / 1.3)
    labels = tc.applied_method(t, comp)
    assert list(labels) == ["iso7888", "meter", "iso7888", "iso7888_linear_beyond_table"]


def test_to_25_linear_method():
    out = tc.to_25([1.0, 1.0], [15.0, 30.0], False, method="linear", alpha_per_c=0.02)
    np.testing.assert_allclose(out, [1 / 0.8, 1 / 1.1])  # ISO 7888 linear definition
    assert list(tc.applied_method([15.0, float("nan")], [False, False], "linear")) == [
        "linear", "assumed_25"]


def test_to_25_rejects_unknown_method_and_bad_alpha():
    with pytest.raises(InputError) as exc:
        tc.to_25(1.0, 20.0, False, method="cubic")
    assert exc.value.field == "method" and "iso7888" in exc.value.message
    for bad in (-0.01, 0.5, float("nan"), "two"):
        with pytest.raises(InputError) as exc:
            tc.to_25(1.0, 20.0, False, method="linear", alpha_per_c=bad)
        assert exc.value.field == "alpha_per_c"


def test_compensation_methods_named():
    assert set(tc.COMPENSATION_METHODS) == {"iso7888", "linear"}
    assert all(isinstance(v, str) and v for v in tc.COMPENSATION_METHODS.values())


# --- check_temp_c -------------------------------------------------------------

@pytest.mark.parametrize("ok", [-5, 0, 21.5, "18.2", 60])
def test_check_temp_c_accepts_field_temperatures(ok):
    assert tc.check_temp_c(ok) == pytest.approx(float(ok))


@pytest.mark.parametrize("bad", [-5.1, 60.5, 100, float("nan"), "warm", None])
def test_check_temp_c_refuses_with_instruction(bad):
    with pytest.raises(InputError) as exc:
        tc.check_temp_c(bad)
    assert exc.value.field == "temp_c"
    assert "between −5 and 60 °C" in exc.value.message and "type" in exc.value.message


# --- KCl 0.01 mol/L standard --------------------------------------------------

def test_kcl_standard_at_25_is_1413():
    # common practice: the 0.01 mol/L KCl standard is labelled 1413 µS/cm at 25 °C
    assert tc.kcl_001_uS_cm(25.0) == pytest.approx(1413.0)


@pytest.mark.parametrize("temp_c,kappa", [
    (0, 772.92), (5, 890.96), (10, 1013.95), (15, 1141.45), (18, 1219.93),
    (20, 1273.03), (25, 1408.23), (30, 1546.63), (35, 1687.79), (50, 2123.43),
])
def test_kcl_molal_matches_nist_table(temp_c, kappa):
    # NIST (Wu, Koch & Pratt 1991), 0.01 mol/kg KCl, µS/cm
    assert tc.kcl_001_molal_uS_cm(temp_c) == pytest.approx(kappa, abs=0.005)


@pytest.mark.parametrize("temp_c,ratio", [(0, 773.64 / 1408.77), (18, 1220.52 / 1408.77)])
def test_kcl_temperature_ratio_matches_independent_measurements(temp_c, ratio):
    # J&B 1933 (from memory): κ(T)/κ(25) of 0.01 demal KCl, an independent
    # measurement of nearly the same solution; agreement within 0.1 %
    assert tc.kcl_001_uS_cm(temp_c) / 1413.0 == pytest.approx(ratio, rel=1e-3)


@pytest.mark.parametrize("temp_c,kappa", [
    (0, 776), (5, 896), (10, 1020), (15, 1147), (20, 1278), (30, 1552),
])
def test_kcl_standard_matches_values_printed_for_1413_standards(temp_c, kappa):
    # common practice: temperature tables printed with 1413 µS/cm standards
    # (whole µS/cm; suppliers' tables differ among themselves by ~0.3 %)
    assert tc.kcl_001_uS_cm(temp_c) == pytest.approx(kappa, rel=5e-3)


@pytest.mark.parametrize("temp_c", [-1.0, 50.5, float("nan")])
def test_kcl_nan_outside_table(temp_c):
    assert math.isnan(tc.kcl_001_uS_cm(temp_c))


# --- vectorization ------------------------------------------------------------

def test_vectorized_1e5_matches_scalar_calls():
    rng = np.random.default_rng(11)
    n = 100_000
    ec = rng.uniform(0.05, 20.0, n)
    t = rng.uniform(-5.0, 45.0, n)
    t[rng.random(n) < 0.02] = np.nan
    comp = rng.random(n) < 0.3
    for method in ("iso7888", "linear"):
        out = tc.to_25(ec, t, comp, method=method, alpha_per_c=0.019)
        assert out.shape == (n,) and out.dtype == np.float64
        assert np.all(np.isfinite(out))
        idx = rng.choice(n, 400, replace=False)
        expect = [float(tc.to_25(float(ec[i]), float(t[i]), bool(comp[i]),
                                 method=method, alpha_per_c=0.019)) for i in idx]
        np.testing.assert_array_equal(out[idx], expect)
    f = tc.iso7888_f25(t)
    idx = rng.choice(n, 400, replace=False)
    np.testing.assert_array_equal(f[idx], [float(tc.iso7888_f25(float(t[i]))) for i in idx])
    k = tc.kcl_001_uS_cm(t)
    np.testing.assert_array_equal(k[idx], [float(tc.kcl_001_uS_cm(float(t[i]))) for i in idx])


def test_scalar_in_gives_0d_array():
    for out in (tc.to_25(1.0, 20.0, False), tc.iso7888_to_25(1.0, 20.0),
                tc.kcl_001_uS_cm(20.0), tc.linear_to_25(1.0, 20.0)):
        assert isinstance(out, np.ndarray) and out.ndim == 0


@settings(max_examples=200, deadline=None)
@given(t1=st.floats(0, 35), t2=st.floats(0, 35))
def test_iso7888_f25_decreases_with_temperature(t1, t2):
    # ISO 7888: EC rises with temperature, so f25 falls (table is monotone)
    if t1 < t2:
        assert tc.iso7888_f25(t1) >= tc.iso7888_f25(t2)


# --- beyond the stored ISO 7888 table -------------------------------------------

def test_ec25_monotone_and_continuous_across_34_to_37_c():
    # 1 dS/m read at 34-37 °C: EC25 must fall steadily with temperature and
    # join the ISO 7888 table (f25(35.3) = 0.817, ISO 7888:1985) without a
    # jump. The old rule gave 0.822 at 35.0 °C and 0.826 at 35.5 °C.
    t = np.arange(34.0, 37.0001, 0.05)
    ec25 = tc.to_25(np.ones_like(t), t, False)
    assert np.all(np.diff(ec25) < 0)
    assert float(tc.to_25(1.0, 35.0, False)) == pytest.approx(0.822, abs=1e-12)
    assert float(tc.to_25(1.0, 35.3, False)) == pytest.approx(0.817, abs=1e-12)
    step = float(tc.to_25(1.0, 35.3001, False)) - 0.817
    assert -1e-5 < step < 0
    assert float(tc.to_25(1.0, 35.5, False)) < 0.817


def test_ec25_monotone_from_0_to_50_c_and_below_zero():
    # continuous and monotone over the whole accepted range, the ISO 7888
    # table values untouched inside it (f25(0) = 1.918, f25(25) = 1.000)
    t = np.linspace(-5.0, 60.0, 1301)
    f = tc.iso7888_f25_extended(t)
    assert np.all(np.isfinite(f)) and np.all(np.diff(f) < 0)
    assert float(tc.iso7888_f25_extended(0.0)) == pytest.approx(1.918)
    assert float(tc.iso7888_f25_extended(25.0)) == pytest.approx(1.000)
    # below the table the same anchored linear step: 1.918 x 0.5 / 0.4 at -5 °C
    assert float(tc.iso7888_f25_extended(-5.0)) == pytest.approx(1.918 * 0.5 / 0.4)
    assert list(tc.applied_method([-1.0, 0.0, 35.0, 35.3, 35.4], False)) == [
        "iso7888_linear_beyond_table", "iso7888", "iso7888", "iso7888",
        "iso7888_linear_beyond_table"]


def test_extension_uses_the_readings_alpha():
    # a user-set coefficient changes only the part beyond the table
    assert float(tc.to_25(1.0, 40.0, False, alpha_per_c=0.0187)) == pytest.approx(
        0.817 * (1 + 0.0187 * 10.3) / (1 + 0.0187 * 15))
    assert float(tc.to_25(1.0, 30.0, False, alpha_per_c=0.0187)) == pytest.approx(0.903)
