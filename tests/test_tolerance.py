"""Crop salt tolerance, leaching requirement and salinity classes against
published tables. The source of every check value is named beside it; values
recalled rather than read are marked "from memory"."""
import numpy as np
import pytest
from hypothesis import given, strategies as st

from fieldapp.science import InputError
from fieldapp.science import tolerance as tol

# ---------------------------------------------------------------------------
# FAO Irrigation and Drainage Paper 29 Rev. 1 (Ayers and Westcot 1985),
# Table 4 "Crop tolerance and yield potential ... soil salinity (ECe)":
# ECe (dS/m) at 100, 90, 75 and 50 % yield potential. Copied here as an
# independent literal table (NOT read from crops.csv). The table prints one
# decimal below 10 dS/m and whole numbers above.
# ---------------------------------------------------------------------------
FAO29_TABLE4 = {
    # crop: (ECe100, ECe90, ECe75, ECe50)       source of the literal values
    "corn": (1.7, 2.5, 3.8, 5.9),               # read: PLoS ONE 13(6):e0198290 (2018) Table 3, ref [81] (FAO 29 values)
    "bean": (1.0, 1.5, 2.3, 3.6),               # read: PLoS ONE 2018 Table 3, ref [81]
    "scallop squash": (3.2, 3.8, 4.8, 6.3),     # read: PLoS ONE 2018 Table 3, ref [81]
    "zucchini": (4.7, 5.8, 7.4, 10.0),          # read: PLoS ONE 2018 Table 3, ref [81]
    "barley": (8.0, 10.0, 13.0, 18.0),          # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "cotton": (7.7, 9.6, 13.0, 17.0),           # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "sugar beet": (7.0, 8.7, 11.0, 15.0),       # ECe100 read (FAO 29 Table 4 copy, file id 68728627951); 90/75/50 from memory
    "sorghum": (6.8, 7.4, 8.4, 9.9),            # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "wheat": (6.0, 7.4, 9.5, 13.0),             # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "soybean": (5.0, 5.5, 6.3, 7.5),            # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "cowpea": (4.9, 5.7, 7.0, 9.1),             # FAO 29 Table 4 - from memory
    "peanut": (3.2, 3.5, 4.1, 4.9),             # FAO 29 Table 4 (groundnut) - from memory
    "rice": (3.0, 3.8, 5.1, 7.2),               # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "sugarcane": (1.7, 3.4, 5.9, 10.0),         # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "red beet": (4.0, 5.1, 6.8, 9.6),           # FAO 29 Table 4 - from memory
    "broccoli": (2.8, 3.9, 5.5, 8.2),           # FAO 29 Table 4 - from memory
    "tomato": (2.5, 3.5, 5.0, 7.6),             # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "cucumber": (2.5, 3.3, 4.4, 6.3),           # FAO 29 Table 4 - from memory
    "spinach": (2.0, 3.3, 5.3, 8.6),            # FAO 29 Table 4 - from memory
    "celery": (1.8, 3.4, 5.8, 9.9),             # FAO 29 Table 4 - from memory
    "cabbage": (1.8, 2.8, 4.4, 7.0),            # FAO 29 Table 4 - from memory
    "potato": (1.7, 2.5, 3.8, 5.9),             # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "sweet potato": (1.5, 2.4, 3.8, 6.0),       # FAO 29 Table 4 - from memory
    "pepper": (1.5, 2.2, 3.3, 5.1),             # FAO 29 Table 4 - from memory
    "lettuce": (1.3, 2.1, 3.2, 5.1),            # FAO 29 Table 4 - from memory
    "onion": (1.2, 1.8, 2.8, 4.3),              # FAO 29 Table 4 - from memory
    "carrot": (1.0, 1.7, 2.8, 4.6),             # FAO 29 Table 4 - from memory
    "alfalfa": (2.0, 3.4, 5.4, 8.8),            # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "bermudagrass": (6.9, 8.5, 11.0, 15.0),     # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "sudangrass": (2.8, 5.1, 8.6, 14.0),        # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "lovegrass": (2.0, 3.2, 5.0, 8.0),          # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "corn forage": (1.8, 3.2, 5.2, 8.6),        # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "tall wheatgrass": (7.5, 9.9, 13.0, 19.0),  # FAO 29 Table 4 - from memory
    "date palm": (4.0, 6.8, 11.0, 18.0),        # ECe100 read (file id 68728627951); 90/75/50 from memory
    "grape": (1.5, 2.5, 4.1, 6.7),              # ECe100 read (file id 68728627951); 90/75/50 from memory
    "orange": (1.7, 2.3, 3.3, 4.8),             # read: FAO 29 Table 4 row as compiled in a public source file copying FAO 29 Table 4 (search tool, code corpus) @03e9676
    "almond": (1.5, 2.0, 2.8, 4.1),             # FAO 29 Table 4 - from memory
    "strawberry": (1.0, 1.3, 1.8, 2.5),         # FAO 29 Table 4 - from memory
}
YIELDS = (100, 90, 75, 50)


