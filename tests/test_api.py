"""The JSON API with Flask's test client: save, resend, correct, void, refuse."""
from __future__ import annotations

import sqlite3

import pytest

from fieldapp import store

# Store, API and CSV behaviour: every test here runs on SQLite and on PostgreSQL
# (conftest.py; the PostgreSQL half needs FIELDAPP_TEST_PG, set by tests/run.sh).
BOTH_BACKENDS = True

READING = {"uuid": "11111111-2222-4333-8444-555555555555", "site": "Block 3",
           "sample": "extract", "value": "0.84", "unit": "mS/cm", "ratio": "1:5",
           "temp_c": "18", "texture": "clay loam", "depth_cm": "15",
           "meter": "pocket tester 1", "note": "north corner",
           "taken_at": "2026-05-14T09:30:00+02:00"}


def count(db):
    return db.execute("SELECT COUNT(*) FROM readings").fetchone()[0]


def test_preview_returns_the_convert_keys_and_stores_nothing(client, db):
    r = client.post("/api/preview", json=READING)
    assert r.status_code == 200
    body = r.get_json()
    for key in ("ec25_dS_m", "ece_dS_m", "ece_method", "psi_s_MPa", "psi_s_method",
                "psi_s_by_method", "tds_mg_L", "flags"):
        assert key in body
    # 0.84 mS/cm at 18 °C is lower than at 25 °C: compensation must raise it.
    assert body["ec25_dS_m"] > 0.84
    assert body["ece_dS_m"] > body["ec25_dS_m"]  # a 1:5 extract is diluted
    assert count(db) == 0


def test_preview_and_stored_row_agree(client):
    p = client.post("/api/preview", json=READING).get_json()
    s = client.post("/api/readings", json=READING).get_json()
    assert s["ec25_dS_m"] == p["ec25_dS_m"]
    assert s["ece_dS_m"] == p["ece_dS_m"]
    assert s["psi_s_MPa"] == p["psi_s_MPa"]
    assert s["result"]["flags"] == p["flags"]


def test_save_creates_site_and_resend_is_idempotent(client, db):
    r1 = client.post("/api/readings", json=READING)
    assert r1.status_code == 201
    rec = r1.get_json()
    assert rec["site"] == "Block 3" and rec["status"] == "current"
    assert rec["unit"] == "mS/cm" and rec["value"] == 0.84   # kept as displayed
    assert rec["taken_at"] == "2026-05-14T09:30:00+02:00"
    r2 = client.post("/api/readings", json=READING)
    assert r2.status_code == 200
    assert r2.get_json()["id"] == rec["id"]
    assert count(db) == 1
    listed = client.get("/api/readings?site=Block 3").get_json()
    assert [x["uuid"] for x in listed] == [READING["uuid"]]


def test_same_uuid_for_a_different_reading_is_refused(client, db):
    client.post("/api/readings", json=READING)
    r = client.post("/api/readings", json={**READING, "value": "9.9"})
    assert r.status_code == 409
    assert client.get(f"/api/readings/{READING['uuid']}").get_json()["value"] == 0.84


@pytest.mark.parametrize("change, field", [
    ({"value": "abc"}, "value"),
    ({"value": ""}, "value"),
    ({"value": "-3"}, "value"),
    ({"unit": "furlongs"}, "unit"),
    ({"ratio": "abc"}, "ratio"),
    ({"site": ""}, "site"),
    ({"site": "x" * 200}, "site"),
    ({"temp_c": "300"}, "temp_c"),
    ({"sample": "soup"}, "sample"),
    ({"texture": "marmalade"}, "texture"),
    ({"taken_at": "yesterday"}, "taken_at"),
    ({"depth_cm": "-5"}, "depth_cm"),
])
def test_bad_input_is_refused_with_the_field_and_stores_nothing(client, db, change, field):
    client.post("/api/readings", json={**READING, "uuid": "aaaaaaaa-0000-4000-8000-000000000000"})
    before = count(db)
    r = client.post("/api/readings", json={**READING, **change})
    assert r.status_code == 400
    body = r.get_json()
    assert body["field"] == field
    assert body["error"] and "Traceback" not in body["error"]
    assert count(db) == before


