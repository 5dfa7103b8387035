"""Benchmark: saving a reading while 32 readers load site pages and exports.

    .venv/bin/python tests/benchmarks/bench_save_under_reads.py [N_READINGS]

Builds a log of N invented readings (default 20,000; `bench.make_log`),
starts `serve` on 127.0.0.1 and times POST /api/readings from one client,
80 saves one after another: first with nothing else running (the floor),
then while 16 threads load site pages and 16 download the whole CSV export
in a loop. Then the same two runs against the same server started with
waitress's first-come dispatcher (`--dispatch fifo`, how serve ran before)
for comparison. Bounded: 80 saves per run, readers stop with the saves or
after 90 s. Figures only; nothing passes or fails."""
from __future__ import annotations

import http.client
import json
import random
import statistics
import sys
import tempfile
import threading
import time
import uuid
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))
from conftest import ServerProcess            # noqa: E402
import bench  # noqa: E402  (tests/benchmarks/bench.py)

SAVES = 80
DEADLINE_S = 90


def saves(port: int, n: int = SAVES) -> list[float]:
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=60)
    out = []
    for i in range(n):
        body = json.dumps({"uuid": str(uuid.uuid4()), "site": "Block 1", "sample": "water",
                           "value": f"{1 + i % 7 / 10:.1f}", "unit": "dS/m",
                           "compensated": True, "temp_c": "21"})
        t = time.perf_counter()
        conn.request("POST", "/api/readings", body, {"Content-Type": "application/json"})
        r = conn.getresponse()
        r.read()
        out.append(time.perf_counter() - t)
        assert r.status == 201, r.status
    conn.close()
    return out


def readers(port: int, stop: threading.Event, counts: dict):
    def loop(path_fn, key):
        conn = http.client.HTTPConnection("127.0.0.1", port, timeout=120)
        t0 = time.time()
        while not stop.is_set() and time.time() - t0 < DEADLINE_S:
            conn.request("GET", path_fn())
            r = conn.getresponse()
            while r.read(1 << 16):
                if stop.is_set():
                    break
            if stop.is_set():
                break
            counts[key] += 1
        conn.close()

    sites = list(range(1, 41))
    ts = [threading.Thread(target=loop, args=(lambda: f"/sites/{random.choice(sites)}",
                                              "pages"), daemon=True) for _ in range(16)]
    ts += [threading.Thread(target=loop, args=(lambda: "/export.csv", "exports"), daemon=True)
           for _ in range(16)]
    for t in ts:
        t.start()
    return ts


def run(data: Path, dispatch: str) -> dict:
    srv = ServerProcess(data, extra=["--dispatch", dispatch]).start(timeout=60)
    try:
        saves(srv.port, 10)                               # warm up
        alone = saves(srv.port)
        stop, counts = threading.Event(), {"pages": 0, "exports": 0}
        ts = readers(srv.port, stop, counts)
        time.sleep(2.0)                                   # let every reader get going
        busy = saves(srv.port)
        stop.set()
        for t in ts:
            t.join(5)
    finally:
        srv.stop()
    return {"alone": alone, "busy": busy, **counts}


def fmt(xs) -> str:
    xs = sorted(xs)
    p95 = xs[int(round(0.95 * (len(xs) - 1)))]
    return f"p50 {statistics.median(xs) * 1000:7.1f} ms  p95 {p95 * 1000:7.1f} ms"


def main():
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 20_000
    with tempfile.TemporaryDirectory() as d:
        bench.make_log(Path(d) / "log", n)
        print(f"log of {n:,} readings, 40 sites; {SAVES} saves per run, one client")
        for dispatch in ("writes-first", "fifo"):
            r = run(Path(d) / "log", dispatch)
            print(f"[{dispatch:12s}] save, no readers (floor):   {fmt(r['alone'])}")
            print(f"[{dispatch:12s}] save, 32 readers:           {fmt(r['busy'])}   "
                  f"(readers finished {r['pages']} site pages, {r['exports']} exports)")


if __name__ == "__main__":
    main()