def _table_tolerance(v):
    # Within the rounding of the published table: ±0.15 dS/m where it prints
    # one decimal, ±0.55 where it prints whole numbers (values of 10 and up).
    return 0.55 if v >= 10 else 0.15


@pytest.mark.parametrize("crop", sorted(FAO29_TABLE4))
def test_ece_at_yield_matches_fao29_table4(crop):
    expected = FAO29_TABLE4[crop]
    got = tol.ece_at_yield(crop, list(YIELDS))
    for y, e, g in zip(YIELDS, expected, got):
        assert abs(g - e) <= _table_tolerance(e), (crop, y, e, float(g))


# FAO 29 Table 4 again, its 100 % and 0 % yield-potential columns only, as
# copied in a public source file of the search tool's code corpus (file id
# 68728627951, repository not shown; it names fao.org/4/t0234e/t0234e03.htm),
# read. The 0 % column is threshold + 100/slope, so it checks the slope too.
FAO29_TABLE4_ENDS = {
    # crop: (ECe at 100 %, ECe at 0 %)    name in that file
    "tomato": (2.5, 13.0),                # "Tomato (open field)"
    "potato": (1.7, 10.0),
    "cucumber": (2.5, 10.0),
    "pepper": (1.5, 8.6),                 # "Sweet pepper"
    "onion": (1.2, 7.4),                  # "Onion (dry)"
    "corn": (1.7, 10.0),                  # "Maize (grain)"
    "wheat": (6.0, 20.0),
    "cotton": (7.7, 27.0),
    "sugar beet": (7.0, 24.0),
    "alfalfa": (2.0, 16.0),
    "grape": (1.5, 12.0),                 # "Table grape"
    "orange": (1.7, 8.0),                 # "Citrus (with cover)"
    "date palm": (4.0, 32.0),
}


@pytest.mark.parametrize("crop", sorted(FAO29_TABLE4_ENDS))
def test_ece_at_full_and_zero_yield_match_fao29_table4(crop):
    e100, e0 = FAO29_TABLE4_ENDS[crop]
    got100, got0 = tol.ece_at_yield(crop, [100, 0])
    assert abs(got100 - e100) <= _table_tolerance(e100), (crop, float(got100))
    assert abs(got0 - e0) <= _table_tolerance(e0), (crop, float(got0))


@pytest.mark.parametrize("crop", sorted(FAO29_TABLE4))
def test_relative_yield_at_fao29_ece_values(crop):
    # FAO 29 Table 4 (see above): at the tabulated ECe the model yield must be
    # the column's yield, within the table rounding times the crop's slope.
    c = tol.find_crop(crop)
    ece = np.array(FAO29_TABLE4[crop])
    got = tol.relative_yield_pct(ece, c)
    for y, e, g in zip(YIELDS, ece, got):
        assert abs(g - y) <= c.slope_pct_per_dS_m * _table_tolerance(e) + 1e-9, (crop, y, float(g))


