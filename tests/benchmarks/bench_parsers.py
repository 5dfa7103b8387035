"""Benchmark: CPU time of the worst bodies a client can send, beside a floor.

    .venv/bin/python tests/benchmarks/bench_parsers.py

Every text field of POST /api/preview and POST /api/readings is filled with
hostile text of each shape that made a backtracking pattern slow (long digit
runs with a bad last character, long runs of separators, spaces, letters),
at sizes up to the JSON body limit (1 MiB). For each request it prints the
CPU seconds (time.process_time, in this process, Flask test client) beside
the floor of the same run: the same request with an ordinary reading. The
ratio parser alone is also timed against the pattern it replaced, on the
16,000-digit ratio that took 9 s. Figures only; nothing passes or fails here.
"""
from __future__ import annotations

import io
import json
import re
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from fieldapp import create_app, csvio, forms, store   # noqa: E402
from fieldapp.science import InputError                # noqa: E402

BODY_MAX = 1024 * 1024
#: The pattern the ratio parser used before (kept here only to measure it).
OLD_RATIO_RE = re.compile(r"^\s*([0-9]*[.,]?[0-9]+)\s*(?:[:/∶]|to)\s*([0-9]*[.,]?[0-9]+)\s*$",
                          re.IGNORECASE)
OLD_NUM_RE = re.compile(r"^\s*([0-9]*[.,]?[0-9]+)\s*$")


def cpu(fn, repeat=3) -> float:
    best = float("inf")
    for _ in range(repeat):
        t = time.process_time()
        fn()
        best = min(best, time.process_time() - t)
    return best


def hostile_texts(n: int) -> dict[str, str]:
    return {
        "digits+x": "1" * n + "x",
        "ratio digits+x": "1:" + "1" * n + "x",
        "digits,digits+x": "1," * (n // 2) + "x",
        "spaces+x": "1" + " " * n + "x",
        "colons": ":" * n,
        "letters": "mS" * (n // 2),
        "to repeated": "to" * (n // 2),
        "dots": "." * n,
    }


def main() -> None:
    print("ratio parser alone, CPU s (best of 3)")
    print(f"{'input':>28} {'parse_ratio':>12} {'old pattern':>12}")
    for n in (2000, 8000, 16000):
        s = "1:" + "1" * n + "x"
        s2 = "1" * n + "x"

        def new(s=s):
            try:
                forms.parse_ratio(s)
            except InputError:
                pass

        def old(s=s, s2=s2):
            OLD_RATIO_RE.match(s) or OLD_NUM_RE.match(s2)
        print(f"{'1:' + str(n) + ' digits + x':>28} {cpu(new):12.6f} {cpu(old, 1):12.3f}")

    with tempfile.TemporaryDirectory() as d:
        app = create_app({"DATA_DIR": d, "TESTING": True})
        client = app.test_client()
        good = {"site": "Block 3", "sample": "extract", "ratio": "1:5", "value": "1.2",
                "unit": "dS/m", "temp_c": "22", "texture": "loam", "crop": "barley"}

        def post(path, body):
            return lambda: client.post(path, data=body, content_type="application/json")

        floor_body = json.dumps(good)
        floor = statistics.median(cpu(post("/api/preview", floor_body), 1) for _ in range(20))
        print(f"\nfloor: an ordinary preview, median of 20: {floor * 1000:.2f} ms CPU")
        fields = ["ratio", "value", "unit", "temp_c", "sample", "texture", "crop", "sp",
                  "ece_method", "depth_cm", "note", "uuid", "site", "taken_at", "meter",
                  "tds_factor", "theta_g_pct", "matric_MPa", "replicate_group", "visited_by"]
        worst = (0.0, "")
        n = BODY_MAX - 2000
        for path in ("/api/preview", "/api/readings"):
            for field in fields:
                for shape, text in hostile_texts(n).items():
                    body = json.dumps({**good, field: text})[:BODY_MAX]
                    t = cpu(post(path, body), 1)
                    if t > worst[0]:
                        worst = (t, f"{path} {field}={shape}")
        print(f"worst of {2 * len(fields) * 8} bodies of ~1 MiB: {worst[0] * 1000:.1f} ms CPU "
              f"({worst[1]}); floor {floor * 1000:.2f} ms; target under 50 ms")

        # import: one row whose ratio and value are 16,000 characters of hostile text
        conn = store.connect(Path(d) / store.DB_NAME)
        head = ",".join(csvio.COLUMNS)
        row = {c: "" for c in csvio.COLUMNS}
        row.update(site="Block 3", taken_at="2026-05-14T09:30:00+00:00", sample="extract",
                   value="1.2", unit="dS/m", compensated="yes", ratio="1:5",
                   status="current", uuid="bench-import-0001")

        def one_row(r):
            return head + "\r\n" + ",".join(json.dumps(r[c]) if r[c] else ""
                                           for c in csvio.COLUMNS) + "\r\n"
        ok = cpu(lambda: csvio.read_export(io.StringIO(one_row(row))), 3)
        bad = dict(row, ratio="1:" + "1" * 16000 + "x", uuid="bench-import-0002")

        def imp():
            try:
                csvio.import_csv(conn, io.StringIO(one_row(bad)))
            except InputError:
                pass
        print(f"import of a one-row CSV with a 16,000-digit ratio: {cpu(imp) * 1000:.1f} ms CPU; "
              f"floor (reading the good row): {ok * 1000:.2f} ms")
        conn.close()


if __name__ == "__main__":
    main()
