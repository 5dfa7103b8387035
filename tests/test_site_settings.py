"""Site settings through Flask's test client: POST /api/sites and PATCH
/api/sites/<id> (name, kind, crop, texture, SP, position, notes), refused
values and wrong JSON types (400 naming the field, nothing changed), a rename
onto another site's name (409), the append-only history of every change
(GET /api/sites/<id>/history, schema 006) and the interpretation that follows
the settings (Maas-Hoffman yield, FAO 29 leaching requirement)."""
from __future__ import annotations

import sqlite3

import pytest

from fieldapp import store

# Store, API and CSV behaviour: every test here runs on SQLite and on PostgreSQL
# (conftest.py; the PostgreSQL half needs FIELDAPP_TEST_PG, set by tests/run.sh).
BOTH_BACKENDS = True


def make(client, **kw):
    r = client.post("/api/sites", json={"name": "Block 3", **kw})
    assert r.status_code == 201, r.get_json()
    return r.get_json()


def history(client, sid):
    r = client.get(f"/api/sites/{sid}/history")
    assert r.status_code == 200
    return r.get_json()


def test_creation_is_the_first_entry_of_the_history(client):
    s = make(client, kind="orchard", crop="Tomato", texture="Clay Loam", sp_pct="48,5",
             latitude="10.0012", longitude=-20.0031, notes="south end wetter")
    assert s["kind"] == "orchard" and s["kind_label"] == "Orchard or vineyard"
    assert s["crop"] == "tomato" and s["texture"] == "clay loam" and s["sp_pct"] == 48.5
    h = history(client, s["id"])
    assert len(h) == 1 and h[0]["action"] == "created" and h[0]["change_no"] == 1
    rows = {r["field"]: r for r in h[0]["rows"]}
    assert set(rows) == {"name", "kind", "crop", "texture", "sp_pct", "latitude", "longitude",
                         "notes"}
    assert all(r["old_value"] is None for r in rows.values())
    assert rows["sp_pct"]["new_value"] == "48.5" and rows["longitude"]["new_value"] == "-20.0031"
    assert "crop tomato" in h[0]["text"] and "UTC" in h[0]["when"]


def test_a_site_made_by_a_reading_has_its_creation_kept(client):
    r = client.post("/api/readings", json={"site": "Bench 4", "sample": "feed", "value": "2.2",
                                           "unit": "mS/cm", "compensated": True})
    assert r.status_code == 201
    sid = r.get_json()["site_id"]
    h = history(client, sid)
    assert [c["action"] for c in h] == ["created"]
    assert {x["field"]: x["new_value"] for x in h[0]["rows"]} == {"name": "Bench 4",
                                                                 "kind": "field"}


def test_every_change_is_kept_with_old_and_new_value(client):
    sid = make(client, crop="tomato")["id"]
    r = client.patch(f"/api/sites/{sid}", json={"crop": "pepper", "kind": "greenhouse"})
    assert r.status_code == 200 and r.get_json()["change_no"] == 2
    assert r.get_json()["crop"] == "pepper" and r.get_json()["kind"] == "greenhouse"
    # sending what is stored already changes nothing and keeps no entry
    same = client.patch(f"/api/sites/{sid}", json={"crop": "Pepper", "name": "Block 3"})
    assert same.status_code == 200 and same.get_json()["change_no"] is None
    client.patch(f"/api/sites/{sid}", json={"sp_pct": 48, "notes": "drip"})
    client.patch(f"/api/sites/{sid}", json={"sp_pct": None, "kind": "water_source"})
    h = history(client, sid)
    assert [c["change_no"] for c in h] == [1, 2, 3, 4]
    assert h[1]["text"] == "kind field → greenhouse bench or bed; crop tomato → pepper"
    assert h[2]["text"] == "saturation percentage (SP) not set → 48 %; notes not set → “drip”"
    assert {(x["field"], x["old_value"], x["new_value"]) for x in h[3]["rows"]} == {
        ("kind", "greenhouse", "water_source"), ("sp_pct", "48.0", None)}