def test_sunflower_against_plos_one_2018_table3():
    # PLoS ONE 13(6):e0198290 (2018) Table 3, sunflower (ref [83]), read:
    # ECe 4.8 / 6.8 / 9.8 / 14.8 dS/m at 0 / 10 / 25 / 50 % yield decline.
    got = tol.ece_at_yield("sunflower", [100, 90, 75, 50])
    np.testing.assert_allclose(got, [4.8, 6.8, 9.8, 14.8], atol=0.05)


# Maas (1990) threshold and slope, vegetables and fruit crops, as tabulated by
# the USDA-ARS US Salinity Laboratory ("Relative Salt Tolerance of Herbaceous
# Crops - Vegetables and Fruit Crops", web archive 2009), read. Literal values,
# independent of crops.csv.
MAAS1990_VEGETABLES = {
    "asparagus": (4.1, 2.0, "T"), "bean": (1.0, 19.0, "S"), "mung bean": (1.8, 20.7, "S"),
    "red beet": (4.0, 9.0, "MT"), "broccoli": (2.8, 9.2, "MS"), "cabbage": (1.8, 9.7, "MS"),
    "carrot": (1.0, 14.0, "S"), "celery": (1.8, 6.2, "MS"), "sweet corn": (1.7, 12.0, "MS"),
    "cucumber": (2.5, 13.0, "MS"), "eggplant": (1.1, 6.9, "MS"), "lettuce": (1.3, 13.0, "MS"),
    "onion": (1.2, 16.0, "S"), "pepper": (1.5, 14.0, "MS"), "potato": (1.7, 12.0, "MS"),
    "radish": (1.2, 13.0, "MS"), "spinach": (2.0, 7.6, "MS"), "scallop squash": (3.2, 16.0, "MS"),
    "zucchini": (4.7, 9.4, "MT"), "strawberry": (1.0, 33.0, "S"), "sweet potato": (1.5, 11.0, "MS"),
    "tomato": (2.5, 9.9, "MS"), "cherry tomato": (1.7, 9.1, "MS"), "turnip": (0.9, 9.0, "MS"),
}


@pytest.mark.parametrize("crop", sorted(MAAS1990_VEGETABLES))
def test_crop_table_matches_maas_1990_ussl(crop):
    a, b, cls = MAAS1990_VEGETABLES[crop]
    c = tol.find_crop(crop)
    assert c.threshold_dS_m == pytest.approx(a)
    assert c.slope_pct_per_dS_m == pytest.approx(b)
    assert c.tolerance_class == cls
    assert "(read)" in c.source


def test_crop_table_size_sources_and_signs():
    # Task requirement: at least 40 crops across field, forage, vegetable and
    # fruit groups; every row sourced; recalled rows say "from memory".
    assert len(tol.CROPS) >= 40
    groups = {c.group for c in tol.CROPS.values()}
    assert groups == {"field", "forage", "vegetable", "fruit"}
    for c in tol.CROPS.values():
        assert c.source.strip(), c.name
        assert ("(read)" in c.source) or ("from memory" in c.source), c.name
        assert c.threshold_dS_m > 0 and c.slope_pct_per_dS_m > 0, c.name
        assert c.tolerance_class in ("S", "MS", "MT", "T")
        # Maas-Hoffman: yield reaches zero somewhere below 100 dS/m for every crop
        assert c.threshold_dS_m + 100 / c.slope_pct_per_dS_m < 100


def test_tolerance_class_order_follows_thresholds():
    # Maas and Hoffman 1977 rank crops S < MS < MT < T (common practice reading
    # of the classes): the median ECe at 50 % yield must rise with the class.
    med = {}
    for cls in ("S", "MS", "MT", "T"):
        vals = [float(tol.ece_at_yield(c, 50)) for c in tol.CROPS.values()
                if c.tolerance_class == cls]
        med[cls] = np.median(vals)
    assert med["S"] < med["MS"] < med["MT"] < med["T"]


