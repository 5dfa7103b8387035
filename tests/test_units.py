"""Unit parsing and conversion, checked against the SI definitions.

Sources named beside each check:
* "SI" = BIPM, The International System of Units (SI Brochure), 9th ed.
  2019: prefix values (d = 1e-1, m = 1e-3, µ = 1e-6, c = 1e-2) and the
  siemens as the reciprocal ohm.
* "mho = S": the mho is the reciprocal ohm, i.e. the siemens (NIST SP 811,
  from memory).
* "HB60" = Richards (ed.) 1954, USDA Agriculture Handbook 60, ch. 2:
  TDS ≈ 640 mg/L and total cations ≈ 10 meq/L per dS/m, 0.1-5 dS/m.
"""
import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from fieldapp.science import InputError
from fieldapp.science import units as u

# Value of ONE unit in dS/m, worked out by hand from the SI prefixes:
# 1 S/m = 10 dS/m; 1 S/cm = 100 S/m = 1000 dS/m; 1 mS/cm = 1e-3 S/cm = 1 dS/m;
# 1 µS/cm = 1e-6 S/cm = 1e-3 dS/m; 1 mS/m = 1e-3 S/m = 1e-2 dS/m.   # SI
ONE_UNIT_IN_dS_m = {
    "S/m": 10.0, "s/m": 10.0, "S / m": 10.0, "siemens/m": 10.0,       # SI
    "dS/m": 1.0, "ds/m": 1.0, "dS / m": 1.0, "dS m-1": 1.0,           # SI
    "dS·m⁻¹": 1.0, "dS m^-1": 1.0, "deciSiemens/m": 1.0,              # SI
    "mS/m": 0.01, "ms/m": 0.01,                                       # SI
    "mS/cm": 1.0, "ms/cm": 1.0, "MS/CM": 1.0, "mS cm-1": 1.0,         # SI
    "millisiemens/cm": 1.0,                                           # SI
    "µS/cm": 1e-3, "μS/cm": 1e-3, "uS/cm": 1e-3, "US/CM": 1e-3,       # SI
    " uS/cm ": 1e-3, "µS cm-1": 1e-3, "microsiemens/cm": 1e-3,        # SI
    "S/cm": 1000.0,                                                   # SI
    "mho/cm": 1000.0,                                                 # mho = S
    "mmho/cm": 1.0, "mmhos/cm": 1.0, "MMHOS/CM": 1.0,                 # mho = S
    "millimhos/cm": 1.0,                                              # mho = S
    "µmho/cm": 1e-3, "umhos/cm": 1e-3, "µmhos/cm": 1e-3,              # mho = S
    "μmhos/cm": 1e-3, "micromhos/cm": 1e-3,                           # mho = S
}


@pytest.mark.parametrize("spelling,expected", sorted(ONE_UNIT_IN_dS_m.items()))
def test_every_spelling_converts_by_its_si_definition(spelling, expected):
    # SI / mho = S, values in the table above
    assert u.to_ec_dS_m(2.5, spelling) == pytest.approx(2.5 * expected, rel=1e-12)
    assert u.parse_unit(spelling).kind == "ec"


def test_textbook_equalities_between_units():
    # SI: 1 dS/m = 1 mS/cm = 1000 µS/cm = 1 mmhos/cm = 0.1 S/m = 100 mS/m
    one = u.to_ec_dS_m(1, "dS/m")
    assert u.to_ec_dS_m(1, "mS/cm") == pytest.approx(one)
    assert u.to_ec_dS_m(1000, "µS/cm") == pytest.approx(one)
    assert u.to_ec_dS_m(1, "mmhos/cm") == pytest.approx(one)
    assert u.to_ec_dS_m(0.1, "S/m") == pytest.approx(one)
    assert u.to_ec_dS_m(100, "mS/m") == pytest.approx(one)
    assert u.to_ec_dS_m(1000, "µmhos/cm") == pytest.approx(one)


