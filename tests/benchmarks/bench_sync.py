"""Benchmark: devices syncing with an office over loopback.

    .venv/bin/python tests/benchmarks/bench_sync.py [--devices 50] [--each 1000] [--one 10000]

Starts the office as a user does (`python -m fieldapp serve` on 127.0.0.1),
then:

1. ``--devices`` device logs with ``--each`` new readings each sync at the
   same time (one thread per device); checks that every reading landed
   exactly once, and prints the wall time.
2. One device's ``--one``-reading sync, timed, beside two floors measured in
   the same run: the same batches POSTed as bare bytes to a path the office
   answers 404 without reading them into the log (the HTTP and JSON cost),
   and the same rows through one bare executemany into a fresh office log
   (store.insert_readings_bulk: the database cost).

The readings are invented (Block 1..5, water EC), converted through
records.convert_readings as an import converts them. Figures only; nothing
passes or fails on time.
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import tempfile
import threading
import time
import uuid
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from conftest import ServerProcess               # noqa: E402

from fieldapp import records, store               # noqa: E402
from fieldapp import sync as syncmod              # noqa: E402
from fieldapp.web.pairing import format_code, new_code   # noqa: E402


def invented_records(n: int, offset: int) -> list[dict]:
    payloads = [{"site": f"Block {1 + (i % 5)}", "sample": "water",
                 "value": f"{0.5 + ((i * 37 + offset) % 300) / 100:.2f}", "unit": "dS/m",
                 "temp_c": f"{18 + (i % 10)}", "uuid": str(uuid.uuid4()),
                 "taken_at": f"2030-05-{1 + (i % 28):02d}T09:{i % 60:02d}:00+00:00"}
                for i in range(n)]
    results = records.convert_readings(payloads)
    return [records.build_record(p, result=r) for p, r in zip(payloads, results)]


def make_device(folder: Path, n: int, offset: int):
    folder.mkdir(parents=True)
    conn = store.connect(folder / store.DB_NAME)
    recs = invented_records(n, offset)
    with store.transaction(conn):
        store.insert_readings_bulk(conn, recs)
    return conn, recs


def pair_device(conn, office: ServerProcess, name: str):
    oc = store.connect(office.data_dir / store.DB_NAME)
    try:
        code = format_code(new_code(oc)["code"])
    finally:
        oc.close()
    t = syncmod.HttpTransport(office.url)
    try:
        syncmod.pair(conn, t, code, name, "")
    finally:
        t.close()


def office_counts(office: ServerProcess) -> tuple[int, int]:
    oc = store.connect(office.data_dir / store.DB_NAME)
    try:
        return oc.execute("SELECT COUNT(*), COUNT(DISTINCT uuid) FROM readings").fetchone()
    finally:
        oc.close()


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--devices", type=int, default=50)
    ap.add_argument("--each", type=int, default=1000)
    ap.add_argument("--one", type=int, default=10000)
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as d:
        root = Path(d)
        office = ServerProcess(root / "office").start()
        try:
            # ---- 1. many devices at once
            t0 = time.perf_counter()
            devs = []
            for i in range(a.devices):
                conn, recs = make_device(root / f"dev{i}", a.each, i)
                pair_device(conn, office, f"Tablet {i + 1}")
                devs.append((conn, {r["uuid"] for r in recs}))
            print(f"made {a.devices} device logs of {a.each} readings "
                  f"({time.perf_counter() - t0:.1f} s, not timed below)")
            errors: list[str] = []

            def run(conn):
                t = syncmod.HttpTransport(office.url, timeout=300)
                try:
                    syncmod.sync(conn, t)
                except syncmod.SyncError as e:
                    errors.append(e.message)
                finally:
                    t.close()
            threads = [threading.Thread(target=run, args=(c,)) for c, _ in devs]
            t0 = time.perf_counter()
            for th in threads:
                th.start()
            for th in threads:
                th.join()
            wall = time.perf_counter() - t0
            n, distinct = office_counts(office)
            want = set().union(*(u for _, u in devs))
            oc = store.connect(office.data_dir / store.DB_NAME)
            have = {r[0] for r in oc.execute("SELECT uuid FROM readings")}
            oc.close()
            exact = n == distinct == len(want) and have == want
            print(f"{a.devices} devices x {a.each} readings at once: {wall:.2f} s wall, "
                  f"{n} readings at the office ({distinct} distinct, {len(want)} sent); "
                  f"every reading exactly once: {'yes' if exact else 'NO'}; "
                  f"sync errors: {len(errors)}{' ' + errors[0] if errors else ''}")
            for c, _ in devs:
                c.close()

            # ---- 2. one device, --one readings: each figure 3 times, interleaved
            # (a fresh device of new readings each time), the best and the median
            runs: dict = {"sync": [], "http": [], "db": []}
            for rep in range(3):
                conn, recs = make_device(root / f"big{rep}", a.one, 999 + rep)
                pair_device(conn, office, f"Tablet big {rep}")
                bodies = []
                cursor: dict = {}
                while True:
                    items, cursor, more = store.push_batch(conn, cursor, syncmod.BATCH_ITEMS,
                                                           syncmod.BATCH_BYTES)
                    if store.is_empty(items):
                        break
                    bodies.append({"items": items})
                    if not more:
                        break
                t = syncmod.HttpTransport(office.url)
                t0 = time.perf_counter()
                for b in bodies:        # floor 1: the same bytes, answered 404 unread
                    t.post("/api/sync/none", b)
                runs["http"].append(time.perf_counter() - t0)
                t.close()
                t = syncmod.HttpTransport(office.url, timeout=300)
                t0 = time.perf_counter()
                res = syncmod.sync(conn, t)
                runs["sync"].append(time.perf_counter() - t0)
                t.close()
                assert res["readings_new_at_office"] == a.one
                (root / f"floor{rep}").mkdir()   # floor 2: one executemany, a fresh log
                fresh = store.connect(root / f"floor{rep}" / store.DB_NAME)
                t0 = time.perf_counter()
                with store.transaction(fresh):
                    store.insert_readings_bulk(fresh, recs)
                runs["db"].append(time.perf_counter() - t0)
                fresh.close()
                conn.close()
            size = sum(len(json.dumps(b)) for b in bodies)
            f = lambda xs: f"best {min(xs):6.2f} s, median {statistics.median(xs):6.2f} s"
            print(f"one device, {a.one} readings, {res['batches_sent']} batches "
                  f"({size / 1e6:.1f} MB of JSON), 3 runs each; target under 10 s")
            print(f"  sync (push, office applies each batch in one transaction): {f(runs['sync'])}")
            print(f"  floor, the same batches POSTed to a 404 path:              {f(runs['http'])}")
            print(f"  floor, the same rows by one executemany (fresh log):       {f(runs['db'])}")
            print(f"  load average while measuring (2 cores, shared): "
                  f"{', '.join(f'{x:.1f}' for x in os.getloadavg())}")
        finally:
            office.stop()


if __name__ == "__main__":
    main()