def test_find_crop_aliases_and_errors():
    assert tol.find_crop("Maize").name == "corn"            # common alias
    assert tol.find_crop("SUGAR_BEET").name == "sugar beet"
    assert tol.find_crop("sugarbeet").name == "sugar beet"
    assert tol.find_crop("corn, sweet").name == "sweet corn"
    assert tol.find_crop("groundnut").name == "peanut"
    assert tol.find_crop("Lucerne").name == "alfalfa"
    with pytest.raises(InputError) as e:
        tol.find_crop("tomatoe")
    assert e.value.field == "crop" and "tomato" in e.value.message
    with pytest.raises(InputError) as e:
        tol.find_crop("")
    assert e.value.field == "crop"


def test_relative_yield_shape_and_limits():
    # Maas and Hoffman 1977 eq. 1 (as in FAO Paper 61 Annex 1): 100 % up to the
    # threshold, linear decline, never below 0.
    barley = tol.find_crop("barley")  # a = 8.0, b = 5.0 (see FAO29_TABLE4 check)
    y = tol.relative_yield_pct([0.0, 8.0, 12.0, 60.0, np.nan], barley)
    assert y[0] == 100 and y[1] == 100
    assert y[2] == pytest.approx(100 - 5.0 * 4.0)
    assert y[3] == 0
    assert np.isnan(y[4])
    assert y.dtype == np.float64
    with pytest.raises(InputError):
        tol.relative_yield_pct(-1.0, barley)


@given(st.sampled_from(sorted(tol.CROPS)), st.floats(min_value=0, max_value=100))
def test_relative_yield_inverts_ece_at_yield(name, y):
    # Identity of the two-piece model: Y(ECe(Y)) = Y for 0 <= Y <= 100.
    assert float(tol.relative_yield_pct(tol.ece_at_yield(name, y), name)) == pytest.approx(y, abs=1e-9)


def test_ece_at_yield_rejects_impossible_yield():
    for bad in (-5, 101, float("nan")):
        with pytest.raises(InputError) as e:
            tol.ece_at_yield("wheat", bad)
        assert e.value.field == "yield"


def test_leaching_requirement_worked_example():
    # Extension worked example (avocadosource.com irrigation calculator notes,
    # Rhoades equation): ECw 0.6 dS/m, tolerable ECe 0.4 dS/m
    # -> LR = 0.6 / ((5 x 0.4) - 0.6) = 0.43; with ET 40 inches the water
    # requirement is 40 / (1 - 0.43) = 70 inches.
    lr = float(tol.leaching_requirement(0.6, ece_target=0.4))
    assert round(lr, 2) == 0.43
    assert 40 / (1 - lr) == pytest.approx(70, abs=0.5)


def test_leaching_requirement_with_crop_threshold_and_yield():
    # FAO 29 eq. 7 with ECe at the threshold (100 %) or at a target yield; for
    # barley the threshold and the 90 % ECe come from FAO 29 Table 4 (above):
    # 8.0 and 10 dS/m. ECw 2.0 -> 2/(40-2) and 2/(50-2).
    assert float(tol.leaching_requirement(2.0, crop="barley")) == pytest.approx(
        2.0 / (5 * FAO29_TABLE4["barley"][0] - 2.0), rel=1e-3)
    assert float(tol.leaching_requirement(2.0, crop="barley", target_yield_pct=90)) == pytest.approx(
        2.0 / (5 * FAO29_TABLE4["barley"][1] - 2.0), rel=2e-2)
    # accepting a lower yield can only lower the leaching requirement
    lr = tol.leaching_requirement([0.5, 1.0, 2.0], crop="tomato")
    lr90 = tol.leaching_requirement([0.5, 1.0, 2.0], crop="tomato", target_yield_pct=90)
    assert np.all(lr90 < lr) and np.all(np.diff(lr) > 0)
    assert float(tol.leaching_requirement(0.0, crop="tomato")) == 0.0


