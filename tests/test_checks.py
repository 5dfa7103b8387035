"""One case that must raise each flag and a near case that must not.

Limits are the project's stated common-practice values (science/checks.py);
the KCl expectations come from the published 0.01 mol/L KCl table
(temperature.kcl_001_uS_cm; NIST/Wu et al. 1991 ratios)."""
from __future__ import annotations

import datetime as dt

import pytest

from fieldapp.forms import meter_context
from fieldapp.records import convert_reading


def codes(reading, context=None):
    r = convert_reading(reading, context=context)
    return {f["code"] for f in r["flags"]}, r


def flagged(code, reading, context=None):
    return code in codes(reading, context)[0]


def meter(lo, hi, res=None, **kw):
    return lambda k: meter_context(k, lo, hi, res, **kw)


WATER = {"sample": "water", "compensated": True}


# over_range: a pocket tester 0-1999 µS/cm showing 1999 is pegged (common practice).
def test_over_range():
    assert flagged("over_range", {**WATER, "value": "1999", "unit": "µS/cm"}, meter(0, 1999, 1))
    assert not flagged("over_range", {**WATER, "value": "1998", "unit": "µS/cm"}, meter(0, 1999, 1))
    # the range is in the meter's unit; the reading may be in another
    assert flagged("over_range", {**WATER, "value": "2.5", "unit": "mS/cm"},
                   lambda k: {"meter_max_dS_m": 1.999})


def test_under_range():
    assert flagged("under_range", {**WATER, "value": "5", "unit": "µS/cm"}, meter(10, 1999, 1))
    assert not flagged("under_range", {**WATER, "value": "10", "unit": "µS/cm"}, meter(10, 1999, 1))


def test_below_resolution_reports_error_after_dilution():
    # 0.05 mS/cm on a 0.01-step meter is 5 steps: ±10 % from rounding alone.
    reading = {"sample": "extract", "ratio": "1:5", "sp": "30", "compensated": True,
               "value": "0.05", "unit": "mS/cm"}
    c, r = codes(reading, meter(0, 20, 0.01))
    assert "below_resolution" in c
    f = next(f for f in r["flags"] if f["code"] == "below_resolution")
    assert f["data"]["relative_error_pct"] == pytest.approx(10.0)
    # ECe factor 100·5/30 = 16.7; half a step (0.005 dS/m) becomes ±0.083 dS/m
    assert f["data"]["ece_abs_error_dS_m"] == pytest.approx(0.005 * 500 / 30, rel=1e-3)
    assert not flagged("below_resolution", {**reading, "value": "0.10"}, meter(0, 20, 0.01))


def test_unit_slip_too_high_suggests_smaller_unit():
    c, r = codes({**WATER, "value": "350", "unit": "mS/cm"})
    assert "unit_slip" in c
    f = next(f for f in r["flags"] if f["code"] == "unit_slip")
    assert f["data"]["suggested_unit"] == "µS/cm"
    # 35 mS/cm is brackish water, possible: no slip
    assert not flagged("unit_slip", {**WATER, "value": "35", "unit": "mS/cm"})


def test_unit_slip_too_low_suggests_larger_unit():
    c, r = codes({"sample": "feed", "compensated": True, "value": "0.35", "unit": "µS/cm"})
    assert "unit_slip" in c
    assert next(f for f in r["flags"] if f["code"] == "unit_slip")["data"]["suggested_unit"] == "mS/cm"
    assert not flagged("unit_slip", {"sample": "feed", "compensated": True, "value": "350",
                                     "unit": "µS/cm"})


def test_unit_not_on_meter():
    ctx = lambda k: {"meter_units": ("µS/cm",)}
    assert flagged("unit_not_on_meter", {**WATER, "value": "1.2", "unit": "mS/cm"}, ctx)
    assert not flagged("unit_not_on_meter", {**WATER, "value": "1200", "unit": "µS/cm"}, ctx)


