"""One store interface, two backends: the PostgreSQL schema is the SQLite
schema's twin, the database itself keeps readings append-only on both, writers
queue as under SQLite's BEGIN IMMEDIATE, and the command line and the server
open an office log with --db."""
from __future__ import annotations

import threading
from importlib import resources

import pytest
from click.testing import CliRunner

from fieldapp import store
from fieldapp.cli import cli

# Every test here that takes ``db``, ``log_target`` or ``app`` runs on both backends.
BOTH_BACKENDS = True

SCHEMA = resources.files("fieldapp").joinpath("schema")


def test_every_sqlite_migration_has_its_postgresql_twin():
    sqlite = sorted(p.name for p in SCHEMA.iterdir() if p.name.endswith(".sql"))
    twins = sorted(p.name for p in SCHEMA.joinpath("postgresql").iterdir()
                   if p.name.endswith(".sql"))
    assert sqlite and twins == sqlite
    assert [v for v, _ in store._migrations("postgresql")] == \
        [v for v, _ in store._migrations("sqlite")]


def _columns(conn) -> dict[str, list[str]]:
    if store.dialect(conn) == "postgresql":
        rows = conn.execute(
            "SELECT table_name, column_name FROM information_schema.columns "
            "WHERE table_schema = current_schema() AND table_name <> 'fieldapp_schema' "
            "ORDER BY table_name, ordinal_position").fetchall()
        out: dict[str, list[str]] = {}
        for t, c in rows:
            out.setdefault(t, []).append(c.lower())
        return out
    tables = [r[0] for r in conn.execute(
        "SELECT name FROM sqlite_master WHERE type IN ('table', 'view') ORDER BY name")]
    return {t: [r[1].lower() for r in conn.execute(f"PRAGMA table_info({t})")]
            for t in tables}


def test_both_schemas_have_the_same_tables_columns_and_version(tmp_path, pg_db):
    lite = store.connect(tmp_path / "a.sqlite3")
    pg = store.connect(pg_db)
    try:
        assert _columns(pg) == _columns(lite)
        assert store.schema_version(pg) == store.schema_version(lite) == \
            max(v for v, _ in store._migrations())
    finally:
        lite.close()
        pg.close()


def _one_reading(conn) -> dict:
    from fieldapp.records import save_reading
    # 60 dS/m of water: saved, with a flag (so it has reading_flags rows too)
    row, _ = save_reading(conn, {"site": "Block 3", "sample": "water", "value": "60",
                                 "unit": "dS/m", "compensated": True,
                                 "taken_at": "2026-05-14T09:30:00+02:00"})
    return row


@pytest.mark.parametrize("sql", [
    "UPDATE readings SET value = 9", "DELETE FROM readings",
    "UPDATE reading_flags SET code = 'x'", "DELETE FROM reading_flags",
    "UPDATE voids SET reason = 'x'", "DELETE FROM voids",
    "UPDATE site_history SET new_value = 'x'", "DELETE FROM site_history",
])
def test_the_database_refuses_to_change_or_delete_the_record(db, sql):
    row = _one_reading(db)
    store.void_reading(db, row["uuid"], "probe not rinsed")
    before = db.execute("SELECT COUNT(*) FROM readings").fetchone()[0]
    with pytest.raises(store.IntegrityError, match="append-only"):
        db.execute(sql)
    assert db.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == before == 1
    assert store.get_reading(db, row["uuid"])["value"] == 60
    assert db.execute("SELECT COUNT(*) FROM reading_flags").fetchone()[0] >= 1


def test_postgresql_refuses_truncate_of_the_record(pg_db):
    conn = store.connect(pg_db)
    try:
        _one_reading(conn)
        for table in ("readings", "voids", "reading_flags", "site_history", "calibrations",
                      "reading_devices"):
            with pytest.raises(store.IntegrityError, match="append-only"):
                conn.execute(f"TRUNCATE {table} CASCADE")
        assert conn.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == 1
    finally:
        conn.close()


def test_a_second_writer_waits_for_the_first(log_target):
    from conftest import lock_wait
    first = store.connect(log_target)
    second = store.connect(log_target, upgrade=False)
    lock_wait(second, 200)
    try:
        with store.transaction(first):
            store.ensure_site(first, "Block 3")
            with pytest.raises(store.OperationalError):
                with store.transaction(second):
                    store.ensure_site(second, "Bench 4")
        with store.transaction(second):               # free again once the first commits
            store.ensure_site(second, "Bench 4")
        assert [r["name"] for r in store.list_sites(first)] == ["Bench 4", "Block 3"]
    finally:
        first.close()
        second.close()