def test_leaching_requirement_unattainable_is_inf():
    # FAO 29 eq. 7 has no positive solution when ECw >= 5 ECe: reported as inf
    # so the caller can flag that leaching alone cannot reach the target.
    lr = tol.leaching_requirement([5.0, 6.0, np.nan], ece_target=1.0)
    assert np.isinf(lr[0]) and np.isinf(lr[1]) and np.isnan(lr[2])
    with pytest.raises(InputError) as e:
        tol.leaching_requirement(1.0)
    assert e.value.field == "crop"
    with pytest.raises(InputError):
        tol.leaching_requirement(-1.0, crop="wheat")


def test_water_hazard_boundaries_fao29_table1():
    # FAO 29 Table 1 (read as reproduced in PMC9128324 Table 6, "modified from
    # FAO, 1985"): ECw < 0.7 none; 0.7-3.0 slight to moderate; > 3.0 severe.
    assert tol.WATER_HAZARD_BOUNDS_dS_m == (0.7, 3.0)
    got = tol.water_salinity_hazard([0.0, 0.69, 0.7, 1.5, 3.0, 3.01, 10.0, np.nan])
    assert list(got) == ["none", "none", "slight_to_moderate", "slight_to_moderate",
                         "slight_to_moderate", "severe", "severe", None]
    assert tol.water_salinity_hazard_one(0.5) == "none"
    assert tol.water_salinity_hazard_one(4) == "severe"
    assert set(tol.WATER_HAZARD_LABELS) == {"none", "slight_to_moderate", "severe"}


def test_soil_salinity_class_boundaries_nrcs():
    # NRCS soil salinity classes (read, NRCS layer description): non-saline 0 to
    # <2, very slightly 2 to <4, slightly 4 to <8, moderately 8 to <16,
    # strongly >= 16 dS/m.
    assert tol.SOIL_SALINITY_BOUNDS_dS_m == (2.0, 4.0, 8.0, 16.0)
    got = tol.soil_salinity_class([0.0, 1.99, 2.0, 3.99, 4.0, 7.99, 8.0, 15.99, 16.0, 40.0, np.nan])
    assert list(got) == ["non_saline", "non_saline", "very_slightly_saline", "very_slightly_saline",
                         "slightly_saline", "slightly_saline", "moderately_saline",
                         "moderately_saline", "strongly_saline", "strongly_saline", None]
    bands = tol.soil_salinity_bands()
    assert [b["lo_dS_m"] for b in bands] == [0.0, 2.0, 4.0, 8.0, 16.0]
    assert bands[-1]["hi_dS_m"] is None
    assert all(b["source"] for b in bands)
    with pytest.raises(InputError):
        tol.soil_salinity_class(-0.5)


def test_cautions_defer_to_lab_and_advisers():
    # Project rule: decisions that can hurt show the usual cautions.
    for text in (tol.YIELD_CAUTION, tol.LEACHING_CAUTION):
        assert "extension" in text and ("licensed" in text)
    assert "laboratory" in tol.YIELD_CAUTION


def test_every_crop_row_is_read_or_marked_unverified():
    # every row either carries a source that was read or says "unverified"
    # (the screen shows "unverified"); the disputed rows carry a note
    for c in tol.CROPS.values():
        if c.verified:
            assert "(read)" in c.source, c.name
        else:
            assert "unverified" in c.source, c.name
    for name in ("plum", "orange", "grapefruit", "peanut", "cowpea"):
        assert tol.CROPS[name].note, name


def test_corn_rows_against_plos_one_2018_table_3():
    # PLoS ONE 13(6):e0198290 (2018) Table 3: corn ECe 1.7/2.5/3.8/5.9 dS/m at
    # 0/10/25/50 % decline -> threshold 1.7, slope 50/(5.9 - 1.7) = 11.9 %/dS/m;
    # the footnote quotes forage corn 1.8 dS/m and 7.5 %/dS/m
    corn = tol.find_crop("corn")
    assert corn.threshold_dS_m == 1.7
    assert corn.slope_pct_per_dS_m == pytest.approx(50 / (5.9 - 1.7), abs=0.2)
    forage = tol.find_crop("corn forage")
    assert (forage.threshold_dS_m, forage.slope_pct_per_dS_m) == (1.8, 7.5)
    assert forage.verified