def test_three_micro_spellings_are_the_same_unit():
    # SI: µ = 1e-6 whatever character is typed (U+00B5, U+03BC, u)
    parsed = [u.parse_unit(s) for s in ("\u00b5S/cm", "\u03bcS/cm", "uS/cm")]
    assert {p.canonical for p in parsed} == {"µS/cm"}
    assert [p.factor_to_dS_m for p in parsed] == pytest.approx([1e-3] * 3)
    assert [p.text for p in parsed] == ["\u00b5S/cm", "\u03bcS/cm", "uS/cm"]


@pytest.mark.parametrize("shorthand,canonical,factor", [
    ("mS", "mS/cm", 1.0), ("uS", "µS/cm", 1e-3), ("µS", "µS/cm", 1e-3),
    ("μS", "µS/cm", 1e-3), ("mmho", "mmhos/cm", 1.0), ("µmho", "µmhos/cm", 1e-3),
])
def test_meter_shorthand_is_per_centimetre_with_a_note(shorthand, canonical, factor):
    # common practice: a display showing only "mS" means mS/cm; factor by SI
    p = u.parse_unit(shorthand)
    assert p.canonical == canonical
    assert p.factor_to_dS_m == pytest.approx(factor)
    assert p.note and canonical in p.note and "centimetre" in p.note


def test_full_spelling_has_no_note():
    assert u.parse_unit("mS/cm").note is None
    assert u.parse_unit("dS/m").note is None


def test_megasiemens_read_as_milli_with_a_note():
    # decision documented in units.py: no meter shows MS/cm
    p = u.parse_unit("MS/cm")
    assert p.canonical == "mS/cm" and p.note and "milli" in p.note


@pytest.mark.parametrize("bad", ["xyz", "dS", "S", "µS/m", "ppb", "mV", "°C", "dS/cm2"])
def test_unknown_unit_error_lists_accepted_spellings(bad):
    with pytest.raises(InputError) as exc:
        u.parse_unit(bad)
    assert exc.value.field == "unit"
    for spelling in ("µS/cm", "mS/cm", "dS/m", "mmhos/cm", "ppm"):
        assert spelling in exc.value.message
    assert repr(bad) in exc.value.message


@pytest.mark.parametrize("bad", ["", "   ", None, 5])
def test_missing_unit_is_refused(bad):
    with pytest.raises(InputError) as exc:
        u.parse_unit(bad)
    assert exc.value.field == "unit"
    assert "µS/cm" in exc.value.message


def test_every_display_and_accepted_spelling_parses():
    for s in u.DISPLAY_UNITS + u.ACCEPTED_SPELLINGS:
        p = u.parse_unit(s)
        assert p.kind in ("ec", "tds")
    # the picker shows each unit in its own display spelling
    assert [u.parse_unit(s).canonical for s in u.DISPLAY_UNITS] == u.DISPLAY_UNITS


# --- TDS ---------------------------------------------------------------------

@pytest.mark.parametrize("factor", [0.5, 0.64, 0.7])
def test_tds_round_trip_through_the_meter_factor(factor):
    # common practice: meter shows TDS = factor × EC(µS/cm); EC = TDS / factor
    ec_uS_cm = np.array([150.0, 1413.0, 4200.0])
    shown_ppm = factor * ec_uS_cm
    back_dS_m = u.to_ec_dS_m(shown_ppm, "ppm", tds_factor=factor)
    np.testing.assert_allclose(back_dS_m, ec_uS_cm / 1000.0, rtol=1e-12)  # SI
    # same reading shown in ppt (parts per thousand = g/L on TDS meters)
    np.testing.assert_allclose(
        u.to_ec_dS_m(shown_ppm / 1000.0, "ppt", tds_factor=factor), back_dS_m, rtol=1e-12)
    np.testing.assert_allclose(
        u.to_ec_dS_m(shown_ppm, "mg/L", tds_factor=factor), back_dS_m, rtol=1e-12)
    np.testing.assert_allclose(
        u.to_ec_dS_m(shown_ppm / 1000.0, "g/L", tds_factor=factor), back_dS_m, rtol=1e-12)


