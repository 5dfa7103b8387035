"""Every acknowledged save is on disk.

* A real server takes readings from several concurrent clients and is killed
  with SIGKILL at random moments, round after round; after each kill the log
  file must hold every reading that was answered 201 (or 200), exactly once,
  and readings sent without an answer are resent (as the page's outbox does)
  without doubling.
* A full disk and a read-only data folder give a clear 503 on save and store
  nothing; once the disk has room again the same reading goes in once. The
  page's outbox keeps the reading meanwhile and sends it by itself.

SIGKILL ends the process, not the machine: what the operating system had
accepted survives it. That a power cut does not lose a committed save rests
on SQLite's synchronous=FULL in WAL mode (fsync at every commit), which this
test cannot cut the power to prove.
"""
from __future__ import annotations

import http.client
import json
import os
import random
import sqlite3
import subprocess
import threading
import time
import uuid as uuidlib
from pathlib import Path

import pytest

from conftest import PHONE, ServerProcess, fill
from fieldapp import store

ROUNDS = 8
CLIENTS = 6


def post(port: int, body: dict, timeout: float = 10.0) -> tuple[int, dict]:
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=timeout)
    try:
        conn.request("POST", "/api/readings", json.dumps(body),
                     {"Content-Type": "application/json"})
        r = conn.getresponse()
        return r.status, json.loads(r.read() or b"{}")
    finally:
        conn.close()


def stored(db_path: Path) -> dict[str, list[float]]:
    """uuid -> the values stored under it, read straight from the file."""
    conn = sqlite3.connect(db_path)
    try:
        out: dict[str, list[float]] = {}
        for u, v in conn.execute("SELECT uuid, value FROM readings"):
            out.setdefault(u, []).append(v)
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        return out
    finally:
        conn.close()


def test_acknowledged_saves_survive_sigkill(tmp_path):
    seed = int(os.environ.get("FIELDAPP_KILL_SEED", random.randrange(1 << 30)))
    rng = random.Random(seed)
    print(f"seed {seed} (FIELDAPP_KILL_SEED={seed} repeats this run)")
    srv = ServerProcess(tmp_path / "log")
    db_path = tmp_path / "log" / store.DB_NAME
    lock = threading.Lock()
    acked: dict[str, float] = {}       # answered 200/201
    unsure: dict[str, dict] = {}       # sent, no answer: the outbox keeps them
    odd: list = []
    try:
        for rnd in range(ROUNDS):
            srv.start()
            for u, body in list(unsure.items()):          # the outbox resends
                status, rec = post(srv.port, body)
                assert status in (200, 201), rec
                acked[u] = body["value"]
                del unsure[u]
            stop = threading.Event()

            def client(k: int) -> None:
                i = 0
                while not stop.is_set():
                    i += 1
                    body = {"uuid": str(uuidlib.uuid4()), "site": f"Block {k}",
                            "sample": "water", "unit": "µS/cm", "temp_c": "21.5",
                            "value": round(100 + rnd * 10 + k + i / 1000, 3)}
                    with lock:
                        unsure[body["uuid"]] = body
                    try:
                        status, rec = post(srv.port, body, timeout=5)
                    except (OSError, http.client.HTTPException):
                        return                      # the server is gone mid-answer
                    with lock:
                        if status in (200, 201):
                            acked[body["uuid"]] = body["value"]
                            del unsure[body["uuid"]]
                        else:
                            odd.append((status, rec))

            threads = [threading.Thread(target=client, args=(k,)) for k in range(CLIENTS)]
            for t in threads:
                t.start()
            time.sleep(rng.uniform(0.15, 0.9))
            srv.proc.kill()                          # SIGKILL: no clean-up at all
            srv.proc.wait()
            stop.set()
            for t in threads:
                t.join(10)
            assert not odd, odd[:3]
            on_disk = stored(db_path)
            missing = [u for u in acked if u not in on_disk]
            assert not missing, f"round {rnd}: {len(missing)} acknowledged readings lost"
            assert all(len(v) == 1 for v in on_disk.values())
            assert all(on_disk[u] == [v] for u, v in acked.items())
            # what was stored without an answer is a subset of what was sent
            assert set(on_disk) <= set(acked) | set(unsure)
        assert len(acked) > ROUNDS * CLIENTS        # the clients did get work done
        srv.start()
        for u, body in list(unsure.items()):
            assert post(srv.port, body)[0] in (200, 201)
            acked[u] = body["value"]
        on_disk = stored(db_path)
        assert set(on_disk) == set(acked) and all(len(v) == 1 for v in on_disk.values())
        print(f"{len(acked)} readings, {ROUNDS} kills, none lost or doubled")
    finally:
        srv.stop()


