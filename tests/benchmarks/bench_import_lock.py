"""Benchmark: how long a tablet's save waits while a long import runs.

    .venv/bin/python tests/benchmarks/bench_import_lock.py [N_ROWS]

Exports a log of N invented readings (default 20,000), then imports the file
into a new log while another connection saves a row every 20 ms and times
each wait for the write lock. Floor: the same saves with no import running.
Also prints the import's final transaction (the longest the lock is held).
Bounded: one import, saves stop with it. Figures only."""
from __future__ import annotations

import io
import statistics
import sys
import tempfile
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
from fieldapp import csvio, store     # noqa: E402
import bench  # noqa: E402  (tests/benchmarks/bench.py)


def saver(path, stop, out, tag=""):
    conn = store.connect(path, upgrade=False)
    i = 0
    while not stop.is_set():
        t = time.perf_counter()
        with store.transaction(conn):
            conn.execute("INSERT INTO targets (crop, measure, lo_dS_m, hi_dS_m, note, updated_at)"
                         " VALUES (?, 'ece', 1, 2, '', 'x')", (f"bench crop {tag}{i}",))
        out.append(time.perf_counter() - t)
        i += 1
        time.sleep(0.02)
    conn.close()


def main():
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 20_000
    with tempfile.TemporaryDirectory() as d:
        src, _ = bench.make_log(Path(d) / "src", n)
        conn = store.connect(src)
        buf = io.StringIO()
        csvio.export(conn, buf)
        conn.close()
        path = Path(d) / "dst" / store.DB_NAME
        path.parent.mkdir()
        store.connect(path).close()
        stop, floor = threading.Event(), []
        t = threading.Thread(target=saver, args=(path, stop, floor))
        t.start()
        time.sleep(2)
        stop.set()
        t.join()

        real, final = store.finish_import_job, []

        def timed(conn, job_id):
            t0 = time.perf_counter()
            try:
                return real(conn, job_id)
            finally:
                final.append(time.perf_counter() - t0)

        store.finish_import_job = timed
        stop, busy = threading.Event(), []
        t = threading.Thread(target=saver, args=(path, stop, busy, "busy "))
        conn = store.connect(path)
        t.start()
        t0 = time.perf_counter()
        counts = csvio.import_csv(conn, io.StringIO(buf.getvalue()))
        took = time.perf_counter() - t0
        stop.set()
        t.join()
        conn.close()
    f = lambda xs: (f"p50 {statistics.median(xs) * 1000:6.1f} ms, max {max(xs) * 1000:7.1f} ms"
                    f" ({len(xs)} saves)")
    print(f"import of {counts['added']:,} rows: {took:.1f} s in chunks of {csvio.IMPORT_CHUNK}")
    print(f"final transaction (moves the staged rows in): {final[0] * 1000:.0f} ms")
    print(f"save, no import (floor):  {f(floor)}")
    print(f"save, during the import:  {f(busy)}")


if __name__ == "__main__":
    main()
