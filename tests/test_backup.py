"""Backup while the server takes readings, restore, and files that are not a
sound log (corrupt, truncated, another program's, newer) refused without
touching anything."""
from __future__ import annotations

import http.client
import json
import os
import sqlite3
import subprocess
import sys
import threading
import uuid as uuidlib
from pathlib import Path

import pytest

from conftest import ServerProcess
from fieldapp import backup, store

ROOT = Path(__file__).resolve().parent.parent


def cli(*args):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.run([sys.executable, "-m", "fieldapp", *args], capture_output=True,
                          text=True, env=env, cwd=ROOT, timeout=120)


def post(port, body):
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=10)
    try:
        conn.request("POST", "/api/readings", json.dumps(body),
                     {"Content-Type": "application/json"})
        r = conn.getresponse()
        return r.status, json.loads(r.read())
    finally:
        conn.close()


def rows(db: Path) -> dict[str, tuple]:
    conn = sqlite3.connect(f"file:{db}?mode=ro", uri=True)
    try:
        return {r[0]: r[1:] for r in conn.execute(
            "SELECT uuid, value, unit, ec25_dS_m, result_json FROM readings")}
    finally:
        conn.close()


def reading(i):
    return {"uuid": str(uuidlib.uuid4()), "site": f"Block {i % 3}", "sample": "water",
            "value": 500 + i, "unit": "µS/cm", "temp_c": "20"}


def test_backup_while_the_server_saves_is_a_consistent_copy(tmp_path):
    srv = ServerProcess(tmp_path / "log").start()
    acked_before: list[str] = []
    stop = threading.Event()
    try:
        for i in range(30):
            status, rec = post(srv.port, reading(i))
            assert status == 201
            acked_before.append(rec["uuid"])

        def writer():
            i = 100
            while not stop.is_set():
                post(srv.port, reading(i))
                i += 1

        t = threading.Thread(target=writer)
        t.start()
        try:
            out = tmp_path / "backups"
            out.mkdir()
            p = cli("backup", "--data", str(tmp_path / "log"), str(out))
            assert p.returncode == 0, p.stderr
            assert "integrity check passed" in p.stdout
        finally:
            stop.set()
            t.join(10)
        copies = list(out.glob("fieldapp-backup-*.sqlite3"))
        assert len(copies) == 1 and not list(out.glob("*.part"))
        copy = copies[0]
        assert not Path(str(copy) + "-wal").exists()         # one self-contained file
        c = sqlite3.connect(copy)
        assert c.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        assert c.execute("PRAGMA journal_mode").fetchone()[0] == "delete"
        c.close()
        in_copy = rows(copy)
        live = rows(tmp_path / "log" / store.DB_NAME)
        assert set(acked_before) <= set(in_copy)               # everything saved before
        assert set(in_copy) <= set(live)                       # nothing invented
        assert all(in_copy[u] == live[u] for u in in_copy)     # whole rows, not halves
        assert len(live) > len(acked_before)                   # writes went on meanwhile
    finally:
        srv.stop()


def test_restore_brings_a_backup_back_and_keeps_the_replaced_log(tmp_path):
    srv = ServerProcess(tmp_path / "log").start()
    try:
        first = [post(srv.port, reading(i))[1]["uuid"] for i in range(5)]
    finally:
        srv.stop()
    bak = tmp_path / "monday.sqlite3"
    assert cli("backup", "--data", str(tmp_path / "log"), str(bak)).returncode == 0
    p = cli("backup", "--data", str(tmp_path / "log"), str(bak))     # never overwrites
    assert p.returncode == 2 and "exists already" in p.stderr
    srv.start()
    try:
        later = [post(srv.port, reading(i))[1]["uuid"] for i in range(10, 13)]
    finally:
        srv.stop()
    p = cli("restore", "--data", str(tmp_path / "log"), str(bak))
    assert p.returncode == 0, p.stderr
    assert "restored 5 readings" in p.stdout
    kept = list((tmp_path / "log").glob(f"{store.DB_NAME}.replaced-*"))
    assert len(kept) == 1 and "kept as" in p.stdout
    assert set(rows(kept[0])) == set(first) | set(later)       # nothing lost by restoring
    srv.start()
    try:
        conn = http.client.HTTPConnection("127.0.0.1", srv.port, timeout=10)
        conn.request("GET", "/api/readings")
        listed = json.loads(conn.getresponse().read())
        assert sorted(r["uuid"] for r in listed) == sorted(first)
        assert post(srv.port, reading(99))[0] == 201           # and it takes new readings
    finally:
        srv.stop()