def test_handbook60_factor_agrees_with_handbook60_tds_relation():
    # HB60: 640 mg/L per dS/m. A meter set to 0.64 showing 960 ppm means
    # 1.5 dS/m, and the HB60 estimate of TDS at 1.5 dS/m is 960 mg/L again.
    ec = u.to_ec_dS_m(960.0, "ppm", tds_factor=0.64)
    assert ec == pytest.approx(1.5)
    assert u.tds_mg_L_from_ec(ec) == pytest.approx(960.0)


def test_tds_without_factor_asks_for_it():
    with pytest.raises(InputError) as exc:
        u.to_ec_dS_m(500, "ppm")
    assert exc.value.field == "tds_factor"
    assert "factor" in exc.value.message and "0.5" in exc.value.message


@pytest.mark.parametrize("bad", [0.3, 1.2, 0.0, -0.5, float("nan"), "half", [0.5, 2.0]])
def test_tds_factor_outside_range_is_refused(bad):
    with pytest.raises(InputError) as exc:
        u.to_ec_dS_m([500, 600], "ppm", tds_factor=bad)
    assert exc.value.field == "tds_factor"


def test_tds_factor_ignored_for_ec_units():
    assert u.to_ec_dS_m(1.2, "mS/cm", tds_factor=0.5) == pytest.approx(1.2)


def test_ppt_is_parts_per_thousand_with_note():
    p = u.parse_unit("ppt")
    assert p.kind == "tds" and p.factor_to_mg_L == pytest.approx(1000.0)  # SI: g = 1000 mg
    assert p.note and "thousand" in p.note
    assert u.parse_unit("ppm").factor_to_mg_L == pytest.approx(1.0)
    assert u.parse_unit("mS/cm").factor_to_mg_L is None


def test_handbook60_relations():
    # HB60 (definition of the relation): 640 mg/L and 10 meq/L per dS/m
    ec = np.array([0.1, 1.0, 2.5, 5.0])
    np.testing.assert_allclose(u.tds_mg_L_from_ec(ec), [64.0, 640.0, 1600.0, 3200.0])
    np.testing.assert_allclose(u.cations_meq_L_from_ec(ec), [1.0, 10.0, 25.0, 50.0])
    assert u.TDS_APPROX_VALID_dS_m == (0.1, 5.0)  # HB60 stated range


# --- inverse and unit slips ---------------------------------------------------

@pytest.mark.parametrize("unit", sorted({u.parse_unit(s).canonical for s in ONE_UNIT_IN_dS_m}))
def test_from_dS_m_inverts_to_ec_dS_m(unit):
    values = np.array([0.0, 0.37, 12.5, 980.0])
    np.testing.assert_allclose(u.from_dS_m(u.to_ec_dS_m(values, unit), unit), values,
                               rtol=1e-12)


def test_from_dS_m_by_si_definition():
    # SI: 2 dS/m = 2000 µS/cm = 0.2 S/m = 200 mS/m
    assert u.from_dS_m(2.0, "µS/cm") == pytest.approx(2000.0)
    assert u.from_dS_m(2.0, "S/m") == pytest.approx(0.2)
    assert u.from_dS_m(2.0, "mS/m") == pytest.approx(200.0)


def test_from_dS_m_refuses_tds_units():
    with pytest.raises(InputError) as exc:
        u.from_dS_m(1.0, "ppm")
    assert exc.value.field == "unit"


@pytest.mark.parametrize("unit,smaller,larger", [
    ("µS/cm", None, "mS/cm"), ("mS/cm", "µS/cm", "S/cm"), ("dS/m", "µS/cm", "S/cm"),
    ("S/m", "mS/m", None), ("mS/m", None, "S/m"), ("mmhos/cm", "µmhos/cm", "mho/cm"),
    ("µmhos/cm", None, "mmhos/cm"), ("ppm", None, "ppt"), ("mg/L", None, "g/L"),
    ("ppt", "ppm", None), ("uS", None, "mS/cm"),
])
def test_thousandfold_alternatives(unit, smaller, larger):
    assert u.unit_thousandfold_alternatives(unit) == (smaller, larger)


