"""What a site's readings mean, against published values (source beside each
check): Maas-Hoffman yield and FAO 29 Table 4, soil classes (NRCS), water
restriction classes (FAO 29 Table 1), leaching requirement (FAO 29 eq. 7),
substrate ranges (the soilless-media interpretation table), and the
bookkeeping rules: current readings only, latest by depth, direction of change."""
from __future__ import annotations

import itertools

import pytest

from fieldapp import interpret
from fieldapp.science import InputError, osmotic
from fieldapp.records import convert_reading

_ids = itertools.count(1)


def rec(sample, value, day="2026-05-01", depth=None, status="current", unit="dS/m",
        crop=None, **kw):
    """A reading record shaped like store.reading_dict, made by the real pipeline."""
    d = {"sample": sample, "value": value, "unit": unit, "compensated": True, **kw}
    if crop:
        d["crop"] = crop
    res = convert_reading(d)
    i = next(_ids)
    return {"id": i, "uuid": f"r{i}", "sample": sample, "depth_cm": depth, "status": status,
            "taken_at": f"{day}T09:{i % 60:02d}:00+00:00", "visit_date": day,
            "ec25_dS_m": res["ec25_dS_m"], "ece_dS_m": res["ece_dS_m"],
            "ece_method": res["ece_method"], "ratio": kw.get("ratio"),
            "theta_g_pct": kw.get("theta_g_pct"), "matric_MPa": kw.get("matric_MPa"),
            "flags": [f["code"] for f in res["flags"]], "result": res}


TOMATO = {"id": 1, "name": "Block 3", "kind": "field", "crop": "tomato"}
CUCUMBER_BENCH = {"id": 2, "name": "Bench 4", "kind": "greenhouse", "crop": "cucumber"}


# ------------------------------------------------------------------ soil

@pytest.mark.parametrize("ece,expected_pct", [
    # FAO Irrigation and Drainage Paper 29 Rev. 1, Table 4, tomato: ECe 2.5 / 3.5 /
    # 5.0 / 7.6 dS/m at 100 / 90 / 75 / 50 % yield potential (from memory, as in
    # tests/test_tolerance.py). Tolerance: table rounding (0.05 dS/m) × slope 9.9.
    (2.5, 100), (3.5, 90), (5.0, 75), (7.6, 50)])
def test_root_zone_yield_matches_fao29_table4_tomato(ece, expected_pct):
    # two depths whose mean is the tabulated ECe: the root-zone mean is what counts
    readings = [rec("paste", ece - 0.5, depth=15), rec("paste", ece + 0.5, depth=45)]
    s = interpret.site_summary(TOMATO, readings)
    rz = s["soil"]["root_zone"]
    assert rz["ece_dS_m"] == pytest.approx(ece)
    assert rz["relative_yield_pct"] == pytest.approx(expected_pct, abs=0.05 * 9.9 + 0.01)
    assert rz["n_depths"] == 2


@pytest.mark.parametrize("ece,cls", [
    # USDA-NRCS soil salinity classes (Soil Survey Manual): non-saline 0 to <2,
    # very slightly 2 to <4, slightly 4 to <8, moderately 8 to <16, strongly >=16.
    (1.99, "non_saline"), (2.0, "very_slightly_saline"), (3.99, "very_slightly_saline"),
    (4.0, "slightly_saline"), (8.0, "moderately_saline"), (16.0, "strongly_saline")])
def test_soil_class_at_the_nrcs_limits(ece, cls):
    s = interpret.site_summary(TOMATO, [rec("paste", ece, depth=15)])
    assert s["soil"]["root_zone"]["class"] == cls
    assert s["soil"]["depths"][0]["class"] == cls


def test_only_current_readings_are_interpreted():
    void = rec("paste", 12.0, depth=15, day="2026-05-02", status="void")
    old = rec("paste", 9.0, depth=15, day="2026-05-02", status="corrected")
    new = rec("paste", 3.0, depth=15, day="2026-05-02")
    s = interpret.site_summary(TOMATO, [void, old, new])
    assert s["soil"]["root_zone"]["ece_dS_m"] == pytest.approx(3.0)
    assert s["n_current"] == 1 and s["n_readings"] == 3
    specs = interpret.chart_specs(TOMATO, [void, old, new])
    keys = [p["key"] for sp in specs for se in sp["series"] for p in se["points"]]
    assert keys == [new["uuid"]]


