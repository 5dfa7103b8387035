"""Site views through Flask's test client: the site page's summary and chart,
the visit report (every reading of the visit, with status, flags and
acknowledgements), the JSON summary, the map and the target ranges."""
from __future__ import annotations

import datetime as dt
import re
import xml.etree.ElementTree as ET

import pytest

# Store, API and CSV behaviour: every test here runs on SQLite and on PostgreSQL
# (conftest.py; the PostgreSQL half needs FIELDAPP_TEST_PG, set by tests/run.sh).
BOTH_BACKENDS = True

NS = {"s": "http://www.w3.org/2000/svg"}


def save(client, **kw):
    body = {"site": "Block 3", "sample": "paste", "unit": "dS/m", "compensated": True,
            "taken_at": "2026-05-14T09:30:00+02:00", **kw}
    r = client.post("/api/readings", json=body)
    assert r.status_code == 201, r.get_json()
    return r.get_json()


@pytest.fixture
def block3(client):
    """A tomato field with two visits; the second has a void, a corrected and
    a flagged (and acknowledged) reading."""
    assert client.post("/api/sites", json={"name": "Block 3", "crop": "Tomato",
                                            "latitude": 10.0012, "longitude": 20.0031}).status_code == 201
    first = [save(client, value=v, depth_cm=d, taken_at="2026-04-01T09:00:00+02:00")
             for v, d in ((2.0, 15), (3.0, 45))]
    second = [save(client, value=3.1, depth_cm=15), save(client, value=4.4, depth_cm=45),
              save(client, value=9.9, depth_cm=15, note="probe not rinsed"),
              save(client, value=2.9, depth_cm=30, temp_c=48, compensated=False)]
    voided = second[2]
    assert client.post(f"/api/readings/{voided['uuid']}/void",
                       json={"reason": "probe not rinsed"}).status_code == 200
    corr = client.post(f"/api/readings/{second[0]['uuid']}/correct", json={"value": "3.2"})
    assert corr.status_code == 201
    flagged = second[3]
    assert "temperature_range" in flagged["flags"]
    assert client.post(f"/api/readings/{flagged['uuid']}/ack",
                       json={"code": "temperature_range", "note": "sample left in the sun"}).status_code == 201
    return {"first": first, "second": second, "correction": corr.get_json(), "voided": voided,
            "flagged": flagged}


def site_id(client, name="Block 3"):
    return next(s["id"] for s in client.get("/api/sites").get_json() if s["name"] == name)


def test_report_contains_every_reading_of_the_visit(client, block3):
    sid = site_id(client)
    html = client.get(f"/sites/{sid}/report").get_data(as_text=True)   # latest visit
    uuids = re.findall(r'class="report-reading status-\w+" data-uuid="([^"]+)"', html)
    expected = [r["uuid"] for r in block3["second"]] + [block3["correction"]["uuid"]]
    assert sorted(uuids) == sorted(expected)
    assert not {r["uuid"] for r in block3["first"]} & set(uuids)   # another visit
    # as entered, status and reasons
    for v in ("3.1 dS/m", "4.4 dS/m", "9.9 dS/m", "2.9 dS/m", "3.2 dS/m"):
        assert v in html
    assert "status-void" in html and "Void: probe not rinsed" in html
    assert "status-corrected" in html and "Replaced by a correction" in html
    assert "48 °C" in html                     # the temperature as entered
    # the flag and its acknowledgement
    assert 'data-code="temperature_range"' in html
    assert "Acknowledged" in html and "sample left in the sun" in html
    # charts, interpretation and cautions
    assert html.count('class="chart trend"') == 1 and 'class="chart profile"' in html
    assert "Interpretation at this visit" in html and "Maas" in html
    assert "laboratory" in html and "extension" in html
    assert "5 readings (3 current, 1 corrected, 1 void)" in " ".join(html.split())