def test_ratio_implausible():
    ext = {"sample": "extract", "sp": "40", "compensated": True, "value": "1", "unit": "dS/m"}
    assert flagged("ratio_implausible", {**ext, "ratio": "1:20"})
    assert not flagged("ratio_implausible", {**ext, "ratio": "1:5"})
    # a paste with a ratio, and water with a ratio
    assert flagged("ratio_implausible", {"sample": "paste", "ratio": "1:5", "compensated": True,
                                         "value": "2", "unit": "dS/m"})
    assert not flagged("ratio_implausible", {"sample": "paste", "compensated": True,
                                             "value": "2", "unit": "dS/m"})
    assert flagged("ratio_implausible", {**WATER, "ratio": "1:2", "value": "1", "unit": "dS/m"})


def test_ratio_below_saturation():
    # 1:1 is 100 g water per 100 g soil; a clay with SP 120 cannot give an extract
    ext = {"sample": "extract", "ratio": "1:1", "compensated": True, "value": "1", "unit": "dS/m"}
    assert flagged("ratio_below_saturation", {**ext, "sp": "120"})
    assert not flagged("ratio_below_saturation", {**ext, "sp": "90"})


def test_ece_implausible_brine_and_dilution():
    ext = {"sample": "extract", "ratio": "1:5", "compensated": True, "unit": "dS/m"}
    assert flagged("ece_implausible", {**ext, "value": "12", "sp": "30"})     # ECe 200 dS/m
    assert not flagged("ece_implausible", {**ext, "value": "4", "sp": "30"})  # ECe 67 dS/m
    # 1:10 on a sand (SP 25): factor 40 multiplies reading errors
    assert flagged("ece_implausible", {**ext, "ratio": "1:10", "value": "0.3", "sp": "25"})
    assert not flagged("ece_implausible", {**ext, "ratio": "1:5", "value": "0.3", "sp": "25"})


def test_temperature_range():
    assert flagged("temperature_range", {"sample": "water", "value": "1", "unit": "dS/m",
                                         "temp_c": "52"})
    assert not flagged("temperature_range", {"sample": "water", "value": "1", "unit": "dS/m",
                                             "temp_c": "40"})
    ctx = lambda k: {"meter_temp_min_c": 5.0, "meter_temp_max_c": 35.0}
    assert flagged("temperature_range", {"sample": "water", "value": "1", "unit": "dS/m",
                                         "temp_c": "38", "compensated": True}, ctx)
    assert not flagged("temperature_range", {"sample": "water", "value": "1", "unit": "dS/m",
                                             "temp_c": "34", "compensated": True}, ctx)


def test_uncompensated_says_by_how_much():
    c, r = codes({"sample": "water", "value": "1", "unit": "dS/m", "temp_c": "10"})
    f = next(f for f in r["flags"] if f["code"] == "uncompensated")
    # ISO 7888:1985 table of f25 for natural waters: f25(10 °C) = 1.428, so +42.8 %
    assert f["data"]["correction_pct"] == pytest.approx(42.8, abs=0.1)
    assert not flagged("uncompensated", {"sample": "water", "value": "1", "unit": "dS/m",
                                         "temp_c": "22"})


def test_replicate_spread():
    # CV of 1.0, 1.0, 1.3 is 15.7 % > 10 % (common practice)
    assert flagged("replicate_spread", {**WATER, "value": "1.3", "unit": "dS/m"},
                   lambda k: {"replicate_others": (1.0, 1.0)})
    # 1.0, 1.0, 1.1 is 5.6 %
    assert not flagged("replicate_spread", {**WATER, "value": "1.1", "unit": "dS/m"},
                       lambda k: {"replicate_others": (1.0, 1.0)})


def test_history_jump_is_robust():
    # history median 2.0, MAD 0.1: 3.0 is z = 0.6745·1.0/0.1 = 6.7 > 3.5 (Iglewicz-Hoaglin)
    hist = lambda k: {"history_median": 2.0, "history_mad": 0.1, "history_n": 8}
    assert flagged("history_jump", {"sample": "paste", "compensated": True, "value": "3.0",
                                    "unit": "dS/m"}, hist)
    assert not flagged("history_jump", {"sample": "paste", "compensated": True, "value": "2.4",
                                        "unit": "dS/m"}, hist)
    few = lambda k: {"history_median": 2.0, "history_mad": 0.1, "history_n": 3}
    assert not flagged("history_jump", {"sample": "paste", "compensated": True, "value": "3.0",
                                        "unit": "dS/m"}, few)


