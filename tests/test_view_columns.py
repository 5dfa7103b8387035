"""The values the site views read as real columns (schema 015): copied from
the result JSON by every INSERT and, for an older log, by the migration; the
readings stay append-only; the site summary, charts and profile read from
the columns say exactly what they said when read from every reading's JSON."""
from __future__ import annotations

import io
import json
import sqlite3
import uuid as uuidlib

import pytest

from fieldapp import csvio, demo, interpret, store
from fieldapp.records import build_record, save_reading

from test_flag_rows import _log_at_schema, _plain_insert

# Store, API and CSV behaviour: every test here runs on SQLite and on PostgreSQL
# (conftest.py; the PostgreSQL half needs FIELDAPP_TEST_PG, set by tests/run.sh).
BOTH_BACKENDS = True

MOIST = {"sample": "extract", "ratio": "1:5", "value": "0.5", "unit": "mS/cm", "temp_c": "20",
         "texture": "loam", "depth_cm": "15", "theta_g_pct": "22", "matric_MPa": "-0.1"}
PASTE = {"sample": "paste", "value": "4.1", "unit": "dS/m", "compensated": True, "depth_cm": "45"}
WATER = {"sample": "water", "value": "900", "unit": "dS/m", "temp_c": "20"}     # unit_slip


def check_columns(conn):
    """Every reading's view columns hold what its result JSON holds; returns
    how many readings carry a soil solution."""
    n = 0
    for r in conn.execute("SELECT * FROM readings"):
        res = json.loads(r["result_json"])
        assert r["ece_uncertainty_pct"] == res["ece_uncertainty_pct"]
        ss = res.get("soil_solution") or {}
        n += bool(ss)
        for c in ("ec_fc_dS_m", "psi_s_fc_MPa", "ec_sw_dS_m", "psi_s_sw_MPa", "psi_total_MPa",
                  "margin_to_pwp_MPa"):
            assert r[c] == ss.get(c), (c, r[c], ss.get(c))
    return n


def test_every_insert_path_fills_the_columns(db, tmp_path):
    save_reading(db, {**MOIST, "site": "Block 3"})
    save_reading(db, {**PASTE, "site": "Block 3"})
    save_reading(db, {**WATER, "site": "Block 3"})
    recs = [build_record({**p, "site": "Block 4", "taken_at": "2026-05-14T09:00:00+02:00"})
            for p in (MOIST, PASTE, WATER)]
    with store.transaction(db):
        store.insert_readings_bulk(db, recs)
    assert check_columns(db) >= 4        # moisture and paste readings have a soil solution
    assert db.execute("SELECT COUNT(*) FROM readings WHERE ece_uncertainty_pct IS NOT NULL"
                      ).fetchone()[0] >= 2
    buf = io.StringIO()
    csvio.export(db, buf)
    (tmp_path / "other").mkdir()
    other = store.connect(tmp_path / "other" / store.DB_NAME)
    try:
        assert csvio.import_csv(other, io.StringIO(buf.getvalue()))["added"] == 6
        assert check_columns(other) >= 4
    finally:
        other.close()


def test_migration_fills_an_older_log_and_keeps_readings_append_only(tmp_path):
    path = tmp_path / store.DB_NAME
    conn = _log_at_schema(path, 14)
    conn.execute("INSERT INTO sites (name, created_at) VALUES ('Block 3', 'x')")
    conn.execute("INSERT INTO visits (site_id, visit_date) VALUES (1, '2026-05-14')")
    for i, p in enumerate((MOIST, PASTE, WATER, MOIST)):
        rec = build_record({**p, "site": "x", "taken_at": "2026-05-14T09:00:00+02:00",
                            "uuid": str(uuidlib.UUID(int=i + 1))})
        _plain_insert(conn, rec, 1, 1)
    trigger_sql = conn.execute("SELECT sql FROM sqlite_master WHERE name = "
                               "'readings_no_update'").fetchone()[0]
    conn.close()

    conn = store.connect(path)
    try:
        assert conn.execute("PRAGMA user_version").fetchone()[0] >= 15
        assert check_columns(conn) == 3
        assert conn.execute("SELECT sql FROM sqlite_master WHERE name = "
                            "'readings_no_update'").fetchone()[0] == trigger_sql
        with pytest.raises(sqlite3.DatabaseError, match="append-only"):
            conn.execute("UPDATE readings SET ece_uncertainty_pct = 1")
        with pytest.raises(sqlite3.DatabaseError, match="append-only"):
            conn.execute("DELETE FROM readings")
    finally:
        conn.close()


def test_the_api_record_is_unchanged(client):
    r = client.post("/api/readings", json={**MOIST, "site": "Block 3"})
    assert r.status_code == 201, r.get_json()
    body = r.get_json()
    for c in store.VIEW_COLUMNS:
        assert c not in body                   # the copies stay inside the store
    assert body["result"]["soil_solution"]["psi_s_sw_MPa"] is not None
    assert isinstance(body["flags"], list)


def _both(conn, site):
    full = [store.reading_dict(r) for r in store.list_readings(conn, site_id=site["id"],
                                                                  newest_first=False)]
    cols = store.view_readings(conn, site["id"])
    assert [r["uuid"] for r in cols] == [r["uuid"] for r in full]
    for a, b in zip(cols, full):
        assert a["flag_list"] == [{"code": f["code"], "severity": f["severity"]}
                                  for f in b["result"]["flags"]]
        assert a["flags"] == b["flags"]
    return full, cols


def test_views_from_columns_match_views_from_json(db):
    demo.load(db)
    # and a site with moisture readings, a correction, a void and two soil visits
    a, _ = save_reading(db, {**MOIST, "site": "Block 3", "taken_at": "2026-04-01T09:00:00+02:00"})
    save_reading(db, {**PASTE, "site": "Block 3", "taken_at": "2026-04-01T09:10:00+02:00"})
    save_reading(db, {**MOIST, "value": "0.7", "site": "Block 3",
                      "taken_at": "2026-05-01T09:00:00+02:00"})
    b, _ = save_reading(db, {**PASTE, "site": "Block 3", "taken_at": "2026-05-01T09:10:00+02:00"})
    save_reading(db, {**PASTE, "value": "5.0", "site": "Block 3", "supersedes": b["uuid"],
                      "taken_at": "2026-05-01T09:10:00+02:00"})
    save_reading(db, {**WATER, "site": "Block 3", "taken_at": "2026-05-01T09:20:00+02:00"})
    store.void_reading(db, a["uuid"], "probe not rinsed")
    store.update_site(db, store.get_site(db, "Block 3")["id"], crop="Tomato")
    sites = [dict(s) for s in store.list_sites(db)]
    assert len(sites) >= 5
    for site in sites:
        full, cols = _both(db, site)
        crop = interpret.site_crop(site)
        targets = store.list_targets(db, crop.name) if crop else []
        for as_of in (None, "2026-04-15"):
            assert interpret.site_summary(site, cols, targets, as_of=as_of) == \
                interpret.site_summary(site, full, targets, as_of=as_of)
            assert interpret.chart_specs(site, cols, targets, as_of=as_of) == \
                interpret.chart_specs(site, full, targets, as_of=as_of)
            assert interpret.profile_spec(site, cols, day=as_of) == \
                interpret.profile_spec(site, full, day=as_of)
    s = interpret.site_summary(dict(store.get_site(db, "Block 3")),
                               store.view_readings(db, store.get_site(db, "Block 3")["id"]))
    assert s["soil"]["depths"][0]["moisture"]["psi_s_sw_MPa"] is not None
    assert s["soil"]["depths"][0]["uncertainty_pct"] is not None