def test_latest_by_depth_and_root_zone_from_the_latest_visit():
    rs = [rec("paste", 2.0, depth=15, day="2026-03-01"), rec("paste", 6.0, depth=90, day="2026-03-01"),
          rec("paste", 3.0, depth=15, day="2026-05-01"), rec("paste", 5.0, depth=45, day="2026-05-01"),
          # replicates on the same day are averaged
          rec("paste", 5.4, depth=45, day="2026-05-01")]
    soil = interpret.site_summary(TOMATO, rs)["soil"]
    by = {d["depth_cm"]: d for d in soil["depths"]}
    assert by[15]["ece_dS_m"] == pytest.approx(3.0) and not by[15]["older"]
    assert by[45]["ece_dS_m"] == pytest.approx(5.2) and by[45]["n"] == 2
    assert by[90]["date"] == "2026-03-01" and by[90]["older"]
    # the root-zone mean uses the depths of the latest visit only: (3.0 + 5.2) / 2
    assert soil["root_zone"]["ece_dS_m"] == pytest.approx(4.1)
    assert soil["root_zone"]["depths_label"] == "15 cm, 45 cm"


def test_heading_uses_the_stated_uncertainty_and_notes_a_method_change():
    # paste: ±8 % (UC Davis ANLAB method note, as stored in extracts.py)
    steady = interpret.site_summary(TOMATO, [rec("paste", 3.0, depth=15, day="2026-03-01"),
                                             rec("paste", 3.2, depth=15, day="2026-04-01")])
    assert steady["soil"]["heading"]["direction"] == "steady"
    rising = interpret.site_summary(TOMATO, [rec("paste", 3.0, depth=15, day="2026-03-01"),
                                             rec("paste", 4.5, depth=15, day="2026-03-31")])
    h = rising["soil"]["heading"]
    assert h["direction"] == "rising" and h["days"] == 30
    assert h["change_dS_m"] == pytest.approx(1.5) and h["per_30_days_dS_m"] == pytest.approx(1.5)
    assert h["note"] is None
    mixed = interpret.site_summary(TOMATO, [
        rec("extract", 0.5, depth=15, day="2026-03-01", ratio="1:5", sp=40),
        rec("paste", 1.0, depth=15, day="2026-04-01")])
    assert "method changed" in mixed["soil"]["heading"]["note"]
    assert any("method changed" in t for t in mixed["headline"])


def test_potentials_at_field_capacity_and_now():
    r = rec("paste", 4.0, depth=15)
    d = interpret.site_summary(TOMATO, [r])["soil"]["depths"][0]
    psi_fc = r["result"]["soil_solution"]["psi_s_fc_MPa"]
    assert d["psi_s_fc_MPa"] == pytest.approx(psi_fc)
    # total at field capacity = solute + matric at field capacity (-0.033 MPa,
    # common practice); margin to the wilting point (-1.5 MPa, common practice)
    assert d["psi_total_fc_MPa"] == pytest.approx(psi_fc - 0.033, abs=1e-4)
    assert d["margin_fc_MPa"] == pytest.approx(psi_fc - 0.033 + 1.5, abs=5e-4)  # 4 digits kept
    assert d["moisture"] is None
    # ECsw at field capacity ≈ 2 ECe (FAO 29, common practice)
    assert d["ec_fc_dS_m"] == pytest.approx(8.0)
    # with a water content and a matric reading: the stored total potential
    wet = rec("paste", 4.0, depth=15, sp=50, theta_g_pct=20, matric_MPa=-0.5)
    m = interpret.site_summary(TOMATO, [wet])["soil"]["depths"][0]["moisture"]
    ss = wet["result"]["soil_solution"]
    assert m["ec_sw_dS_m"] == pytest.approx(4.0 * 50 / 20)          # ECe × SP / θ
    assert m["psi_total_MPa"] == pytest.approx(ss["psi_s_sw_MPa"] - 0.5, abs=1e-3)
    assert m["margin_to_pwp_MPa"] == pytest.approx(m["psi_total_MPa"]
                                                   - osmotic.PERMANENT_WILTING_POINT_MPa, abs=1e-3)
    assert "water content" in m["basis"]


# ------------------------------------------------------------------ water

@pytest.mark.parametrize("ecw,hazard", [
    # FAO 29 Table 1: none < 0.7; slight to moderate 0.7-3.0; severe > 3.0 dS/m
    (0.69, "none"), (0.7, "slight_to_moderate"), (3.0, "slight_to_moderate"), (3.01, "severe")])
def test_water_hazard_class_fao29_table1(ecw, hazard):
    w = interpret.site_summary(TOMATO, [rec("water", ecw)])["water"]
    assert w["hazard"] == hazard


def test_leaching_requirement_fao29_eq7():
    # LR = ECw / (5 ECe - ECw), ECe the crop threshold (FAO 29 eq. 7; tomato 2.5 dS/m
    # at 100 % and 3.5 dS/m at 90 %, FAO 29 Table 4 - from memory)
    w = interpret.site_summary(TOMATO, [rec("water", 1.2)])["water"]
    assert w["leaching"]["lr_100"] == pytest.approx(1.2 / (5 * 2.5 - 1.2), rel=1e-3)
    assert w["leaching"]["lr_90"] == pytest.approx(1.2 / (5 * 3.5 - 1.2), rel=0.02)
    # water at or above 5 × threshold cannot be leached to full yield
    salty = interpret.site_summary(TOMATO, [rec("water", 13.0)])["water"]
    assert salty["leaching"]["too_salty"] and salty["leaching"]["lr_100"] is None
    nocrop = interpret.site_summary({"name": "Well", "crop": None}, [rec("water", 1.2)])["water"]
    assert nocrop["leaching"] is None