def test_calibration_flags():
    r = {**WATER, "value": "1", "unit": "dS/m"}
    assert flagged("calibration_drift", r, lambda k: {"cal_passed": 0.0, "cal_deviation_pct": 9.0})
    assert not flagged("calibration_drift", r, lambda k: {"cal_passed": 1.0})
    assert flagged("calibration_stale", r, lambda k: {"cal_age_days": 10.0, "cal_max_age_days": 7.0})
    assert not flagged("calibration_stale", r, lambda k: {"cal_age_days": 2.0,
                                                           "cal_max_age_days": 7.0})
    assert flagged("calibration_stale", r, lambda k: {"meter_known": 1.0, "cal_max_age_days": 7.0})


# ---------------------------------------------------------------- through the API

def test_meter_calibration_and_flags_through_the_api(client):
    assert client.post("/api/meters", json={"preset": "pocket tester 0-1999 µS/cm",
                                            "name": "tester A"}).status_code == 201
    # 0.01 mol/L KCl at 20 °C on a meter without compensation: expected 1278 µS/cm
    # (published KCl table; ±0.1 %)
    r = client.post("/api/calibrations", json={"meter": "tester A", "standard": "kcl_0.01",
                                               "value": "1278", "unit": "µS/cm", "temp_c": "20",
                                               "compensated": False})
    body = r.get_json()
    assert r.status_code == 201
    assert body["expected_uS_cm"] == pytest.approx(1278, rel=1e-3)
    assert body["passed"] is True and abs(body["deviation_pct"]) < 0.2
    # a compensating meter should show 1413; 1530 is +8.3 %: fails the 5 % default
    r = client.post("/api/calibrations", json={"meter": "tester A", "value": "1530",
                                               "unit": "µS/cm", "temp_c": "20",
                                               "compensated": True}).get_json()
    assert r["passed"] is False and r["deviation_pct"] == pytest.approx(8.28, abs=0.05)
    saved = client.post("/api/readings", json={"site": "Block 3", **WATER, "value": "1999",
                                               "unit": "µS/cm", "meter": "tester A"}).get_json()
    assert {"over_range", "calibration_drift"} <= set(saved["flags"])
    # flags never block a save, and they are in the export
    assert "over_range" in client.get("/export.csv").get_data(as_text=True)


def test_calibration_bad_input(client):
    client.post("/api/meters", json={"preset": "pocket tester 0-1999 µS/cm", "name": "t"})
    assert client.post("/api/calibrations", json={"meter": "nope", "value": "1", "unit": "µS/cm"}
                       ).get_json()["field"] == "meter"
    assert client.post("/api/calibrations", json={"meter": "t", "value": "x", "unit": "µS/cm"}
                       ).get_json()["field"] == "value"
    assert client.post("/api/calibrations", json={"meter": "t", "value": "500", "unit": "ppm"}
                       ).get_json()["field"] in ("unit", "tds_factor")


def test_meter_validation(client):
    bad = client.post("/api/meters", json={"name": "m", "units": ["µS/cm"],
                                           "ranges": [{"min": 10, "max": 5, "unit": "µS/cm"}]})
    assert bad.status_code == 400 and bad.get_json()["field"] == "ranges"
    assert client.post("/api/meters", json={"name": "", "units": ["µS/cm"]}).status_code == 400
    ok = client.post("/api/meters", json={"name": "m", "units": ["uS/cm"],
                                          "ranges": [{"min": 0, "max": 1999, "resolution": 1}]})
    assert ok.status_code == 201 and ok.get_json()["units"] == ["µS/cm"]
    assert client.post("/api/meters", json={"name": "M", "units": ["µS/cm"]}).status_code == 409
    listed = client.get("/api/meters").get_json()
    assert [m["name"] for m in listed["meters"]] == ["m"] and len(listed["presets"]) >= 3


