"""The db module (fieldapp/web/db.py, in the Flask tutorial's shape) and the
``init-db`` command that creates or migrates a log, run in-process with
click's CliRunner. The expected schema numbers come from the migration files
themselves (fieldapp/schema/NNN_*.sql), not from the code under test."""
from __future__ import annotations

import sqlite3
from importlib import resources

import pytest
from click.testing import CliRunner

from fieldapp import create_app, store
from fieldapp.cli import cli


def newest_schema() -> int:
    names = [p.name for p in resources.files("fieldapp").joinpath("schema").iterdir()
             if p.name.endswith(".sql")]
    return max(int(n.split("_", 1)[0]) for n in names)


def run(*args):
    return CliRunner().invoke(cli, [str(a) for a in args], catch_exceptions=False)


def version(path) -> int:
    conn = sqlite3.connect(path)
    try:
        return conn.execute("PRAGMA user_version").fetchone()[0]
    finally:
        conn.close()


def tables(path) -> set[str]:
    conn = sqlite3.connect(path)
    try:
        return {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='table'")}
    finally:
        conn.close()


def test_init_db_creates_a_new_log_then_finds_it_up_to_date(tmp_path):
    folder = tmp_path / "log"
    r = run("init-db", "--data", folder)
    assert r.exit_code == 0, r.stderr
    path = folder / store.DB_NAME
    assert version(path) == newest_schema()
    assert {"readings", "voids", "import_staging"} <= tables(path)
    assert "new log" in r.stderr and f"schema {newest_schema()}" in r.stderr
    again = run("init-db", "--data", folder)
    assert again.exit_code == 0 and "up to date" in again.stderr


def test_init_db_migrates_an_old_log_and_keeps_its_rows(tmp_path):
    folder = tmp_path / "log"
    folder.mkdir()
    path = folder / store.DB_NAME
    first = min(store._migrations())              # 001_init.sql only: the oldest log
    conn = sqlite3.connect(path, isolation_level=None)
    for stmt in store._split_sql(first[1]):
        conn.execute(stmt)
    conn.execute(f"PRAGMA user_version = {first[0]:d}")
    conn.execute("INSERT INTO sites (name, created_at) VALUES (?, ?)",
                 ("Block 3", "2026-05-14T08:00:00+00:00"))
    conn.close()
    r = run("init-db", "--data", folder)
    assert r.exit_code == 0, r.stderr
    assert f"from schema {first[0]} to {newest_schema()}" in r.stderr
    assert version(path) == newest_schema() and "import_staging" in tables(path)
    conn = sqlite3.connect(path)
    assert [row[0] for row in conn.execute("SELECT name FROM sites")] == ["Block 3"]
    conn.close()


@pytest.mark.parametrize("content, word", [(b"", "empty"),
                                           (b"not a database at all" * 40, "not a readable")])
def test_init_db_refuses_a_file_it_cannot_trust_and_leaves_it(tmp_path, content, word):
    folder = tmp_path / "log"
    folder.mkdir()
    path = folder / store.DB_NAME
    path.write_bytes(content)
    r = run("init-db", "--data", folder)
    assert r.exit_code == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and word in lines[0] and "Traceback" not in r.stderr
    assert path.read_bytes() == content


def test_init_db_refuses_another_programs_database(tmp_path):
    folder = tmp_path / "log"
    folder.mkdir()
    path = folder / store.DB_NAME
    conn = sqlite3.connect(path)
    conn.execute("CREATE TABLE invoices (id INTEGER PRIMARY KEY)")
    conn.commit()
    conn.close()
    before = path.read_bytes()
    r = run("init-db", "--data", folder)
    assert r.exit_code == 2 and "another program" in r.stderr
    assert path.read_bytes() == before and tables(path) == {"invoices"}


def test_get_db_is_one_connection_per_request_closed_at_teardown(tmp_path):
    from fieldapp.web.db import get_db
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "log")})
    with app.test_request_context("/api/sites", method="POST"):
        conn = get_db()
        assert get_db() is conn
        assert conn.execute("PRAGMA user_version").fetchone()[0] == newest_schema()
    with pytest.raises(sqlite3.ProgrammingError):      # closed when the request ended
        conn.execute("SELECT 1")
    with app.test_request_context("/sites"):
        assert get_db() is not conn
