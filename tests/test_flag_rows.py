"""Flags as rows of their own table (schema 014): made by the database in the
same transaction as every reading, whichever way it arrives, append-only,
filled for the readings of an older log by the migration, and the sites
list's "to check" count read from them."""
from __future__ import annotations

import io
import json
import sqlite3
import uuid as uuidlib

import pytest

from fieldapp import csvio, store
from fieldapp.records import build_record, save_reading

# Store, API and CSV behaviour: every test here runs on SQLite and on PostgreSQL
# (conftest.py; the PostgreSQL half needs FIELDAPP_TEST_PG, set by tests/run.sh).
BOTH_BACKENDS = True


def rows_of(conn, reading_id):
    return [tuple(r) for r in conn.execute(
        "SELECT code, severity FROM reading_flags WHERE reading_id = ? ORDER BY seq",
        (reading_id,))]


def from_json(conn, reading_id):
    """What the reading's own stored result says its flags are."""
    row = conn.execute("SELECT flags, result_json FROM readings WHERE id = ?",
                       (reading_id,)).fetchone()
    flags = json.loads(row["result_json"])["flags"]
    assert row["flags"] == ";".join(f["code"] for f in flags)     # the text column as before
    return [(f["code"], f["severity"]) for f in flags]


SLIP = {"sample": "water", "value": "900", "unit": "dS/m", "temp_c": "20"}   # unit_slip: error
PLAIN = {"sample": "water", "value": "1.2", "unit": "dS/m", "compensated": True}   # no flag


def test_a_save_writes_its_flag_rows(db):
    row, _ = save_reading(db, {**SLIP, "site": "Block 3"})
    got = rows_of(db, row["id"])
    assert ("unit_slip", "error") in got
    assert got == from_json(db, row["id"])
    plain, _ = save_reading(db, {**PLAIN, "site": "Block 3"})
    assert rows_of(db, plain["id"]) == [] == from_json(db, plain["id"])


def test_bulk_and_staged_import_write_flag_rows(db, tmp_path):
    recs = [build_record({**(SLIP if i % 2 else PLAIN), "site": f"Block {i % 3}",
                          "taken_at": f"2026-05-{10 + i:02d}T09:00:00+02:00"})
            for i in range(6)]
    with store.transaction(db):
        assert store.insert_readings_bulk(db, recs) == 6
    ids = [r[0] for r in db.execute("SELECT id FROM readings ORDER BY id")]
    for i in ids:
        assert rows_of(db, i) == from_json(db, i)
    assert sum(1 for i in ids if ("unit_slip", "error") in rows_of(db, i)) == 3

    # the staged path (csvio.import_rows -> store.finish_import_job: INSERT ... SELECT)
    buf = io.StringIO()
    csvio.export(db, buf)
    (tmp_path / "other").mkdir()
    other = store.connect(tmp_path / "other" / store.DB_NAME)
    try:
        out = csvio.import_csv(other, io.StringIO(buf.getvalue()))
        assert out["added"] == 6
        got = {r["uuid"]: rows_of(other, r["id"]) for r in other.execute(
            "SELECT id, uuid FROM readings")}
        want = {r["uuid"]: rows_of(db, r["id"]) for r in db.execute(
            "SELECT id, uuid FROM readings")}
        assert got == want
        for r in other.execute("SELECT id FROM readings"):
            assert rows_of(other, r["id"]) == from_json(other, r["id"])
    finally:
        other.close()


def test_a_refused_insert_leaves_no_flag_rows(db):
    save_reading(db, {**SLIP, "site": "Block 3", "uuid": "same-uuid-1"})
    before = db.execute("SELECT COUNT(*) FROM reading_flags").fetchone()[0]
    with pytest.raises(store.StoreError):          # the same uuid for another reading: 409
        save_reading(db, {**SLIP, "value": "800", "site": "Block 3", "uuid": "same-uuid-1"})
    assert db.execute("SELECT COUNT(*) FROM reading_flags").fetchone()[0] == before


def test_flag_rows_are_append_only(db):
    row, _ = save_reading(db, {**SLIP, "site": "Block 3"})
    with pytest.raises(sqlite3.DatabaseError, match="append-only"):
        db.execute("UPDATE reading_flags SET severity = 'info' WHERE reading_id = ?",
                   (row["id"],))
    with pytest.raises(sqlite3.DatabaseError, match="append-only"):
        db.execute("DELETE FROM reading_flags WHERE reading_id = ?", (row["id"],))
    assert ("unit_slip", "error") in rows_of(db, row["id"])


def _log_at_schema(path, version):
    """A log brought up to ``version`` only, as an older fieldapp left it."""
    conn = sqlite3.connect(path, isolation_level=None)
    conn.row_factory = sqlite3.Row
    for v, sql in store._migrations():
        if v > version:
            break
        conn.execute("BEGIN")
        for stmt in store._split_sql(sql):
            conn.execute(stmt)
        conn.execute(f"PRAGMA user_version = {v}")
        conn.execute("COMMIT")
    return conn