def test_report_chart_uses_current_readings_up_to_the_visit(client, block3):
    sid = site_id(client)
    visits = client.get(f"/api/sites/{sid}/summary").get_json()["visits"]
    first_visit = [v for v in visits if v["visit_date"] == "2026-04-01"][0]
    html = client.get(f"/sites/{sid}/report?visit={first_visit['id']}").get_data(as_text=True)
    svg = re.search(r"<svg[^>]*class=\"chart trend\".*?</svg>", html, re.S).group(0)
    keys = set(re.findall(r'data-key="([^"]+)"', svg)) - {"", "yield_100", "yield_90", "yield_75",
                                                        "yield_50", "non_saline",
                                                        "very_slightly_saline", "slightly_saline",
                                                        "moderately_saline", "strongly_saline"}
    assert keys == {r["uuid"] for r in block3["first"]}
    assert "this visit" in svg


def test_report_refuses_a_visit_of_another_site_and_handles_an_empty_site(client, block3):
    sid = site_id(client)
    assert client.post("/api/sites", json={"name": "Empty"}).status_code == 201
    empty = site_id(client, "Empty")
    r = client.get(f"/sites/{empty}/report")
    assert r.status_code == 200 and "no visit to report" in r.get_data(as_text=True)
    vid = client.get(f"/api/sites/{sid}/summary").get_json()["visits"][0]["id"]
    assert client.get(f"/sites/{empty}/report?visit={vid}").status_code == 404
    assert client.get(f"/sites/{sid}/report?visit=abc").status_code == 404
    assert client.get("/sites/999/report").status_code == 404


def test_site_page_shows_the_summary_and_one_mark_per_current_reading(client, block3):
    sid = site_id(client)
    html = client.get(f"/sites/{sid}").get_data(as_text=True)
    assert 'id="site-state"' in html and "Visit report" in html
    svg = re.search(r"<svg[^>]*class=\"chart trend\".*?</svg>", html, re.S).group(0)
    root = ET.fromstring(svg)
    marks = root.findall(".//s:path[@data-key]", NS)
    current = [r for r in client.get("/api/readings?site=Block 3").get_json() if r["status"] == "current"]
    assert len(marks) == len(current) == 5
    assert {m.get("data-key") for m in marks} == {r["uuid"] for r in current}
    # the flagged reading carries the ring
    flagged = [m for m in marks if m.get("data-key") == block3["flagged"]["uuid"]][0]
    assert "flagged" in flagged.get("class")
    # nothing is fetched from another host
    assert not re.search(r'(src|href)="(https?:)?//', html)


def test_summary_json(client, block3):
    sid = site_id(client)
    s = client.get(f"/api/sites/{sid}/summary").get_json()
    rz = s["soil"]["root_zone"]
    # latest visit, current readings: 3.2 (15 cm, the correction), 4.4 (45 cm) and the
    # 30 cm reading, 2.9 dS/m shown at 48 °C without ATC, compensated down to 25 °C
    hot = client.get(f"/api/readings/{block3['flagged']['uuid']}").get_json()
    assert hot["ece_dS_m"] < 2.9
    assert rz["ece_dS_m"] == pytest.approx((3.2 + hot["ece_dS_m"] + 4.4) / 3, rel=1e-3)
    assert rz["n_depths"] == 3
    assert s["crop"]["name"] == "tomato" and s["charts"][0]["id"] == "soil"
    assert s["profile"]["date"] == "2026-05-14"
    early = client.get(f"/api/sites/{sid}/summary?as_of=2026-04-01").get_json()
    assert early["soil"]["root_zone"]["ece_dS_m"] == pytest.approx(2.5)
    bad = client.get(f"/api/sites/{sid}/summary?as_of=yesterday")
    assert bad.status_code == 400 and bad.get_json()["field"] == "as_of"
    assert client.get("/api/sites/999/summary").status_code == 404


def test_targets_api(client, block3):
    body = {"crop": "tomato", "measure": "ece", "lo_dS_m": "0", "hi_dS_m": "2.5", "note": "plan"}
    r = client.post("/api/targets", json=body)
    assert r.status_code == 201
    tid = r.get_json()["id"]
    r = client.post("/api/targets", json=dict(body, hi_dS_m="3,0"))   # replace, decimal comma
    assert r.status_code == 200 and r.get_json()["id"] == tid and r.get_json()["hi_dS_m"] == 3.0
    assert [t["hi_dS_m"] for t in client.get("/api/targets?crop=Tomato").get_json()] == [3.0]
    sid = site_id(client)
    s = client.get(f"/api/sites/{sid}/summary").get_json()
    assert s["soil"]["root_zone"]["target"]["where"] == "above"
    html = client.get(f"/sites/{sid}").get_data(as_text=True)
    assert "above your target" in html and 'data-key="target_high"' in html
    bad = client.post("/api/targets", json=dict(body, lo_dS_m="4", hi_dS_m="3"))
    assert bad.status_code == 400 and bad.get_json()["field"] == "hi_dS_m"
    assert client.get("/api/targets").get_json()[0]["hi_dS_m"] == 3.0   # nothing lost
    bad = client.post("/api/targets", json=dict(body, crop="moon cactus"))
    assert bad.status_code == 400 and bad.get_json()["field"] == "crop"
    assert client.delete(f"/api/targets/{tid}", json={}).status_code == 200
    assert client.delete(f"/api/targets/{tid}", json={}).status_code == 404
    assert client.get("/api/targets").get_json() == []