@pytest.mark.parametrize("unit", u.DISPLAY_UNITS)
def test_thousandfold_alternatives_are_exactly_1000x_apart(unit):
    # SI: the alternative's factor is the unit's factor × 1e-3 or × 1e3
    f = u.parse_unit(unit).factor_to_dS_m
    smaller, larger = u.unit_thousandfold_alternatives(unit)
    assert smaller or larger
    if smaller:
        assert u.parse_unit(smaller).factor_to_dS_m == pytest.approx(f / 1000.0)
    if larger:
        assert u.parse_unit(larger).factor_to_dS_m == pytest.approx(f * 1000.0)


# --- numbers and arrays -------------------------------------------------------

@pytest.mark.parametrize("bad", ["1,2,3", "abc", None, [1, "x"]])
def test_value_that_is_not_a_number_is_refused(bad):
    with pytest.raises(InputError) as exc:
        u.to_ec_dS_m(bad, "dS/m")
    assert exc.value.field == "value"


def test_every_factor_agrees_with_pint():
    """The module's exact factors against pint's SI definitions (pint is a
    test-only reference here; fieldapp no longer loads it at start-up)."""
    pint = pytest.importorskip("pint")
    ureg = pint.UnitRegistry()
    # a TDS meter's ppm and ppt are mg/L and g/L (a litre weighs a kilogram;
    # common practice), not pint's dimensionless ppm
    ureg.define("ppm_tds = milligram / liter")
    ureg.define("ppt_tds = gram / liter")
    spelled = {"ppm": "ppm_tds", "ppt": "ppt_tds"}
    for key, (disp, expr, kind) in u._UNITS.items():
        target = "dS/m" if kind == "ec" else "mg/L"
        want = ureg.Quantity(1.0, spelled.get(key, expr)).to(target).magnitude
        got = u.parse_unit(disp).factor_to_dS_m
        assert got == pytest.approx(want, rel=1e-15), disp
    # 1 µS/cm in dS/m, the step from a TDS meter's µS/cm back to dS/m
    assert u._UM_TO_DS_M == pytest.approx(ureg.Quantity(1, "uS/cm").to("dS/m").magnitude,
                                          rel=1e-15)
    assert ureg.Quantity(3, "mmho/cm").to("dS/m").magnitude == pytest.approx(3.0)   # mho = S


def test_vectorized_1e5_matches_scalar_calls():
    rng = np.random.default_rng(7)
    values = rng.uniform(0, 20000, 100_000)
    for unit in ("µS/cm", "mS/m", "mmhos/cm"):
        out = u.to_ec_dS_m(values, unit)
        assert out.shape == values.shape and out.dtype == np.float64
        idx = rng.choice(values.size, 300, replace=False)
        expect = [float(u.to_ec_dS_m(float(values[i]), unit)) for i in idx]
        np.testing.assert_array_equal(out[idx], expect)
    tds = u.to_ec_dS_m(values, "ppm", tds_factor=0.7)
    idx = rng.choice(values.size, 300, replace=False)
    expect = [float(u.to_ec_dS_m(float(values[i]), "ppm", tds_factor=0.7)) for i in idx]
    np.testing.assert_array_equal(tds[idx], expect)


def test_scalar_in_gives_0d_array():
    out = u.to_ec_dS_m(1413, "µS/cm")
    assert isinstance(out, np.ndarray) and out.ndim == 0
    assert float(out) == pytest.approx(1.413)  # SI


@settings(max_examples=200, deadline=None)
@given(value=st.floats(min_value=0, max_value=1e6, allow_nan=False),
       a=st.sampled_from(u.DISPLAY_UNITS[:7] + ["S/cm", "mho/cm"]),
       b=st.sampled_from(u.DISPLAY_UNITS[:7] + ["S/cm", "mho/cm"]))
def test_any_two_ec_units_convert_consistently(value, a, b):
    # SI: converting a -> dS/m -> b equals value × factor_a / factor_b
    fa, fb = u.parse_unit(a).factor_to_dS_m, u.parse_unit(b).factor_to_dS_m
    assert u.from_dS_m(u.to_ec_dS_m(value, a), b) == pytest.approx(value * fa / fb, rel=1e-12)