OLD_OPEN_FLAG_COUNTS = """
    SELECT r.site_id, COUNT(DISTINCT r.id) FROM readings r
    JOIN json_each(r.result_json, '$.flags') f
    WHERE json_extract(f.value, '$.severity') = 'error'
      AND NOT EXISTS (SELECT 1 FROM voids v WHERE v.reading_id = r.id)
      AND NOT EXISTS (SELECT 1 FROM readings n WHERE n.supersedes_id = r.id)
      AND NOT EXISTS (SELECT 1 FROM flag_acks a WHERE a.reading_id = r.id
                      AND a.code = json_extract(f.value, '$.code'))
    GROUP BY r.site_id"""


def _plain_insert(conn, rec, site_id, visit_id, supersedes_id=None):
    cols = ("uuid", "site_id", "visit_id", "supersedes_id") + store.INPUT_FIELDS \
        + store.COMPUTED_FIELDS + ("result_json", "app_version", "recorded_at")
    have = {r[1] for r in conn.execute("PRAGMA table_info(readings)")}
    cols = tuple(c for c in cols if c in have)      # an older schema lacks newer columns
    vals = {**rec, "site_id": site_id, "visit_id": visit_id, "supersedes_id": supersedes_id,
            "compensated": 1 if rec.get("compensated") else 0, "note": rec.get("note") or "",
            "recorded_at": "2026-05-14T07:00:00+00:00"}
    cur = conn.execute(f"INSERT INTO readings ({', '.join(cols)}) VALUES "
                       f"({', '.join('?' * len(cols))})", [vals.get(c) for c in cols])
    return cur.lastrowid


def test_migration_fills_the_rows_of_an_older_log(tmp_path):
    path = tmp_path / store.DB_NAME
    conn = _log_at_schema(path, 13)
    conn.execute("INSERT INTO sites (name, created_at) VALUES ('Block 3', 'x'), ('Bench 4', 'x')")
    conn.execute("INSERT INTO visits (site_id, visit_date) VALUES (1, '2026-05-14'), "
                 "(2, '2026-05-14')")
    ids = []
    for i in range(12):
        rec = build_record({**(SLIP if i % 3 else PLAIN), "site": "x",
                            "taken_at": "2026-05-14T09:00:00+02:00",
                            "uuid": str(uuidlib.UUID(int=i + 1))})
        ids.append(_plain_insert(conn, rec, 1 + i % 2, 1 + i % 2))
    # settle some: a void, a correction, an acknowledgement
    conn.execute("INSERT INTO voids (reading_id, reason, voided_at) VALUES (?, 'x', 'x')",
                 (ids[1],))
    fix = build_record({**PLAIN, "site": "x", "taken_at": "2026-05-14T09:00:00+02:00"})
    _plain_insert(conn, fix, 1, 1, supersedes_id=ids[2])
    conn.execute("INSERT INTO flag_acks (reading_id, code, note, acked_at) VALUES "
                 "(?, 'unit_slip', 'checked', 'x')", (ids[4],))
    old = {r[0]: r[1] for r in conn.execute(OLD_OPEN_FLAG_COUNTS)}
    conn.close()

    conn = store.connect(path)              # migrates 14 and on
    try:
        assert conn.execute("PRAGMA user_version").fetchone()[0] >= 14
        for i in ids:
            assert rows_of(conn, i) == from_json(conn, i)
        assert conn.execute("SELECT COUNT(*) FROM reading_flags WHERE severity = 'error'"
                            ).fetchone()[0] == 8
        assert store.open_flag_counts(conn) == old == {1: 2, 2: 3}
        assert store.open_flag_counts(conn, [2]) == {2: 3}
        assert store.open_flag_counts(conn, []) == {}
    finally:
        conn.close()


def test_to_check_count_follows_acks_corrections_and_voids(client, db):
    def post(body):
        r = client.post("/api/readings", json=body)
        assert r.status_code == 201, r.get_json()
        return r.get_json()

    def on_the_page():
        """The sites list's count (kept between requests, store.SiteCache)."""
        import re
        m = re.search(r"⚑ (\d+) readings? to check", client.get("/sites").get_data(as_text=True))
        return int(m.group(1)) if m else 0

    a = post({**SLIP, "site": "Block 3"})
    assert on_the_page() == 1
    b = post({**SLIP, "site": "Block 3"})             # readings saved since the page was made
    c = post({**SLIP, "site": "Block 3"})
    post({**PLAIN, "site": "Block 3"})
    sid = store.get_site(db, "Block 3")["id"]
    assert store.open_flag_counts(db) == {sid: 3} and on_the_page() == 3
    r = client.post(f"/api/readings/{a['uuid']}/ack", json={"code": "unit_slip",
                                                            "note": "the meter read mS/cm"})
    assert r.status_code == 201, r.get_json()
    assert store.open_flag_counts(db) == {sid: 2} and on_the_page() == 2
    r = client.post(f"/api/readings/{b['uuid']}/void", json={"reason": "probe not rinsed"})
    assert r.status_code in (200, 201), r.get_json()
    assert store.open_flag_counts(db) == {sid: 1} and on_the_page() == 1
    r = client.post(f"/api/readings/{c['uuid']}/correct", json={**PLAIN, "site": "Block 3"})
    assert r.status_code in (200, 201), r.get_json()
    assert store.open_flag_counts(db) == {} and on_the_page() == 0