def test_history_and_replicates_from_the_log(client):
    base = {"site": "Block 3", "sample": "paste", "compensated": True, "unit": "dS/m",
            "depth_cm": "15"}
    for i, v in enumerate(["2.0", "2.1", "1.9", "2.0", "2.2", "2.1"]):
        day = dt.date(2026, 3, 1 + i).isoformat()
        client.post("/api/readings", json={**base, "value": v, "taken_at": day + "T09:00"})
    jump = client.post("/api/preview", json={**base, "value": "6.5"}).get_json()
    assert "history_jump" in {f["code"] for f in jump["flags"]}
    # another depth has no history
    other = client.post("/api/preview", json={**base, "depth_cm": "60", "value": "6.5"}).get_json()
    assert "history_jump" not in {f["code"] for f in other["flags"]}
    rep = {**base, "replicate_group": "S1", "taken_at": "2026-04-01T10:00"}
    client.post("/api/readings", json={**rep, "value": "3.0"})
    second = client.post("/api/readings", json={**rep, "value": "4.0"}).get_json()
    assert "replicate_spread" in second["flags"]


def test_acknowledge_a_flag(client):
    rec = client.post("/api/readings", json={"site": "W", "sample": "water", "value": "1",
                                             "unit": "dS/m"}).get_json()
    assert "temperature_unknown" in rec["flags"]
    r = client.post(f"/api/readings/{rec['uuid']}/ack", json={"code": "temperature_unknown",
                                                              "note": "meter has ATC, box unticked"})
    assert r.status_code == 201 and r.get_json()[0]["note"].startswith("meter has ATC")
    assert client.post(f"/api/readings/{rec['uuid']}/ack",
                       json={"code": "over_range", "note": "x"}).status_code == 400
    assert client.post(f"/api/readings/{rec['uuid']}/ack",
                       json={"code": "temperature_unknown", "note": ""}).status_code == 400
    page = client.get(f"/sites/{rec['site_id']}").get_data(as_text=True)
    assert "meter has ATC, box unticked" in page


def test_cli_meter_range_and_resolution():
    import json
    import os
    import subprocess
    import sys
    from pathlib import Path
    root = Path(__file__).resolve().parent.parent
    p = subprocess.run([sys.executable, "-m", "fieldapp", "convert", "1999", "µS/cm", "--sample",
                        "water", "--compensated", "--meter-range", "0:1999", "--resolution", "1",
                        "--json"], capture_output=True, text=True, cwd=root,
                       env=dict(os.environ, PYTHONPATH=str(root)))
    assert p.returncode == 0, p.stderr
    assert "over_range" in {f["code"] for f in json.loads(p.stdout)["flags"]}
    bad = subprocess.run([sys.executable, "-m", "fieldapp", "convert", "1", "dS/m",
                          "--meter-range", "5"], capture_output=True, text=True, cwd=root,
                         env=dict(os.environ, PYTHONPATH=str(root)))
    assert bad.returncode == 2 and "MIN:MAX" in bad.stderr


def test_calibration_flag_uses_the_check_valid_when_the_reading_was_taken(client):
    client.post("/api/meters", json={"preset": "pocket tester 0-1999 µS/cm", "name": "t"})
    client.post("/api/calibrations", json={"meter": "t", "value": "1600", "unit": "µS/cm",
                                           "compensated": True})          # fails today
    r = {"site": "B", **WATER, "value": "900", "unit": "µS/cm", "meter": "t"}
    before = client.post("/api/preview", json={**r, "taken_at": "2020-01-01T09:00"}).get_json()
    now = client.post("/api/preview", json=r).get_json()
    assert "calibration_drift" in {f["code"] for f in now["flags"]}
    codes_before = {f["code"] for f in before["flags"]}
    assert "calibration_drift" not in codes_before and "calibration_stale" in codes_before


def test_history_of_zeros_gives_a_finite_flag():
    # a site whose earlier readings were all 0 (distilled-water blanks): no division by zero
    hist = lambda k: {"history_median": 0.0, "history_mad": 0.0, "history_n": 6}
    c, r = codes({"sample": "water", "compensated": True, "value": "2", "unit": "dS/m"}, hist)
    f = next(f for f in r["flags"] if f["code"] == "history_jump")
    import math
    assert math.isfinite(f["data"]["robust_z"])
    assert not flagged("history_jump", {"sample": "water", "compensated": True, "value": "0.005",
                                        "unit": "dS/m"}, hist)
