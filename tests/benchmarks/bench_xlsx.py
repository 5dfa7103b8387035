"""Benchmark: peak Python memory of the workbook export, flat with the rows.

    .venv/bin/python tests/benchmarks/bench_xlsx.py [SMALL LARGE]

Builds two invented logs (default 5,000 and 50,000 readings, fieldapp.bench's
generator), writes each as .xlsx through ``xlsx.export_xlsx`` and prints the
peak Python memory (tracemalloc) and the time, beside floors measured in the
same run: openpyxl's write-only sheet fed the same number of bare rows of
the same width (no log, no labels), and the CSV export of the same log.
"Flat" means the large log's peak is close to the small one's, not ten times
it. Figures only; nothing passes or fails here.
"""
from __future__ import annotations

import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from fieldapp import bench, csvio, store, xlsx      # noqa: E402


def peak(fn):
    tracemalloc.start()
    t0 = time.perf_counter()
    try:
        fn()
        return tracemalloc.get_traced_memory()[1] / 1024, time.perf_counter() - t0
    finally:
        tracemalloc.stop()


def workbook(db, out):
    conn = store.connect(db, upgrade=False)
    try:
        xlsx.export_xlsx(conn, out)
    finally:
        conn.close()


def csv_export(db):
    conn = store.connect(db, upgrade=False)
    try:
        csvio.export(conn, bench._Sink())
    finally:
        conn.close()


def bare_openpyxl(n, out):
    from openpyxl import Workbook
    wb = Workbook(write_only=True)
    ws = wb.create_sheet("Readings")
    row = ["Farm A Block 3", 0.41, "mS/cm", 19.0, "extract", "1:5", 5.0] * 6
    for _ in range(n):
        ws.append(row)
    wb.save(out)


def main(argv):
    sizes = [int(x) for x in argv[1:3]] or [5_000, 50_000]
    with tempfile.TemporaryDirectory() as tmp:
        print(f"{'readings':>9}  {'xlsx export':>22}  {'bare openpyxl (floor)':>24}  "
              f"{'CSV export (floor)':>20}")
        warm, _ = bench.make_log(Path(tmp) / "warm", 10)      # imports and caches first
        workbook(warm, Path(tmp) / "warm.xlsx")
        bare_openpyxl(10, Path(tmp) / "warm-bare.xlsx")
        csv_export(warm)
        for n in sizes:
            db, _ = bench.make_log(Path(tmp) / f"log{n}", n)
            kib, secs = peak(lambda: workbook(db, Path(tmp) / f"log{n}.xlsx"))
            b_kib, b_secs = peak(lambda: bare_openpyxl(n, Path(tmp) / f"bare{n}.xlsx"))
            c_kib, c_secs = peak(lambda: csv_export(db))
            size = (Path(tmp) / f"log{n}.xlsx").stat().st_size / 1e6
            print(f"{n:>9,}  {kib:>9,.0f} KiB {secs:>6.1f} s {size:>4.1f} MB  "
                  f"{b_kib:>9,.0f} KiB {b_secs:>6.1f} s    {c_kib:>9,.0f} KiB {c_secs:>5.1f} s")
    print("peak = tracemalloc's highest traced Python memory during the export (time "
          "includes tracemalloc's overhead)")


if __name__ == "__main__":
    main(sys.argv)