# ------------------------------------------------------------ full disk, read-only

def _patched_connect(monkeypatch, pragma: str):
    real = store.connect

    def connect(path, upgrade=True):
        conn = real(path, upgrade=upgrade)
        if not upgrade:                  # the server's per-request connections
            if pragma == "full":
                pages = conn.execute("PRAGMA page_count").fetchone()[0]
                conn.execute(f"PRAGMA max_page_count = {pages}")
            else:
                conn.execute("PRAGMA query_only = ON")
        return conn

    monkeypatch.setattr(store, "connect", connect)


@pytest.mark.parametrize("trouble, words", [("full", "disk is full"),
                                            ("readonly", "read-only")])
def test_a_save_that_cannot_be_written_is_a_clear_503_and_nothing_changes(
        app, client, db, monkeypatch, trouble, words):
    body = {"uuid": "dddddddd-0000-4000-8000-000000000000", "site": "Block 3",
            "sample": "water", "value": "1.4", "unit": "dS/m", "compensated": True,
            "note": "x" * 2000}
    # one reading first, so that the next one needs a new page of the file
    first = {**body, "uuid": "eeeeeeee-0000-4000-8000-000000000000", "note": "y" * 2000}
    assert client.post("/api/readings", json=first).status_code == 201
    before = list(db.iterdump())
    _patched_connect(monkeypatch, trouble)
    r = client.post("/api/readings", json=body)
    assert r.status_code == 503
    msg = r.get_json()["error"]
    assert words in msg and "kept on this device" in msg and "Traceback" not in msg
    assert list(db.iterdump()) == before
    monkeypatch.undo()
    assert client.post("/api/readings", json=body).status_code == 201
    assert client.post("/api/readings", json=body).status_code == 200      # a resend
    assert db.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == 2


@pytest.mark.browser
def test_real_full_disk_and_read_only_folder_with_the_page(small_disk, browser):
    srv = ServerProcess(small_disk / "log").start()
    ctx = browser.new_context(viewport=PHONE)
    page = ctx.new_page()
    try:
        base = {"site": "Bench 4", "sample": "feed", "unit": "mS/cm", "compensated": True}
        # a read-only folder: a clear answer, nothing stored, then it goes in once
        subprocess.run(["mount", "-o", "remount,ro", str(small_disk)], check=True)
        try:
            status, rec = post(srv.port, {**base, "value": "2.2", "uuid": "ro-00000001"})
        finally:
            subprocess.run(["mount", "-o", "remount,rw", str(small_disk)], check=True)
        assert status == 503 and "read-only" in rec["error"], rec
        assert post(srv.port, {**base, "value": "2.2", "uuid": "ro-00000001"})[0] == 201
        # a full disk, met by the page: the outbox keeps the reading and says why
        page.goto(srv.url + "/")
        filler = fill(small_disk)
        page.fill("#site", "Bench 4")
        page.select_option("#sample", "feed")
        page.select_option("#unit", "mS/cm")
        page.check("#compensated")
        page.fill("#value", "2.4")
        page.click("#save")
        page.wait_for_function("() => document.querySelector('#saved').textContent"
                               ".includes('waits on this device')")
        assert "disk is full" in page.inner_text("#saved")
        assert "1 reading waits" in page.inner_text("#outbox-badge")
        assert "disk is full" in page.inner_text("#outbox-badge")
        filler.unlink()                              # room again: the outbox sends it
        page.wait_for_function("() => document.querySelector('#outbox-badge').hidden",
                               timeout=20000)
        on_disk = stored(small_disk / "log" / store.DB_NAME)
        assert sorted(v[0] for v in on_disk.values()) == [2.2, 2.4]
    finally:
        ctx.close()
        srv.stop()