@pytest.mark.parametrize("body,field", [
    ({"name": 5}, "name"),
    ({"name": ["Block 4"]}, "name"),
    ({"name": "   "}, "name"),
    ({"kind": "barn"}, "kind"),
    ({"kind": 3}, "kind"),
    ({"kind": None}, "kind"),
    ({"crop": 5}, "crop"),
    ({"crop": ["tomato"]}, "crop"),
    ({"crop": "moonflower"}, "crop"),
    ({"texture": {"name": "loam"}}, "texture"),
    ({"texture": "moon dust"}, "texture"),
    ({"sp_pct": True}, "sp_pct"),
    ({"sp_pct": "1,500"}, "sp_pct"),
    ({"sp_pct": 2}, "sp_pct"),
    ({"latitude": [10]}, "latitude"),
    ({"latitude": {"deg": 10}}, "latitude"),
    ({"latitude": "95"}, "latitude"),
    ({"longitude": "abc"}, "longitude"),
    ({"longitude": -181}, "longitude"),
    ({"notes": 7}, "notes"),
    ({"notes": "x" * 2001}, "notes"),
    ([{"crop": "tomato"}], "body"),
    ("tomato", "body"),
])
def test_wrong_values_and_json_types_are_refused_with_a_message(client, body, field):
    sid = make(client, crop="tomato", latitude=10.0)["id"]
    before = (client.get(f"/api/sites/{sid}").get_json(), history(client, sid))
    r = client.patch(f"/api/sites/{sid}", json=body)
    assert r.status_code == 400
    out = r.get_json()
    assert out["field"] == field and len(out["error"]) > 10
    assert (client.get(f"/api/sites/{sid}").get_json(), history(client, sid)) == before
    # the same body creating a site is refused as well, and creates nothing
    if isinstance(body, dict) and field != "name":
        n = len(client.get("/api/sites").get_json())
        r = client.post("/api/sites", json={"name": "Other", **body})
        assert r.status_code == 400 and r.get_json()["field"] == field
        assert len(client.get("/api/sites").get_json()) == n


def test_rename_onto_another_sites_name_is_a_conflict(client):
    a = make(client)["id"]
    b = client.post("/api/sites", json={"name": "Block 4"}).get_json()["id"]
    before = history(client, b)
    r = client.patch(f"/api/sites/{b}", json={"name": "block 3", "crop": "tomato"})
    assert r.status_code == 409 and r.get_json()["field"] == "name"
    assert client.get(f"/api/sites/{b}").get_json()["name"] == "Block 4"
    assert client.get(f"/api/sites/{b}").get_json()["crop"] is None     # all or nothing
    assert history(client, b) == before
    # a change of case on the site's own name is a rename, not a conflict
    r = client.patch(f"/api/sites/{a}", json={"name": "BLOCK 3"})
    assert r.status_code == 200 and r.get_json()["name"] == "BLOCK 3"


def test_readings_sent_under_the_former_name_reach_the_renamed_site(client):
    sid = make(client, crop="tomato")["id"]
    body = {"uuid": "reading-0001", "site": "Block 3", "sample": "water", "value": "1.0",
            "unit": "dS/m", "compensated": True}
    assert client.post("/api/readings", json=body).status_code == 201
    assert client.patch(f"/api/sites/{sid}", json={"name": "Block 3 north"}).status_code == 200
    # a tablet's queue resends the same reading under the old name: no conflict, no copy
    again = client.post("/api/readings", json=body)
    assert again.status_code == 200 and again.get_json()["site"] == "Block 3 north"
    # a reading queued before the rename lands on the renamed site, not a new one
    r = client.post("/api/readings", json={**body, "uuid": "reading-0002", "value": "1.1"})
    assert r.status_code == 201 and r.get_json()["site_id"] == sid
    assert [s["name"] for s in client.get("/api/sites").get_json()] == ["Block 3 north"]
    # the old name may be given to a new site on purpose
    assert client.post("/api/sites", json={"name": "Block 3"}).status_code == 201
    r = client.post("/api/readings", json={**body, "uuid": "reading-0003"})
    assert r.get_json()["site_id"] != sid


def test_history_is_append_only(client, db):
    sid = make(client)["id"]
    client.patch(f"/api/sites/{sid}", json={"crop": "barley"})
    with pytest.raises(sqlite3.IntegrityError):
        db.execute("UPDATE site_history SET new_value = 'wheat'")
    with pytest.raises(sqlite3.IntegrityError):
        db.execute("DELETE FROM site_history")
    assert len(store.site_history(db, sid)) == 3     # name, kind; then crop


def test_unknown_site_is_404(client):
    assert client.patch("/api/sites/999", json={"crop": "tomato"}).status_code == 404
    assert client.get("/api/sites/999/history").status_code == 404
    assert client.get("/sites/999/settings").status_code == 404


def test_existing_sites_get_their_settings_on_record_when_the_history_begins(tmp_path):
    path = tmp_path / "old.sqlite3"
    conn = sqlite3.connect(path, isolation_level=None)
    for version, sql in store._migrations():
        if version <= 5:
            for stmt in store._split_sql(sql):
                conn.execute(stmt)
            conn.execute(f"PRAGMA user_version = {version}")
    conn.execute("INSERT INTO sites (name, crop, kind, sp_pct, created_at) VALUES "
                 "('Old bench', 'cucumber', 'greenhouse', 60, '2026-01-01T00:00:00+00:00')")
    conn.close()
    db = store.connect(path)
    assert db.execute("PRAGMA user_version").fetchone()[0] >= 6
    rows = store.site_history(db, 1)
    assert {(r["field"], r["new_value"]) for r in rows} == {
        ("name", "Old bench"), ("kind", "greenhouse"), ("crop", "cucumber"), ("sp_pct", "60.0")}
    assert {r["action"] for r in rows} == {"existing"}
    row, no = store.change_site_settings(db, 1, {"crop": "tomato"})
    assert no == 2 and row["crop"] == "tomato"
    db.close()