def test_map_lists_sites_distances_and_escapes_names(client):
    for name, lat, lon in (("Block 3", 10.0012, 20.0031), ("<b>Block 7</b>", 10.0040, 20.0075)):
        assert client.post("/api/sites", json={"name": name, "latitude": lat,
                                                "longitude": lon}).status_code == 201
    assert client.post("/api/sites", json={"name": "Bench 4"}).status_code == 201
    html = client.get("/map").get_data(as_text=True)
    assert "<b>Block 7</b>" not in html and "&lt;b&gt;Block 7&lt;/b&gt;" in html
    assert html.count('class="site-point"') == 2
    assert "570 m" in html                    # 0.57 km apart (haversine)
    assert "Without coordinates" in html and "Bench 4" in html
    assert 'src="/static/map.js"' in html
    assert not re.search(r'(src|href)="(https?:)?//', html)


def test_map_with_two_sites_on_the_same_spot(client):
    for name in ("Bench 4", "Bench 5", "Bench 6"):
        assert client.post("/api/sites", json={"name": name, "latitude": 10.0021,
                                                "longitude": 20.0010}).status_code == 201
    html = client.get("/map").get_data(as_text=True)
    assert html.count('class="site-point"') == 3
    assert "nearest: 2 Bench 5, 0 m" in html


def test_a_recent_check_passes_and_a_failed_one_stays_failed():
    from fieldapp import meters
    # the limit is a setting (common practice: check every field day); a failed check
    # never turns into 'due' or 'passed' with age
    now = dt.datetime(2026, 11, 30, 12, 0, tzinfo=dt.timezone.utc)
    ok = {"checked_at": "2026-11-29T08:00:00+00:00", "passed": True, "deviation_pct": 0.5}
    assert meters.check_status(ok, 7, now)["state"] == "passed"
    assert meters.check_status(ok, 1, now)["state"] == "due"
    old_fail = {**ok, "checked_at": "2026-08-01T08:00:00+00:00", "passed": False}
    assert meters.check_status(old_fail, 7, now)["state"] == "failed"
    assert meters.check_status(None, 7, now)["state"] == "none"


def test_display_digits_follow_the_usual_naming():
    from fieldapp import meters
    # a "3½-digit" display counts to 1999, a 4-digit one to 9999, a 3-digit one to 999
    assert meters.display_digits(1999, 1) == "3½"
    assert meters.display_digits(19.99, 0.01) == "3½"
    assert meters.display_digits(20.0, 0.01) == "4"
    assert meters.display_digits(9990, 10) == "3"
    assert meters.display_digits(199.9, None) is None


def test_meter_presets_are_described_as_classes_of_meter(client):
    from fieldapp import meters
    presets = meters.presets()
    labels = [p["label"] for p in presets]
    assert len(set(labels)) == len(labels)              # each class tells itself apart
    multi = next(p for p in presets if len(p["ranges"]) > 1)
    assert multi["class"]["decades"] == len(multi["ranges"]) == 4
    assert multi["label"].startswith("autoranging EC meter")
    page = client.get("/meters").get_data(as_text=True)
    for p in presets:
        assert p["label"] in page
    assert "3½-digit display" in page and "4 decades in 4 ranges" in page
    assert "no ATC" in page and "not any one product" in page
    # a meter made from a class by its label gets all of the class's ranges
    r = client.post("/api/meters", json={"preset": multi["label"], "name": "handheld 1"})
    assert r.status_code == 201 and len(r.get_json()["ranges"]) == 4