# FAO Irrigation and Drainage Paper 61 (Tanji and Kielen 2002), Annex 1
# Table A1.1 (after Maas and Grattan 1999): threshold (dS/m), slope (%/dS/m)
# and rating, as copied in a public source file (the search tool's code
# corpus; read). A second compilation,
# independent of the FAO 29 Table 4 row above; literal values, not crops.csv.
FAO61_TABLE_A1_1 = {
    "barley": (8.0, 5.0, "T"),      # "Barley, grain"
    "wheat": (6.0, 7.1, "MT"),      # Triticum aestivum
    "soybean": (5.0, 20.0, "MT"),
    "rice": (3.0, 12.0, "S"),       # "Rice, paddy"
    "corn": (1.7, 12.0, "MS"),      # "Corn, grain"
    "sunflower": (4.8, 5.0, "MT"),
}


@pytest.mark.parametrize("crop", sorted(FAO61_TABLE_A1_1))
def test_field_crops_match_fao61_table_a1_1(crop):
    a, b, cls = FAO61_TABLE_A1_1[crop]
    c = tol.find_crop(crop)
    assert (c.threshold_dS_m, c.slope_pct_per_dS_m, c.tolerance_class) == (a, b, cls)
    assert c.verified


# Threshold and slope lists that name FAO 29 (or Maas and Hoffman 1977) as
# their source, read in two files of the search tool's code corpus, shown
# without a repository name: file id 58552035124 (a salinity module, "FAO-29") and
# file id 68632044758 (a crop knowledge file, "FAO-29 Table 4"). Each crop
# below is also in the FAO 29 Table 4 check above except
# date palm, which rests on these two alone. File id 71515541170 (a threshold
# and slope list naming Maas 1990 and FAO 29 and 48) and id 70957189305 (a
# reference table naming FAO 61 Annex 1, Maas and Grattan 1999) were read too.
FAO29_LISTS = {
    # crop: (threshold, slope)    where read
    "sorghum": (6.8, 16.0),       # id 58552035124 and id 68632044758
    "cotton": (7.7, 5.2),         # id 58552035124
    "alfalfa": (2.0, 7.3),        # id 58552035124; id 68410827387 (2.0 / 7.3, MS)
    "bermudagrass": (6.9, 6.4),   # id 68632044758
    "date palm": (4.0, 3.6),      # id 58552035124 and id 68632044758
    "orange": (1.7, 16.0),        # id 58552035124 ("citrus")
    "sugar beet": (7.0, 5.9),     # id 71515541170 ("sugar beets")
    "grape": (1.5, 9.6),          # id 58552035124 and id 70957189305
    "sugarcane": (1.7, 5.9),      # id 66152542144 (cited, not counted: its onion row, 1.3, is off)
}


@pytest.mark.parametrize("crop", sorted(FAO29_LISTS))
def test_rows_match_fao29_lists(crop):
    a, b = FAO29_LISTS[crop]
    c = tol.find_crop(crop)
    assert (c.threshold_dS_m, c.slope_pct_per_dS_m) == (a, b)
    assert c.verified