# ------------------------------------------------------------ interpretation

def test_setting_the_crop_brings_the_maas_hoffman_yield(client):
    sid = make(client)["id"]
    assert client.post("/api/readings", json={"site": "Block 3", "sample": "paste",
                                              "value": "4.4", "unit": "dS/m",
                                              "compensated": True, "depth_cm": 30}).status_code == 201
    s = client.get(f"/api/sites/{sid}/summary").get_json()
    assert s["soil"]["root_zone"]["relative_yield_pct"] is None
    assert "expected yield" in s["needs_crop"]
    page = client.get(f"/sites/{sid}").get_data(as_text=True)
    assert f'href="/sites/{sid}/settings#s-crop"' in page
    client.patch(f"/api/sites/{sid}", json={"crop": "tomato"})
    s = client.get(f"/api/sites/{sid}/summary").get_json()
    # Maas-Hoffman, tomato threshold 2.5 dS/m, slope 9.9 %/(dS/m) (Maas 1990):
    # Y = 100 − 9.9 × (4.4 − 2.5) = 81.19 %
    assert s["soil"]["root_zone"]["relative_yield_pct"] == pytest.approx(81.19, abs=0.05)
    assert s["needs_crop"] is None
    assert "Expected tomato yield about 81 %" in " ".join(s["headline"])


def test_a_water_source_site_reads_like_water(client):
    sid = make(client, kind="water_source")["id"]
    s = client.get(f"/api/sites/{sid}/summary").get_json()
    assert s["water"] is None and "irrigation water" in s["water_missing"]
    client.post("/api/readings", json={"site": "Block 3", "sample": "water", "value": "1.0",
                                       "unit": "dS/m", "compensated": True})
    s = client.get(f"/api/sites/{sid}/summary").get_json()
    # FAO 29 Table 1: ECw 0.7-3.0 dS/m is a slight to moderate restriction
    assert s["water"]["hazard"] == "slight_to_moderate"
    assert s["water"]["leaching"] is None and "leaching requirement" in s["needs_crop"]
    client.patch(f"/api/sites/{sid}", json={"crop": "tomato"})
    s = client.get(f"/api/sites/{sid}/summary").get_json()
    # FAO 29 eq. 7: LR = ECw / (5 ECe − ECw) = 1.0 / (5 × 2.5 − 1.0) = 0.0870 (tomato ECe 2.5)
    assert s["water"]["leaching"]["lr_100"] == pytest.approx(1.0 / 11.5, rel=1e-3)
    assert "water_missing" not in s and s["needs_crop"] is None


def test_a_greenhouse_asks_for_feed_and_leachate_and_an_orchard_reads_like_a_field(client):
    gh = make(client, kind="greenhouse", crop="cucumber")["id"]
    assert "feed and the leachate" in client.get(f"/api/sites/{gh}/summary").get_json()[
        "greenhouse_missing"]
    orch = client.post("/api/sites", json={"name": "Orchard 1", "kind": "orchard",
                                           "crop": "tomato"}).get_json()["id"]
    client.post("/api/readings", json={"site": "Orchard 1", "sample": "paste", "value": "4.4",
                                       "unit": "dS/m", "compensated": True, "depth_cm": 30})
    s = client.get(f"/api/sites/{orch}/summary").get_json()
    assert s["soil"]["root_zone"]["relative_yield_pct"] == pytest.approx(81.19, abs=0.05)
    assert "greenhouse_missing" not in s


def test_later_readings_use_the_new_sp(client):
    sid = make(client, texture="loam")["id"]
    client.patch(f"/api/sites/{sid}", json={"sp_pct": "50"})
    rec = client.post("/api/readings", json={"site": "Block 3", "sample": "extract",
                                             "ratio": "1:5", "value": "0.5", "unit": "dS/m",
                                             "compensated": True}).get_json()
    # ECe by SP dilution: 0.5 × 100 × 5 / 50 = 5.0 dS/m (the dilution formula itself)
    assert rec["ece_dS_m"] == pytest.approx(5.0, rel=1e-6)


def test_settings_pages_render(client):
    sid = make(client, crop="tomato")["id"]
    client.patch(f"/api/sites/{sid}", json={"crop": "pepper"})
    page = client.get(f"/sites/{sid}/settings").get_data(as_text=True)
    assert "crop tomato → pepper" in page and "Changed on" in page
    assert 'id="s-kind"' in page and "Water source (well, canal, tank)" in page
    assert "style=" not in page and "<script>" not in page
    new = client.get("/sites/new").get_data(as_text=True)
    assert "Set up the site" in new
    sites = client.get("/sites").get_data(as_text=True)
    assert f'href="/sites/{sid}/settings"' in sites and 'href="/sites/new"' in sites
    assert f'href="/sites/{sid}/settings"' in client.get(f"/sites/{sid}").get_data(as_text=True)