# ------------------------------------------------------------------ greenhouse

def test_feed_and_leachate_on_the_same_visit():
    rs = [rec("feed", 2.2, day="2026-05-01"), rec("leachate", 3.0, day="2026-05-01"),
          rec("feed", 2.3, day="2026-05-14"), rec("leachate", 4.0, day="2026-05-14"),
          rec("leachate", 4.2, day="2026-05-14"), rec("feed", 2.0, day="2026-05-20")]
    gh = interpret.site_summary(CUCUMBER_BENCH, rs)["greenhouse"]
    latest = gh["latest"]
    assert latest["date"] == "2026-05-14"                    # 05-20 has no leachate
    assert latest["leachate_dS_m"] == pytest.approx(4.1)     # two leachates averaged
    assert latest["ratio"] == pytest.approx(4.1 / 2.3, rel=1e-3)
    assert latest["band"]["key"] == "building_up"
    assert gh["trend"]["from_ratio"] == pytest.approx(3.0 / 2.2, rel=1e-3)
    assert gh["visits"][0]["date"] == "2026-05-20" and gh["visits"][0]["ratio"] is None
    assert "common practice" in gh["source"]


@pytest.mark.parametrize("ratio,key", [(0.5, "below_feed"), (0.8, "balanced"), (1.19, "balanced"),
                                       (1.2, "rising"), (1.5, "building_up"), (2.0, "high"),
                                       (3.5, "high")])
def test_leachate_feed_bands_common_practice(ratio, key):
    assert interpret.leachate_feed_band(ratio)["key"] == key


@pytest.mark.parametrize("sample,value,level", [
    # Soluble-salt levels by soilless-media test (Cavins et al. 2000, NC State
    # Horticulture Information Leaflet 590 - attribution from memory), dS/m:
    # SME normal 2.0-3.5, high 3.5-5.0; pour-through normal 2.6-4.6, high 4.6-6.5;
    # 1:2 normal 0.8-1.3 (independent literal values).
    ("sme", 2.6, "normal"), ("sme", 3.6, "high"), ("leachate", 4.1, "normal"),
    ("leachate", 4.7, "high"), ("media", 1.0, "normal"), ("media", 0.5, "low")])
def test_substrate_tests_against_their_own_method_ranges(sample, value, level):
    kw = {"ratio": "1:2"} if sample == "media" else {}
    subs = interpret.site_summary(CUCUMBER_BENCH, [rec(sample, value, **kw)])["substrate"]
    assert len(subs) == 1 and subs[0]["level"] == level
    assert "Cavins" in subs[0]["source"] and "common practice" in subs[0]["source"]


def test_substrate_ranges_against_the_umass_worked_example():
    # The UMass Extension greenhouse media-testing text (read in a county
    # extension blog's copy; see substrate_ranges.csv): "2.6 would be 'extreme'
    # (too high) for the 1:2 method, 'normal' for SME, and 'low' for leachate
    # pourthru".
    def level(sample, **kw):
        return interpret.site_summary(CUCUMBER_BENCH, [rec(sample, 2.6, **kw)])["substrate"][0]
    assert level("media", ratio="1:2")["level"] == "extreme"
    assert level("sme")["level"] == "normal"
    # Pour-through: 2.6 is the shared limit of the table's low (1.0-2.6) and
    # normal (2.6-4.6) rows; the text puts it in low, and so does this app
    # (a shared limit belongs to the lower band).
    pt = level("leachate")
    assert pt["level"] == "low"
    bands = {g["level"]: g for g in pt["ranges"]}
    assert bands["low"]["hi_dS_m"] == bands["normal"]["lo_dS_m"] == 2.6
    from fieldapp.science import extracts
    for r in extracts.substrate_ranges("pour_through"):
        if r.level in ("low", "normal"):
            assert "2.6 reads low here, as in that worked example" in r.source, r.level


@pytest.mark.parametrize("sample,value,level", [
    # A limit two bands share belongs to the lower band (the worked example
    # above); just past it, the next band; the lowest band holds 0 itself.
    # Limits as the table rows read (substrate_ranges.csv).
    ("sme", 3.5, "normal"), ("sme", 3.51, "high"), ("sme", 0.0, "very_low"),
    ("media", 0.8, "low"), ("media", 0.81, "normal"), ("leachate", 1.0, "very_low"),
    ("leachate", 6.5, "high"), ("leachate", 7.8, "very_high"), ("leachate", 7.81, "extreme")])