# FAO 61 (Tanji and Kielen 2002) Annex 1 values as given in a land-use atlas data
# file of the search tool's code corpus (file id 71218416483, repository not
# shown; it names fao.org/4/y4263e/y4263e0e.htm), read: threshold T (dS/m) and
# slope b (%/dS/m). Its rows for crops verified from other tables agree (the
# second dict), so it counts as a compilation. Literal values, not crops.csv.
FAO61_ATLAS = {
    # crop: (threshold, slope)     name in that file
    "durum wheat": (5.9, 3.8),     # "Durum wheat"
    "cowpea": (4.9, 12.0),         # "Cowpea"
    "peanut": (3.2, 29.0),         # "Groundnut"
    "rye": (11.4, 10.8),           # "Rye"
    "triticale": (6.1, 2.5),       # "Triticale"
    "tall wheatgrass": (7.5, 4.2), # "Tall wheatgrass"
}
FAO61_ATLAS_AGREEMENT = {
    "barley": (8.0, 5.0), "wheat": (6.0, 7.1), "sorghum": (6.8, 16.0), "rice": (3.0, 12.0),
    "corn": (1.7, 12.0), "soybean": (5.0, 20.0), "potato": (1.7, 12.0),
    "sugar beet": (7.0, 5.9), "date palm": (4.0, 3.6), "cotton": (7.7, 5.2),
    "sunflower": (4.8, 5.0), "bermudagrass": (6.9, 6.4),
}
# The second compilation for the rows that now have two (read):
SECOND_COMPILATION = {
    # crop: (threshold, slope)     where read
    "durum wheat": (5.9, 3.8),     # id 71515541170 ("durum"; names Maas 1990 and FAO 29 and 48)
    "cowpea": (4.9, 12.0),         # id 71127749756 ("Sitaw", "FAO (cowpea)"; names FAO 61 Annex 1)
}


@pytest.mark.parametrize("crop", sorted(FAO61_ATLAS))
def test_rows_match_fao61_atlas_list(crop):
    a, b = FAO61_ATLAS[crop]
    c = tol.find_crop(crop)
    assert (c.threshold_dS_m, c.slope_pct_per_dS_m) == (a, b)
    if crop in SECOND_COMPILATION:
        assert SECOND_COMPILATION[crop] == (a, b)
        assert c.verified and "(read)" in c.source
        assert "71218416483" in c.source
    else:
        # one compilation only: the row stays unverified and its note says so
        assert not c.verified and "unverified" in c.source
        assert "71218416483" in c.note and "no second" in c.note


def test_fao61_atlas_list_agrees_with_rows_verified_elsewhere():
    for crop, (a, b) in FAO61_ATLAS_AGREEMENT.items():
        c = tol.find_crop(crop)
        assert (c.threshold_dS_m, c.slope_pct_per_dS_m) == (a, b), crop
        assert c.verified, crop


def test_grapefruit_against_fao29_ecw_columns():
    # FAO 29 Table 4 ECw columns for grapefruit as given in a threshold registry
    # source file (search tool code corpus, file id 68953719032), read: ECw 1.2 /
    # 1.6 / 2.2 / 3.3 dS/m at 100 / 90 / 75 / 50 % yield. The table's ECw is
    # ECe / 1.5 (its soybean 5.0 / 3.3 and corn 1.7 / 1.1 rows, read, keep that
    # ratio), so threshold 1.8 and slope 50 / (4.95 - 1.8) = 15.9 %/dS/m. One
    # compilation: the row stays unverified, and Maas (1993) differs (note).
    ece = [1.5 * x for x in (1.2, 1.6, 2.2, 3.3)]
    c = tol.CROPS["grapefruit"]
    assert c.threshold_dS_m == pytest.approx(ece[0], abs=0.05)
    assert c.slope_pct_per_dS_m == pytest.approx(50 / (ece[3] - ece[0]), abs=0.6)
    assert not c.verified and "unverified" in c.source
    assert "68953719032" in c.note and "no second" in c.note and "1993" in c.note


def test_broad_bean_range_is_cited_not_counted():
    # A plant data file (file id 61151037209, read) gives Vicia faba 1.5 to 1.7
    # dS/m and 9.6 %/dS/m, moderately sensitive: a range with no table named.
    c = tol.CROPS["broad bean"]
    assert 1.5 <= c.threshold_dS_m <= 1.7
    assert (c.slope_pct_per_dS_m, c.tolerance_class) == (9.6, "MS")
    assert not c.verified and "61151037209" in c.note and "not counted" in c.note