def test_body_that_is_not_json_object(client):
    r = client.post("/api/readings", data="not json", content_type="application/json")
    assert r.status_code == 400
    r = client.post("/api/readings", json=[1, 2])
    assert r.status_code == 400 and r.get_json()["field"] == "body"


def test_doubtful_value_is_stored_with_flags_not_refused(client):
    # No temperature and no ATC: saved, flagged as assumed 25 °C.
    r = client.post("/api/readings", json={"site": "Block 3", "sample": "water",
                                           "value": "1.2", "unit": "dS/m"})
    assert r.status_code == 201
    assert "temperature_unknown" in r.get_json()["flags"]


def test_correction_keeps_history(client):
    client.post("/api/readings", json=READING)
    r = client.post(f"/api/readings/{READING['uuid']}/correct", json={"value": "0.48"})
    assert r.status_code == 201
    new = r.get_json()
    assert new["supersedes_uuid"] == READING["uuid"] and new["value"] == 0.48
    listed = {x["uuid"]: x for x in client.get("/api/readings?site=Block 3").get_json()}
    assert listed[READING["uuid"]]["status"] == "corrected"
    assert listed[READING["uuid"]]["value"] == 0.84      # the old value is still there
    assert listed[new["uuid"]]["status"] == "current"
    # the old version cannot be corrected a second time
    r = client.post(f"/api/readings/{READING['uuid']}/correct", json={"value": "0.5"})
    assert r.status_code == 409


def test_void_keeps_row_and_reason(client):
    client.post("/api/readings", json=READING)
    r = client.post(f"/api/readings/{READING['uuid']}/void", json={"reason": "probe not rinsed"})
    assert r.status_code == 200
    rec = client.get(f"/api/readings/{READING['uuid']}").get_json()
    assert rec["status"] == "void" and rec["void_reason"] == "probe not rinsed"
    # voiding again changes nothing: the first reason stays
    r = client.post(f"/api/readings/{READING['uuid']}/void", json={"reason": "second try"})
    assert r.status_code == 200 and r.get_json()["void_reason"] == "probe not rinsed"


def test_void_needs_a_reason(client):
    client.post("/api/readings", json=READING)
    r = client.post(f"/api/readings/{READING['uuid']}/void", json={"reason": "  "})
    assert r.status_code == 400 and r.get_json()["field"] == "reason"


def test_readings_cannot_be_updated_or_deleted_in_the_database(client, db):
    client.post("/api/readings", json=READING)
    with pytest.raises(sqlite3.IntegrityError):
        db.execute("UPDATE readings SET value = 1")
    with pytest.raises(sqlite3.IntegrityError):
        db.execute("DELETE FROM readings")


def test_site_defaults_apply_to_readings(client):
    r = client.post("/api/sites", json={"name": "Block 9", "crop": "tomato", "sp_pct": "50"})
    assert r.status_code == 201
    rec = client.post("/api/readings", json={"site": "Block 9", "sample": "extract",
                                             "ratio": "1:5", "value": "0.5", "unit": "dS/m",
                                             "compensated": True}).get_json()
    # ECe by SP dilution: 0.5 × 100·5 / 50 = 5.0 dS/m (the dilution formula itself)
    assert rec["ece_method"].startswith("sp_dilution")
    assert rec["ece_dS_m"] == pytest.approx(5.0, rel=1e-6)
    assert rec["result"]["crop"]["name"].lower() == "tomato"


def test_site_validation(client):
    assert client.post("/api/sites", json={"name": "A", "latitude": "95"}).status_code == 400
    assert client.post("/api/sites", json={"name": "A", "crop": "moonflower"}).status_code == 400
    assert client.post("/api/sites", json={"name": "A"}).status_code == 201
    assert client.post("/api/sites", json={"name": "a"}).status_code == 409


def test_list_unknown_site_is_404(client):
    assert client.get("/api/readings?site=Nowhere").status_code == 404


def test_meta_lists_units_and_kinds(client):
    m = client.get("/api/meta").get_json()
    assert "µS/cm" in m["units"] and "dS/m" in m["units"]
    assert {s["key"] for s in m["samples"]} == {"paste", "extract", "water", "feed",
                                               "leachate", "drain", "sme", "media"}
    assert len(m["crops"]) >= 40