def test_a_shared_substrate_limit_belongs_to_the_lower_band(sample, value, level):
    kw = {"ratio": "1:2"} if sample == "media" else {}
    subs = interpret.site_summary(CUCUMBER_BENCH, [rec(sample, value, **kw)])["substrate"]
    assert subs[0]["level"] == level, (sample, value, subs[0]["level"])


def test_substrate_screen_source_is_marked_unverified():
    # no row of the substrate table has been checked against its published
    # table, so what the site page cites must say so (and which method it is)
    for sample, kw in (("media", {"ratio": "1:2"}), ("sme", {}), ("leachate", {})):
        t = interpret.site_summary(CUCUMBER_BENCH, [rec(sample, 1.0, **kw)])["substrate"][0]
        assert t["source_status"] == "unverified" and "unverified" in t["source"]


def test_substrate_edge_cases():
    # a 1:5 substrate extract is not read against the 1:2 table
    s = interpret.site_summary(CUCUMBER_BENCH, [rec("media", 0.5, ratio="1:5")])["substrate"][0]
    assert s["level"] is None and "1:2" in s["note"]
    # the published pour-through table has a gap between 6.5 and 6.6
    g = interpret.site_summary(CUCUMBER_BENCH, [rec("leachate", 6.55)])["substrate"][0]
    assert g["level"] == "high" and "gap" in g["note"]


# ------------------------------------------------------------------ targets

def test_targets_validation_and_comparison():
    t = interpret.validate_target({"crop": "Cucumber", "measure": "feed", "lo_dS_m": "1,7",
                                   "hi_dS_m": "2.5", "note": "  plan  A "})
    assert t == {"crop": "cucumber", "measure": "feed", "lo_dS_m": 1.7, "hi_dS_m": 2.5,
                 "note": "plan A"}
    for bad, field in (({"hi_dS_m": "1.0"}, "hi_dS_m"), ({"lo_dS_m": None, "hi_dS_m": None}, "lo_dS_m"),
                       ({"measure": "soup"}, "measure"), ({"crop": "zzz"}, "crop"),
                       ({"lo_dS_m": "-1"}, "lo_dS_m"), ({"lo_dS_m": "abc"}, "lo_dS_m")):
        body = {"crop": "cucumber", "measure": "feed", "lo_dS_m": "1.7", "hi_dS_m": "2.5", **bad}
        with pytest.raises(InputError) as e:
            interpret.validate_target(body)
        assert e.value.field == field
    rs = [rec("feed", 2.8, day="2026-05-01"), rec("leachate", 3.0, day="2026-05-01")]
    s = interpret.site_summary(CUCUMBER_BENCH, rs, targets=[dict(t, id=1)])
    assert s["greenhouse"]["feed_target"]["where"] == "above"
    assert s["greenhouse"]["leachate_target"] is None
    assert interpret.compare_to_target(2.5, t)["where"] == "within"     # limits inclusive
    assert interpret.compare_to_target(1.6, t)["where"] == "below"
    # a target of another crop does not apply
    other = interpret.site_summary(TOMATO, rs, targets=[dict(t, id=1)])
    assert other["greenhouse"]["feed_target"] is None


def test_as_of_shows_the_state_at_an_earlier_visit():
    rs = [rec("paste", 2.0, depth=15, day="2026-03-01"), rec("paste", 6.0, depth=15, day="2026-05-01")]
    s = interpret.site_summary(TOMATO, rs, as_of="2026-03-01")
    assert s["soil"]["root_zone"]["ece_dS_m"] == pytest.approx(2.0)
    assert s["soil"]["heading"] is None


def test_profile_needs_two_depths_on_a_visit():
    one = [rec("paste", 2.0, depth=15, day="2026-03-01")]
    assert interpret.profile_spec(TOMATO, one) is None
    rs = one + [rec("paste", 3.0, depth=45, day="2026-03-01"),
                rec("paste", 2.5, depth=15, day="2026-05-01"), rec("paste", 4.0, depth=45, day="2026-05-01")]
    p = interpret.profile_spec(TOMATO, rs)
    assert p["date"] == "2026-05-01" and [s["name"] for s in p["series"]] == ["2026-05-01", "2026-03-01"]
    assert interpret.profile_spec(TOMATO, rs, day="2026-03-01")["date"] == "2026-03-01"


def test_summary_is_plain_json():
    import json
    rs = [rec("paste", 3.0, depth=15), rec("water", 20.0), rec("feed", 2.0), rec("leachate", 3.0)]
    s = interpret.site_summary(TOMATO, rs)
    json.loads(json.dumps(s, allow_nan=False))   # no NaN or infinity reaches the API