def test_thresholds_and_classes_against_pmc6656830_table_1():
    # PMC6656830 Table 1 (read): cotton 7.7 dS/m "Tolerant", wheat 6 dS/m
    # "Moderately tolerant", sugarcane 1.7 dS/m "Moderately sensitive". Its
    # rice (2), maize (1.3) and sorghum (2.8) come from later single studies;
    # the compilation values are kept and those rows carry the other value
    # in their note.
    for crop, a, cls in (("cotton", 7.7, "T"), ("wheat", 6.0, "MT"), ("sugarcane", 1.7, "MS")):
        c = tol.find_crop(crop)
        assert (c.threshold_dS_m, c.tolerance_class) == (a, cls), crop
    for crop, other in (("rice", "2 dS/m"), ("sorghum", "2.8 dS/m")):
        assert "PMC6656830" in tol.CROPS[crop].note and other in tol.CROPS[crop].note, crop


def test_widely_grown_crops_verified_or_say_why_not():
    # The widely grown crops this table should carry checked: each is either
    # verified against two compilations / a primary table, or its note says
    # what was found and what is missing.
    verified = ("wheat", "barley", "cotton", "rice", "corn", "sorghum", "soybean", "alfalfa",
                "potato", "tomato", "orange", "sunflower", "date palm", "bermudagrass",
                "sugar beet", "grape", "plum", "sugarcane", "durum wheat", "cowpea")
    for name in verified:
        assert tol.CROPS[name].verified, name
        assert "(read)" in tol.CROPS[name].source, name
    for name in ("peanut", "grapefruit", "flax", "almond", "peach", "rye", "triticale"):
        c = tol.CROPS[name]
        assert not c.verified, name
        assert "unverified" in c.source, name
    # one compilation found, the second missing: the note says which
    for name in ("sudangrass", "lovegrass", "flax", "almond", "peach", "peanut", "rye",
                 "triticale", "tall wheatgrass", "grapefruit"):
        assert "no second" in tol.CROPS[name].note, name


def test_peanut_threshold_against_field_study_abstract():
    # "Peanut Response to Uniform and Non-uniform Soil Salinity", Agronomy
    # Journal, abstract read at scilit.com/publications/ef92469d7eb31815ba6c168cd71be0c1:
    # yield -20 % at ECe 3.8 and -50 % at ECe 4.7 mmhos/cm. The two-piece line
    # through those points has slope 30 / 0.9 = 33.3 %/dS/m and meets 100 % at
    # 3.8 - 20 / 33.3 = 3.2 dS/m: the stored threshold agrees; the stored slope
    # (29, compilation not read) does not, and the row says so.
    slope = (80 - 50) / (4.7 - 3.8)
    threshold = 3.8 - 20 / slope
    c = tol.CROPS["peanut"]
    assert c.threshold_dS_m == pytest.approx(threshold, abs=0.05)
    assert abs(c.slope_pct_per_dS_m - slope) > 2          # the disagreement is real
    assert not c.verified and "unverified" in c.source
    assert "33" in c.note and "3.8" in c.note and "4.7" in c.note


def test_plum_follows_the_primary_study_and_fao61():
    # "Yield and foliar injury responses of mature plum trees to salinity",
    # abstract read at discovery.researcher.life (b50229e0c9f43fc19ec8c2abc0b28ceb):
    # threshold 2.6 dS/m, 31 %/dS/m; FAO 61 Annex 1 (Maas and Grattan 1999) as
    # given in a public plant data file (file id 60889861976, read): 2.6 / 31 / MS.
    # The recalled older row (1.5 / 18 / S) was never read; the note keeps it.
    c = tol.CROPS["plum"]
    assert (c.threshold_dS_m, c.slope_pct_per_dS_m, c.tolerance_class) == (2.6, 31.0, "MS")
    assert c.verified and "(read)" in c.source
    assert "1.5 dS/m" in c.note and "18 %/dS/m" in c.note
