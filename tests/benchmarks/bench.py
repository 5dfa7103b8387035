"""Benchmarks that print figures; they never pass or fail on time.

Kept out of the package (tests/benchmarks/, not collected by pytest); run
from a checkout:

    python -m fieldapp bench convert [--n 1000000]
    python -m fieldapp bench all [--n 100000]       # api, export, import, page, start
    python -m fieldapp bench api | export | import | page | start [--n N]

Each figure is printed beside a reference measured in the same run on the
same machine: the API beside the same server answering a bare endpoint that
does one SQLite insert; the CSV export beside a bare sqlite3 query written
with csv.writer; the import beside a bare executemany of the same rows; the
entry page's weight and requests as a browser loads it; the server's cold
start beside a bare Flask + waitress process.

``convert``: converts N readings through the same core path as convert-csv
(science.convert.convert_batch on column arrays, flags included) and, on the
same arrays in the same run, the bare numpy arithmetic of the simplest route
(unit factor, linear 2 %/°C compensation, Handbook 60 solute potential), and
prints both times and their ratio.
"""
from __future__ import annotations

import time

import numpy as np


def _best_of(fn, repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def bench_convert(n: int = 1_000_000, repeat: int = 3, seed: int = 1) -> dict:
    from fieldapp.science import convert
    rng = np.random.default_rng(seed)
    value = rng.uniform(100, 5000, n)                 # µS/cm, irrigation-water-like
    temp = rng.uniform(10, 35, n)
    units = np.full(n, "µS/cm", dtype=object)
    sample = np.full(n, "water", dtype=object)
    batch = convert.make_batch(value=value, unit=units, sample=sample, temp_c=temp,
                               compensated=np.zeros(n, bool))

    def core():
        convert.convert_batch(batch)

    def bare():
        ec = value * 1e-3
        ec25 = ec / (1.0 + 0.02 * (temp - 25.0))
        return -0.036 * ec25

    t_core = _best_of(core, repeat)
    t_bare = _best_of(bare, repeat)
    return {"n": n, "core_s": t_core, "bare_numpy_s": t_bare, "ratio": t_core / t_bare,
            "core_readings_per_s": n / t_core}


# ---------------------------------------------------------------- a realistic log

def _templates(slips: bool = False) -> list[dict]:
    """Converted readings of the kinds a crew takes (invented values); with
    ``slips`` one in 41 is a unit slip (an error-level flag to check)."""
    from fieldapp.records import build_record
    payloads = []
    for i in range(40):
        payloads.append({"sample": "water", "value": f"{300 + 70 * i}", "unit": "µS/cm",
                         "temp_c": f"{12 + i % 20}"})
        payloads.append({"sample": "extract", "ratio": "1:5", "value": f"{0.1 + 0.05 * i:.2f}",
                         "unit": "mS/cm", "temp_c": f"{15 + i % 15}",
                         "texture": ("loam", "clay loam", "sandy loam")[i % 3],
                         "depth_cm": f"{(i % 3) * 15}"})
        payloads.append({"sample": "paste", "value": f"{1 + 0.3 * i:.1f}", "unit": "dS/m",
                         "compensated": True, "note": "north corner" if i % 4 == 0 else ""})
        payloads.append({"sample": "feed", "value": f"{1.5 + 0.05 * i:.2f}", "unit": "mS/cm",
                         "compensated": True})
        if slips and i % 10 == 0:
            payloads.append({"sample": "water", "value": f"{700 + 10 * i}", "unit": "dS/m",
                             "temp_c": "20"})
    out = []
    for k, pl in enumerate(payloads):
        rec = build_record({**pl, "site": "Block 1"})
        out.append(rec)
    return out


def _site_names(n: int = 40) -> list[str]:
    return [f"Block {i}" for i in range(1, n // 2 + 1)] + \
        [f"Greenhouse B bench {i}" for i in range(1, n - n // 2 + 1)]


def _rows(n: int, seed: int = 7, slips: bool = False):
    """n reading records (dicts for the readings table) from the templates."""
    import datetime as dt
    import random
    import uuid
    rng = random.Random(seed)
    temps = _templates(slips)
    sites = _site_names()
    start = dt.datetime(2025, 3, 1, 7, 0, tzinfo=dt.timezone(dt.timedelta(hours=2)))
    for i in range(n):
        rec = dict(temps[i % len(temps)])
        rec["uuid"] = str(uuid.UUID(int=rng.getrandbits(128), version=4))
        rec["site"] = sites[rng.randrange(len(sites))]
        t = start + dt.timedelta(minutes=int(i * 525600 / max(n, 1)))
        rec["taken_at"] = t.isoformat(timespec="seconds")
        rec["recorded_at"] = t.astimezone(dt.timezone.utc).isoformat(timespec="seconds")
        yield rec


_COLS = None


def _insert_plain(conn, rows) -> float:
    """The bare reference: one executemany of prepared tuples, one transaction.
    Sites and visits are made first (not timed); returns seconds."""
    from fieldapp import store
    global _COLS
    _COLS = ("uuid", "site_id", "visit_id") + store.INPUT_FIELDS + store.COMPUTED_FIELDS \
        + ("result_json", "app_version", "recorded_at")
    rows = list(rows)
    site_ids, visit_ids = {}, {}
    with store.transaction(conn):
        for name in sorted({r["site"] for r in rows}):
            site_ids[name] = store.ensure_site(conn, name)["id"]
        for r in rows:
            key = (site_ids[r["site"]], r["taken_at"][:10])
            if key not in visit_ids:
                conn.execute("INSERT OR IGNORE INTO visits (site_id, visit_date, visited_by) "
                             "VALUES (?,?,'')", key)
                visit_ids[key] = conn.execute(
                    "SELECT id FROM visits WHERE site_id=? AND visit_date=? AND visited_by=''",
                    key).fetchone()[0]
    tuples = []
    for r in rows:
        vals = {**r, "site_id": site_ids[r["site"]],
                "visit_id": visit_ids[(site_ids[r["site"]], r["taken_at"][:10])],
                "compensated": 1 if r.get("compensated") else 0,
                "note": r.get("note") or "", "flags": r.get("flags") or ""}
        tuples.append(tuple(vals.get(c) for c in _COLS))
    sql = store.readings_insert_sql(_COLS, dialect="sqlite")  # the view columns (schema 015) from the same JSON
    t0 = time.perf_counter()
    conn.execute("BEGIN IMMEDIATE")
    conn.executemany(sql, tuples)
    conn.execute("COMMIT")
    return time.perf_counter() - t0


def make_log(folder, n: int, slips: bool = False) -> tuple[str, float]:
    """A log of n readings in ``folder`` (``slips``: some with an error-level
    flag, see :func:`_templates`); returns (database path, seconds the bare
    executemany took)."""
    from pathlib import Path

    from fieldapp import store
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    db = folder / store.DB_NAME
    conn = store.connect(db)
    try:
        secs = _insert_plain(conn, _rows(n, slips=slips))
    finally:
        conn.close()
    return str(db), secs


# ---------------------------------------------------------------- export

class _Sink:
    """A text file that counts what is written and keeps nothing."""

    def __init__(self):
        self.chars = 0

    def write(self, s):
        self.chars += len(s)
        return len(s)


def _export_core(db):
    from fieldapp import csvio, store
    conn = store.connect(db, upgrade=False)
    try:
        sink = _Sink()
        csvio.export(conn, sink)
        return sink.chars
    finally:
        conn.close()


def _export_bare(db):
    import csv
    import sqlite3

    from fieldapp import csvio, store
    conn = sqlite3.connect(db)
    try:
        sink = _Sink()
        w = csv.writer(sink, lineterminator="\r\n")
        w.writerow(csvio.COLUMNS)
        have = {d[0] for d in conn.execute(
            f"SELECT * FROM ({store._READING_SELECT}) LIMIT 0").description}
        cols = ", ".join(f"x.{c}" if c in have else "''" for c in csvio.COLUMNS)
        w.writerows(conn.execute(f"SELECT {cols} FROM ({store._READING_SELECT}) x "
                                 "ORDER BY x.id"))
        return sink.chars
    finally:
        conn.close()


def _peak_kib(fn, *args) -> float:
    import tracemalloc
    tracemalloc.start()
    try:
        fn(*args)
        return tracemalloc.get_traced_memory()[1] / 1024
    finally:
        tracemalloc.stop()


def bench_export(db, small_db=None, repeat: int = 3) -> dict:
    t_core = _best_of(lambda: _export_core(db), repeat)
    t_bare = _best_of(lambda: _export_bare(db), repeat)
    out = {"core_s": t_core, "bare_s": t_bare, "ratio": t_core / t_bare,
           "core_peak_kib": _peak_kib(_export_core, db),
           "bare_peak_kib": _peak_kib(_export_bare, db)}
    if small_db:
        out["core_peak_small_kib"] = _peak_kib(_export_core, small_db)
    return out


# ---------------------------------------------------------------- import

def bench_import(db, folder) -> dict:
    """Export the log to a file, import it into an empty log through the
    app's import; the reference is a bare executemany of the same rows."""
    import shutil
    from pathlib import Path

    from fieldapp import csvio, store
    folder = Path(folder)
    csv_path = folder / "export.csv"
    conn = store.connect(db, upgrade=False)
    try:
        with open(csv_path, "w", encoding="utf-8", newline="") as f:
            csvio.export(conn, f)
        n = conn.execute("SELECT COUNT(*) FROM readings").fetchone()[0]
    finally:
        conn.close()
    target = folder / "imported"
    shutil.rmtree(target, ignore_errors=True)
    target.mkdir()
    conn = store.connect(target / store.DB_NAME)
    try:
        t0 = time.perf_counter()
        with open(csv_path, encoding="utf-8-sig", newline="") as f:
            counts = csvio.import_csv(conn, f)
        t_core = time.perf_counter() - t0
    finally:
        conn.close()
    bare_dir = folder / "bare"
    shutil.rmtree(bare_dir, ignore_errors=True)
    _, t_bare = make_log(bare_dir, n)
    return {"n": n, "added": counts["added"], "core_s": t_core, "bare_s": t_bare,
            "ratio": t_core / t_bare}


# ---------------------------------------------------------------- the API

def _bench_server(data_dir: str, port: int, threads: int = 8) -> None:
    """The app as `serve` runs it, plus one bare endpoint for the floor:
    POST /bench/floor does one SQLite insert in the same file, with the same
    connection settings, and answers 201 with a small JSON."""
    import waitress
    from flask import jsonify

    from fieldapp import create_app, store
    app = create_app({"DATA_DIR": data_dir})
    conn = store.connect(app.config["DATABASE"])
    conn.execute("CREATE TABLE IF NOT EXISTS bench_floor (id INTEGER PRIMARY KEY, v TEXT)")
    conn.close()

    @app.post("/bench/floor")
    def floor():
        from fieldapp.web.db import get_db
        db = get_db()
        with store.transaction(db):
            cur = db.execute("INSERT INTO bench_floor (v) VALUES (?)", ("x",))
        return jsonify(id=cur.lastrowid), 201

    waitress.serve(app, host="127.0.0.1", port=port, threads=threads, _quiet=True,
                   max_request_body_size=app.config["MAX_CONTENT_LENGTH"])


def _free_port() -> int:
    import socket
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _start(cmd, port, path="/", env=None, timeout=60) -> float:
    """Start a server process; seconds until it first answers 200 on path."""
    import subprocess
    import urllib.request
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            env=env)
    while True:
        try:
            with urllib.request.urlopen(f"http://127.0.0.1:{port}{path}", timeout=2) as r:
                if r.status == 200:
                    return time.perf_counter() - t0, proc
        except OSError:
            if proc.poll() is not None:
                raise RuntimeError(f"server exited: {cmd}")
            if time.perf_counter() - t0 > timeout:
                proc.kill()
                raise RuntimeError("server did not start")
            time.sleep(0.005)


def _env():
    import os
    from pathlib import Path
    root = Path(__file__).resolve().parents[2]      # the checkout: tests/benchmarks/..
    env = dict(os.environ, PYTHONPATH=str(root) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    # Started as a user's install runs: with compiled bytecode (pip writes it at
    # install), not recompiling every module at each start.
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    return env


def _latencies(port: int, path: str, body_fn, clients: int, per_client: int) -> list[float]:
    import http.client
    import json
    import threading
    out: list[float] = []
    lock = threading.Lock()
    barrier = threading.Barrier(clients)

    def run(k):
        conn = http.client.HTTPConnection("127.0.0.1", port, timeout=60)
        mine = []
        barrier.wait()
        for i in range(per_client):
            data = json.dumps(body_fn(k, i))
            t0 = time.perf_counter()
            conn.request("POST", path, data, {"Content-Type": "application/json"})
            r = conn.getresponse()
            r.read()
            mine.append(time.perf_counter() - t0)
            if r.status != 201:
                raise RuntimeError(f"{path} answered {r.status}")
        conn.close()
        with lock:
            out.extend(mine)

    ts = [threading.Thread(target=run, args=(k,)) for k in range(clients)]
    for t in ts:
        t.start()
    for t in ts:
        t.join()
    return out


def bench_api(data_dir: str, levels=(1, 8, 32), requests_per_level: int = 480) -> dict:
    import subprocess
    import sys
    import uuid
    port = _free_port()
    from pathlib import Path
    here = str(Path(__file__).resolve().parent)
    cmd = [sys.executable, "-c", f"import sys; sys.path.insert(0, {here!r}); "
           "from bench import _bench_server; "
           f"_bench_server({str(data_dir)!r}, {port})"]
    _, proc = _start(cmd, port, "/api/sites", env=_env())
    sites = _site_names()

    def reading(k, i):
        return {"uuid": str(uuid.uuid4()), "site": sites[(k + i) % len(sites)],
                "sample": "extract", "ratio": "1:5", "value": f"{0.4 + (i % 50) / 100:.2f}",
                "unit": "mS/cm", "temp_c": "18", "texture": "clay loam", "depth_cm": "15",
                "meter": "pocket tester 1"}

    out = {}
    try:
        _latencies(port, "/api/readings", reading, 2, 20)              # warm up both
        _latencies(port, "/bench/floor", lambda k, i: {"v": i}, 2, 20)
        for c in levels:
            per = max(10, requests_per_level // c)
            floor = _latencies(port, "/bench/floor", lambda k, i: {"v": i}, c, per)
            api = _latencies(port, "/api/readings", reading, c, per)
            out[c] = {"api": _pct(api), "floor": _pct(floor), "n": len(api)}
        out["export_http"] = _http_export(port, proc.pid)
    finally:
        proc.terminate()
        proc.wait(10)
    return out


def _pct(xs) -> dict:
    a = np.asarray(xs) * 1000
    return {"p50_ms": float(np.percentile(a, 50)), "p95_ms": float(np.percentile(a, 95))}


def _vm_hwm_kib(pid: int) -> int | None:
    try:
        with open(f"/proc/{pid}/status") as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1])
    except OSError:
        return None
    return None


def _http_export(port: int, pid: int) -> dict:
    import urllib.request
    before = _vm_hwm_kib(pid)
    t0 = time.perf_counter()
    n = 0
    with urllib.request.urlopen(f"http://127.0.0.1:{port}/export.csv", timeout=300) as r:
        while True:
            chunk = r.read(1 << 16)
            if not chunk:
                break
            n += len(chunk)
    return {"s": time.perf_counter() - t0, "bytes": n, "hwm_before_kib": before,
            "hwm_after_kib": _vm_hwm_kib(pid)}


# ---------------------------------------------------------------- the page

def bench_page(data_dir: str) -> dict:
    """Load the entry page in Chromium (Playwright, when installed) and count
    the requests and bytes over the wire, and those to another host."""
    import sys
    port = _free_port()
    _, proc = _start([sys.executable, "-m", "fieldapp", "serve", "--data", str(data_dir),
                      "--port", str(port)], port, env=_env())
    base = f"http://127.0.0.1:{port}"
    try:
        try:
            from playwright.sync_api import sync_playwright
        except ImportError:
            return _page_by_parsing(base)
        import os
        chromium = os.environ.get("FIELDAPP_CHROMIUM", "/usr/bin/chromium")
        with sync_playwright() as p:
            b = p.chromium.launch(executable_path=chromium, headless=True,
                                  args=["--no-sandbox", "--disable-gpu",
                                        "--disable-background-networking",
                                        "--disable-component-update", "--disable-sync"])
            ctx = b.new_context(viewport={"width": 360, "height": 740},
                                service_workers="block")
            page = ctx.new_page()
            reqs = []
            page.on("requestfinished", lambda r: reqs.append(r))
            page.goto(base + "/", wait_until="networkidle")
            total = 0
            other = 0
            urls = []
            for r in reqs:
                s = r.sizes()
                total += s["responseBodySize"] + s["responseHeadersSize"]
                urls.append(r.url)
                if not (r.url.startswith(base) or r.url.startswith("data:")):
                    other += 1
            b.close()
        return {"requests": len(reqs), "bytes": total, "other_hosts": other,
                "urls": urls, "how": "Chromium"}
    finally:
        proc.terminate()
        proc.wait(10)


def _page_by_parsing(base: str) -> dict:
    import re
    import urllib.request
    with urllib.request.urlopen(base + "/") as r:
        html = r.read()
        total = len(html) + len(str(r.headers))
    urls = [base + "/"]
    other = 0
    for ref in re.findall(rb'(?:src|href)="([^"]+)"', html):
        ref = ref.decode()
        if ref.startswith("data:") or not (ref.endswith(".js") or ref.endswith(".css")):
            continue
        if ref.startswith("http"):
            other += 1
            continue
        with urllib.request.urlopen(base + ref) as r:
            total += len(r.read()) + len(str(r.headers))
        urls.append(base + ref)
    return {"requests": len(urls), "bytes": total, "other_hosts": other, "urls": urls,
            "how": "HTML parsed (Playwright not installed)"}


# ---------------------------------------------------------------- cold start

_BARE_SERVER = """
import sys, waitress
from flask import Flask
app = Flask(__name__)
@app.get("/")
def index():
    return "ok"
waitress.serve(app, host="127.0.0.1", port=int(sys.argv[1]), _quiet=True)
"""


def bench_start(data_dir: str, repeat: int = 3) -> dict:
    import statistics
    import sys
    ours, bare = [], []
    for _ in range(repeat):
        port = _free_port()
        s, proc = _start([sys.executable, "-m", "fieldapp", "serve", "--data", str(data_dir),
                          "--port", str(port)], port, env=_env())
        proc.terminate()
        proc.wait(10)
        ours.append(s)
        port = _free_port()
        s, proc = _start([sys.executable, "-c", _BARE_SERVER, str(port)], port, env=_env())
        proc.terminate()
        proc.wait(10)
        bare.append(s)
    return {"fieldapp_s": statistics.median(ours), "bare_s": statistics.median(bare)}


# ---------------------------------------------------------------- printing

def _line(label, figure, reference, note=""):
    print(f"  {label:<34} {figure:>16}   {reference:<30} {note}".rstrip())


def run_all(n: int, what: str, folder=None) -> int:
    import shutil
    import tempfile
    from pathlib import Path
    work = Path(folder or tempfile.mkdtemp(prefix="fieldapp-bench-"))
    try:
        print(f"fieldapp bench {what}: a log of {n:,} invented readings in {work}")
        t0 = time.perf_counter()
        db, t_plain = make_log(work / "log", n)
        print(f"  (log made in {time.perf_counter() - t0:.1f} s)")
        if what in ("all", "export"):
            small, _ = make_log(work / "small", max(1, n // 10))
            r = bench_export(db, small)
            print(f"exporting {n:,} readings as CSV (csvio.export, no disk writes)")
            _line("time", f"{r['core_s']:.2f} s",
                  f"bare sqlite3 + csv.writer {r['bare_s']:.2f} s",
                  f"ratio {r['ratio']:.2f}x (target 1.5x)")
            _line("peak memory (tracemalloc)", f"{r['core_peak_kib']:.0f} KiB",
                  f"bare {r['bare_peak_kib']:.0f} KiB",
                  f"at {max(1, n // 10):,} readings: {r['core_peak_small_kib']:.0f} KiB")
        if what in ("all", "import"):
            r = bench_import(db, work)
            print(f"importing {r['n']:,} readings from a CSV export into an empty log")
            _line("csvio.import_csv", f"{r['core_s']:.1f} s",
                  f"bare executemany {r['bare_s']:.2f} s",
                  f"ratio {r['ratio']:.0f}x (target 2x)")
        if what in ("all", "api"):
            print("saving a reading through the API (POST /api/readings), latency in ms;"
                  " floor = the same server doing one bare SQLite insert")
            r = bench_api(str(work / "log"))
            for c in (1, 8, 32):
                a, f = r[c]["api"], r[c]["floor"]
                _line(f"{c:>2} client(s)  p50 / p95",
                      f"{a['p50_ms']:.1f} / {a['p95_ms']:.1f}",
                      f"floor {f['p50_ms']:.1f} / {f['p95_ms']:.1f}",
                      f"p95 ratio {a['p95_ms'] / f['p95_ms']:.1f}x (target 3x)")
            e = r["export_http"]
            grown = (e["hwm_after_kib"] or 0) - (e["hwm_before_kib"] or 0)
            _line("GET /export.csv through the server", f"{e['s']:.2f} s",
                  f"{e['bytes'] / 1e6:.1f} MB", f"server peak RSS grew {grown / 1024:.1f} MiB")
        if what in ("all", "page"):
            r = bench_page(str(work / "log"))
            print(f"the entry page, as {r['how']} loads it")
            _line("weight over the wire", f"{r['bytes'] / 1024:.1f} KB",
                  f"{r['requests']} requests", "target under 100 KB")
            _line("requests to another host", f"{r['other_hosts']}", "", "target 0")
        if what in ("all", "start"):
            r = bench_start(str(work / "log"))
            print(f"cold start: process start to the first page served (log of {n:,})")
            _line("python -m fieldapp serve", f"{r['fieldapp_s']:.2f} s",
                  f"bare Flask + waitress {r['bare_s']:.2f} s",
                  f"ratio {r['fieldapp_s'] / r['bare_s']:.1f}x (target 2x)")
    finally:
        if folder is None:
            shutil.rmtree(work, ignore_errors=True)
    return 0


def main(argv=None) -> int:
    import argparse
    p = argparse.ArgumentParser(prog="fieldapp bench")
    p.add_argument("what", choices=["convert", "all", "api", "export", "import", "page",
                                    "start"])
    p.add_argument("--n", type=int, default=None,
                   help="readings (convert: 1,000,000; the others: 100,000)")
    p.add_argument("--repeat", type=int, default=3)
    p.add_argument("--dir", help="work folder to keep (default: a temporary one)")
    a = p.parse_args(argv)
    if a.what != "convert":
        return run_all(a.n or 100_000, a.what, a.dir)
    r = bench_convert(a.n or 1_000_000, a.repeat)
    print(f"readings                 {r['n']:,}")
    print(f"core path (convert-csv)  {r['core_s']:.3f} s  ({r['core_readings_per_s']:,.0f} readings/s)")
    print(f"bare numpy, same arrays  {r['bare_numpy_s']:.4f} s")
    print(f"ratio core / bare        {r['ratio']:.1f}x   (target: within 5x)")
    return 0
