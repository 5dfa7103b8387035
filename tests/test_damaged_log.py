"""A damaged, empty or unwritable log (issue 11, points 6 and 7).

An empty (0-byte) log is refused and left as it is; a log with damaged middle
pages (SQLite quick_check) is served read-only: saves answer 503 and nothing
is written to the file, pages answer without a 500, and the CLI says what is
wrong in one line. A read-only folder or a full disk refuse saves but keep
pages, the export and a backup to another folder working, before and after
a restart, and the start message names the real cause."""
from __future__ import annotations

import hashlib
import os
import subprocess
import sys
from pathlib import Path

import pytest

from fieldapp import create_app, store
from conftest import fill

ROOT = Path(__file__).resolve().parent.parent
READING = {"site": "Block 3", "sample": "water", "unit": "dS/m", "compensated": True}


def run(*args):
    return subprocess.run([sys.executable, "-m", "fieldapp", *args], capture_output=True,
                          text=True, cwd=ROOT, env=dict(os.environ, PYTHONPATH=str(ROOT)),
                          timeout=120)


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def make_log(folder: Path, n=150) -> Path:
    app = create_app({"TESTING": True, "DATA_DIR": str(folder)})
    c = app.test_client()
    for k in range(n):
        r = c.post("/api/readings", json={**READING, "value": f"{1 + k / 100:.2f}",
                                          "note": f"reading {k} " + "n" * 1500})
        assert r.status_code == 201
    conn = store.connect(app.config["DATABASE"])
    conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    conn.close()
    return Path(app.config["DATABASE"])


def damage_middle(db: Path) -> None:
    """Garbage over a few pages in the middle of the file (not the first page)."""
    size = db.stat().st_size
    with open(db, "r+b") as f:
        for frac in (0.45, 0.5, 0.55):
            f.seek((int(size * frac) // 4096) * 4096)
            f.write(bytes((i * 37 + 11) % 256 for i in range(4096)))


def assert_one_line(p, *words):
    assert p.returncode == 2, (p.returncode, p.stdout, p.stderr)
    assert "Traceback" not in p.stderr + p.stdout, p.stderr
    for w in words:
        assert w in p.stderr, p.stderr


def test_a_zero_byte_log_is_refused_and_left_as_it_is(tmp_path):
    d = tmp_path / "d"
    d.mkdir()
    db = d / store.DB_NAME
    db.write_bytes(b"")
    with pytest.raises(store.StoreError, match="empty"):
        create_app({"TESTING": True, "DATA_DIR": str(d)})
    assert db.stat().st_size == 0
    for cmd in (["serve", "--port", "1", "--data", str(d)], ["export", "--data", str(d)],
                ["backup", "--data", str(d), str(tmp_path)], ["import", "--data", str(d),
                                                            str(db)]):
        p = run(*cmd)
        assert p.returncode == 2 and "Traceback" not in p.stderr, (cmd, p.stderr)
    assert db.stat().st_size == 0
    assert "restore" in run("serve", "--port", "1", "--data", str(d)).stderr


def test_a_damaged_log_is_served_read_only_and_never_written(tmp_path):
    db = make_log(tmp_path / "d")
    damage_middle(db)
    before = digest(db)
    app = create_app({"TESTING": True, "DATA_DIR": str(db.parent),
                      "PROPAGATE_EXCEPTIONS": False})
    problem = app.config["LOG_READ_ONLY"]
    assert problem and "damaged" in problem and "restore" in problem
    c = app.test_client()
    r = c.post("/api/readings", json={**READING, "value": "2.5"})
    assert r.status_code == 503 and "damaged" in r.get_json()["error"]
    page = c.get("/")
    assert page.status_code == 200 and "damaged" in page.get_data(as_text=True)
    for path in ("/sites", "/sites/1", "/api/readings", "/api/sites", "/export.csv", "/map",
                 "/meters", "/api/meters"):
        r = c.get(path)
        assert r.status_code in (200, 503), (path, r.status_code)
        assert "Traceback" not in r.get_data(as_text=True)
    assert c.post("/api/sites", json={"name": "Bench 4"}).status_code == 503
    assert digest(db) == before
    assert not Path(str(db) + "-wal").exists() or Path(str(db) + "-wal").stat().st_size == 0


def test_the_cli_on_a_damaged_log_says_so_in_one_line(tmp_path):
    db = make_log(tmp_path / "d")
    damage_middle(db)
    before = digest(db)
    assert_one_line(run("backup", "--data", str(db.parent), str(tmp_path)), "damaged",
                    "quick_check")
    assert not list(tmp_path.glob("fieldapp-backup-*"))
    p = run("export", "--data", str(db.parent))
    assert "Traceback" not in p.stderr and "damaged" in p.stderr
    p = run("import", "--data", str(db.parent), str(tmp_path / "none.csv"))
    assert "Traceback" not in p.stderr
    assert digest(db) == before


# ------------------------------------------------------------ read-only folder, full disk

def _rescue_works(app, n_readings, other: Path):
    c = app.test_client()
    for path in ("/", "/sites", "/sites/1", "/api/readings", "/map", "/meters"):
        assert c.get(path).status_code == 200, path
    text = c.get("/export.csv").get_data(as_text=True)
    assert text.count("\r\n") == n_readings + 1
    r = c.post("/api/readings", json={**READING, "value": "9.9"})
    assert r.status_code == 503
    from fieldapp import backup
    out = backup.backup(app.config["DATABASE"], other)
    assert out["readings"] == n_readings
    return r.get_json()["error"]


def test_a_read_only_folder_keeps_pages_export_and_backup(small_disk, tmp_path):
    db = make_log(small_disk / "log", n=20)
    running = create_app({"TESTING": True, "DATA_DIR": str(db.parent)})
    subprocess.run(["mount", "-o", "remount,ro", str(small_disk)], check=True)
    # while the server runs
    msg = _rescue_works(running, 20, tmp_path)
    assert "read-only" in msg
    # and after a restart on the read-only folder
    again = create_app({"TESTING": True, "DATA_DIR": str(db.parent)})
    assert "read-only" in again.config["LOG_READ_ONLY"]
    assert "damaged" not in again.config["LOG_READ_ONLY"]
    b2 = tmp_path / "b2"
    b2.mkdir()
    assert "read-only" in _rescue_works(again, 20, b2)


def test_a_full_disk_keeps_pages_export_and_says_what_is_wrong(small_disk, tmp_path):
    db = make_log(small_disk / "log", n=20)
    filler = fill(small_disk)
    try:
        app = create_app({"TESTING": True, "DATA_DIR": str(db.parent)})
        msg = _rescue_works(app, 20, tmp_path)
        assert "full" in msg
        from conftest import ServerProcess
        srv = ServerProcess(db.parent).start()
        try:
            import urllib.request
            page = urllib.request.urlopen(srv.url + "/sites", timeout=10).read().decode()
            assert "full" in page
        finally:
            srv.stop()
        said = srv.proc.stdout.read().decode()
        assert "READ-ONLY" in said and "full" in said and "not a readable" not in said
        assert "Traceback" not in said
    finally:
        filler.unlink()