def _corrupt_files(tmp_path, good: Path) -> dict[str, Path]:
    files = {}
    junk = tmp_path / "junk.sqlite3"
    junk.write_bytes(b"not a database, just bytes " * 200)
    files["random bytes"] = junk
    half = tmp_path / "half.sqlite3"
    data = good.read_bytes()
    half.write_bytes(data[:len(data) // 2])
    files["truncated"] = half
    flipped = tmp_path / "flipped.sqlite3"
    b = bytearray(data)
    for i in range(4096 * 2, len(b), 97):           # scribble over every page but the first two
        b[i] ^= 0x5A
    flipped.write_bytes(bytes(b))
    files["damaged pages"] = flipped
    other = tmp_path / "other.sqlite3"
    c = sqlite3.connect(other)
    c.execute("CREATE TABLE contacts (name TEXT)")
    c.commit()
    c.close()
    files["another program"] = other
    newer = tmp_path / "newer.sqlite3"
    newer.write_bytes(data)
    c = sqlite3.connect(newer)
    c.execute("PRAGMA user_version = 999")
    c.commit()
    c.close()
    files["newer schema"] = newer
    return files


def test_restore_refuses_files_that_are_not_a_sound_log(tmp_path):
    from fieldapp import create_app
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "log")})
    c = app.test_client()
    for i in range(40):
        assert c.post("/api/readings", json={**reading(i), "note": "n" * 300}).status_code == 201
    good = tmp_path / "good.sqlite3"
    backup.backup(app.config["DATABASE"], good)
    live = Path(app.config["DATABASE"])
    live_before = rows(live)
    expected = {"random bytes": "not a readable", "truncated": "",
                "damaged pages": "", "another program": "not a fieldapp log",
                "newer schema": "newer fieldapp"}
    for what, f in _corrupt_files(tmp_path, good).items():
        before = f.read_bytes()
        p = cli("restore", "--data", str(tmp_path / "log"), str(f))
        assert p.returncode == 2, (what, p.stdout, p.stderr)
        assert p.stderr.startswith("fieldapp: ") and "Traceback" not in p.stderr, what
        assert expected[what] in p.stderr, (what, p.stderr)
        assert f.read_bytes() == before, what               # the file is left as it was
        assert rows(live) == live_before, what              # and so is the log
    assert not list(live.parent.glob("*.replaced-*"))


@pytest.mark.parametrize("what", ["random bytes", "truncated", "damaged pages",
                                  "another program", "newer schema"])
def test_start_up_on_a_bad_log_is_a_clear_message_and_touches_nothing(tmp_path, what):
    from fieldapp import create_app
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "src")})
    c = app.test_client()
    for i in range(40):
        c.post("/api/readings", json={**reading(i), "note": "n" * 300})
    good = tmp_path / "good.sqlite3"
    backup.backup(app.config["DATABASE"], good)
    bad = _corrupt_files(tmp_path, good)[what]
    d = tmp_path / "data"
    d.mkdir()
    (d / store.DB_NAME).write_bytes(bad.read_bytes())
    before = (d / store.DB_NAME).read_bytes()
    p = cli("serve", "--data", str(d), "--port", "1")       # must stop before listening
    assert p.returncode == 2, (p.stdout, p.stderr)
    assert p.stderr.startswith("fieldapp: ") and "Traceback" not in p.stderr
    assert str(d / store.DB_NAME) in p.stderr or "newer fieldapp" in p.stderr
    assert (d / store.DB_NAME).read_bytes() == before
    assert sorted(x.name for x in d.iterdir()) == [store.DB_NAME]


def test_backup_of_a_missing_log_and_to_a_missing_folder(tmp_path):
    p = cli("backup", "--data", str(tmp_path / "none"), str(tmp_path / "x.sqlite3"))
    assert p.returncode == 2 and "no log" in p.stderr
    from fieldapp import create_app
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "log")})
    with pytest.raises(Exception) as e:
        backup.backup(app.config["DATABASE"], tmp_path / "no" / "such" / "x.sqlite3")
    assert "does not exist" in str(e.value.message)