def test_the_same_reading_sent_twice_at_once_is_stored_once(log_target):
    """Two tablets' resends of one reading race; the writers' lock makes the
    second see the first's row instead of failing on the unique uuid."""
    from fieldapp.records import save_reading
    body = {"uuid": "11111111-2222-4333-8444-555555555555", "site": "Block 3",
            "sample": "water", "value": "1.2", "unit": "dS/m", "compensated": True,
            "taken_at": "2026-05-14T09:30:00+02:00"}
    store.connect(log_target).close()
    results, errors = [], []
    start = threading.Barrier(4)

    def send():
        conn = store.connect(log_target, upgrade=False)
        try:
            start.wait()
            results.append(save_reading(conn, dict(body))[1])
        except Exception as e:   # noqa: BLE001 - the test reports it
            errors.append(e)
        finally:
            conn.close()

    threads = [threading.Thread(target=send) for _ in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(60)
    assert errors == []
    assert sorted(results) == [False, False, False, True]
    conn = store.connect(log_target)
    try:
        assert conn.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == 1
    finally:
        conn.close()


def test_placeholders_inside_quotes_and_percent_signs_stay_text(pg_db):
    conn = store.connect(pg_db)
    try:
        row = conn.execute("SELECT '?' AS q, 'a%b' AS p, ? AS v, ? AS w", ("x", "y")).fetchone()
        assert tuple(row) == ("?", "a%b", "x", "y")
        assert dict(row) == {"q": "?", "p": "a%b", "v": "x", "w": "y"}
        row = conn.execute("SELECT ?2 || ?1 || ?2 AS w, '?1' AS t", ("x", "y")).fetchone()
        assert tuple(row) == ("yxy", "?1")
        row = conn.execute("SELECT 1 AS ec25_dS_m").fetchone()       # the schema's spelling
        assert row.keys() == ["ec25_dS_m"] and row["ec25_dS_m"] == 1
    finally:
        conn.close()


def test_a_newer_or_foreign_postgresql_database_is_refused_untouched(pg_db, pg_admin):
    conn = store.connect(pg_db)
    conn.execute("INSERT INTO fieldapp_schema (version, applied_at) VALUES (999, 'later')")
    conn.close()
    with pytest.raises(store.StoreError, match="newer fieldapp"):
        store.connect(pg_db)
    admin, _ = pg_admin
    other = pg_db.rsplit("/", 1)[0] + "/" + pg_db.rsplit("/", 1)[1] + "_other"
    admin.execute(f"CREATE DATABASE {other.rsplit('/', 1)[1]}")
    try:
        from fieldapp.store import pg
        raw = pg.connect(other)
        raw.execute("CREATE TABLE invoices (id integer)")
        raw.close()
        with pytest.raises(store.StoreError, match="another program"):
            store.connect(other)
        raw = pg.connect(other)
        assert store.schema_version(raw) == 0           # nothing was written
        raw.close()
    finally:
        admin.execute(f"DROP DATABASE {other.rsplit('/', 1)[1]} WITH (FORCE)")


def test_an_unreachable_office_database_is_one_clear_line(tmp_path):
    r = CliRunner().invoke(cli, ["sites", "list", "--db",
                                 "postgresql://nobody@127.0.0.1:1/nothing"])
    assert r.exit_code == 2
    assert "cannot reach the PostgreSQL database" in r.output
    assert "Traceback" not in r.output


def test_the_command_line_opens_an_office_log_with_db(pg_db, tmp_path):
    run = CliRunner().invoke
    r = run(cli, ["init-db", "--db", pg_db])
    newest = max(v for v, _ in store._migrations())
    assert r.exit_code == 0 and f"up to date (schema {newest})" in r.output
    r = run(cli, ["sites", "add", "Block 3", "--crop", "tomato", "--db", pg_db])
    assert r.exit_code == 0, r.output
    r = run(cli, ["sites", "list", "--db", pg_db, "--json"])
    assert r.exit_code == 0 and '"Block 3"' in r.output
    csv_path = tmp_path / "log.csv"
    lite = tmp_path / "lite"
    assert run(cli, ["demo", "--data", str(lite)]).exit_code == 0
    assert run(cli, ["export", "--data", str(lite), "-o", str(csv_path)]).exit_code == 0
    r = run(cli, ["import", str(csv_path), "--db", pg_db])
    assert r.exit_code == 0, r.output
    n_lite = store.connect(lite / store.DB_NAME)
    office = store.connect(pg_db)
    try:
        assert office.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == \
            n_lite.execute("SELECT COUNT(*) FROM readings").fetchone()[0] > 0
    finally:
        n_lite.close()
        office.close()
    out = tmp_path / "back.csv"
    r = run(cli, ["export", "--db", pg_db, "-o", str(out)])
    assert r.exit_code == 0
    assert out.read_text(encoding="utf-8-sig").count("\n") == csv_path.read_text(
        encoding="utf-8-sig").count("\n")


@pytest.mark.parametrize("command", [["backup", "out.sqlite3"], ["restore", "in.sqlite3"]])
def test_sqlite_only_commands_say_whose_job_it_is_on_postgresql(command, pg_db):
    r = CliRunner().invoke(cli, [*command, "--db", pg_db])
    assert r.exit_code == 2 and "pg_dump" in r.output


def test_db_takes_only_a_postgresql_url(tmp_path):
    r = CliRunner().invoke(cli, ["sites", "list", "--db", str(tmp_path / "x.sqlite3")])
    assert r.exit_code == 2 and "postgresql://" in r.output


def test_the_office_server_runs_on_postgresql(pg_db, tmp_path):
    import json
    import urllib.request

    from conftest import ServerProcess
    s = ServerProcess(tmp_path / "unused", extra=["--db", pg_db]).start(timeout=40)
    try:
        body = json.dumps({"site": "Block 3", "sample": "water", "value": "1.4",
                           "unit": "dS/m", "compensated": True,
                           "taken_at": "2026-05-14T09:30:00+02:00"}).encode()
        req = urllib.request.Request(s.url + "/api/readings", data=body, method="POST",
                                     headers={"Content-Type": "application/json",
                                              "Origin": s.url})
        with urllib.request.urlopen(req, timeout=10) as resp:
            assert resp.status == 201
        with urllib.request.urlopen(s.url + "/api/sites", timeout=10) as resp:
            sites = json.load(resp)
        assert [x["name"] for x in sites] == ["Block 3"]
    finally:
        s.stop()
    out = s.proc.stdout.read().decode()
    assert "(PostgreSQL)" in out
    assert not (tmp_path / "unused" / store.DB_NAME).exists()
