"""Benchmark: size and time of every page and API list on a large log.

    .venv/bin/python tests/benchmarks/bench_pages.py [N_READINGS] [slips] [--cache DIR]
                                                     [--after-save]

Takes a log of N invented readings over 40 sites (default 200,000;
`bench.make_log`, one executemany) from the benchmark cache (default: the
system's temporary folder / fieldapp-bench-cache, the folder and the
function bench_csv.py uses, so a log built by either is built once), starts
`serve` on 127.0.0.1 and fetches each page and API list once and then 5
times, printing the response size, the median time of the five and the
time of the first (loopback, so nearly all of it is server time). Site 2's
views are fetched first (modules loaded, templates compiled), so the first
fetch of /sites/1 is the server's first sight of site 1: it counts the
site's readings, which ``store.SiteCache`` keeps for the next views of the
site (its older page, its report, its summary). Floor, same server,
same run: GET /api/readings/<uuid> (one stored reading through the same
stack). Target from issue 12: under 250 KB and 150 ms. Figures only. With
``slips`` one reading in 41 carries an error-level flag (a unit slip), so
the sites list has readings to check and the charts flagged points to keep.
With ``--after-save`` the server runs on a copy of the cached log, and at the
end saves 5 readings at site 1, fetching /sites/1 after each."""
from __future__ import annotations

import http.client
import re
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))
from conftest import ServerProcess            # noqa: E402
from fieldapp import store             # noqa: E402
import bench  # noqa: E402  (tests/benchmarks/bench.py)
import bench_csv  # noqa: E402  (tests/benchmarks/bench_csv.py: the shared cache)


def _wait_for_another_build(folder: Path, patience_s: float = 1800) -> None:
    """Another benchmark may be building the same cached log right now (its
    folder is there, built.json not yet): wait for it rather than remove the
    folder under it. A folder untouched for two minutes is a dead build."""
    t0 = time.perf_counter()
    while folder.exists() and not (folder / "built.json").exists():
        newest = max((p.stat().st_mtime for p in folder.iterdir()), default=0)
        if time.time() - newest > 120 or time.perf_counter() - t0 > patience_s:
            return
        time.sleep(5)


def cached_log(cache: Path, n: int, slips: bool) -> Path:
    """bench_csv.cached_log's log of n readings; with ``slips`` its twin in a
    folder of its own beside it (same naming, same built.json marker)."""
    folder = cache / (f"log-{n}-{bench_csv._schema_key()}" + ("-slips" if slips else ""))
    _wait_for_another_build(folder)
    if not slips:
        return bench_csv.cached_log(cache, n)
    if not (folder / "built.json").exists():
        import json
        import shutil
        shutil.rmtree(folder, ignore_errors=True)
        t0 = time.perf_counter()
        bench.make_log(folder, n, slips=True)
        (folder / "built.json").write_text(
            json.dumps({"n": n, "slips": True, "build_s": time.perf_counter() - t0}))
        print(f"  (built a log of {n:,} readings with slips in {time.perf_counter() - t0:.0f} s)")
    return folder / store.DB_NAME


#: Fetches of each page after its first; the median is printed.
REPEAT = 5


def fetch(port, path, n=3):
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=300)
    times, size, headers = [], 0, {}
    for _ in range(n):
        t = time.perf_counter()
        conn.request("GET", path)
        r = conn.getresponse()
        body = r.read()
        times.append(time.perf_counter() - t)
        size, headers = len(body), dict(r.getheaders())
        assert r.status == 200, (path, r.status, body[:200])
    conn.close()
    return statistics.median(times), size, headers, body, times[0]


def after_saves(port, n: int = 5) -> list[float]:
    """Save a reading at site 1, then fetch /sites/1: n times. Each save changes
    what the site views keep, so each page adds the saved reading to the kept
    totals and asks for its chart candidates again."""
    import json
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=300)
    times = []
    for k in range(n):
        body = json.dumps({"site": "Block 1", "sample": "water", "value": str(500 + k),
                           "unit": "µS/cm", "temp_c": "20"})
        conn.request("POST", "/api/readings", body=body,
                     headers={"Content-Type": "application/json"})
        r = conn.getresponse()
        assert r.status == 201, (r.status, r.read()[:200])
        r.read()
        t = time.perf_counter()
        conn.request("GET", "/sites/1")
        r = conn.getresponse()
        r.read()
        times.append(time.perf_counter() - t)
        assert r.status == 200
    conn.close()
    return times


def main():
    args = sys.argv[1:]
    cache = Path(tempfile.gettempdir()) / "fieldapp-bench-cache"
    if "--cache" in args:
        cache = Path(args.pop(args.index("--cache") + 1))
        args.remove("--cache")
    saves = "--after-save" in args
    n = int(args[0]) if args and args[0].isdigit() else 200_000
    slips = "slips" in args
    cache.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()
    db = cached_log(cache, n, slips)
    conn = store.connect(db)
    uuid = conn.execute("SELECT uuid FROM readings ORDER BY id DESC LIMIT 1").fetchone()[0]
    per_site = conn.execute("SELECT COUNT(*) FROM readings WHERE site_id = 1").fetchone()[0]
    conn.close()
    print(f"log of {n:,} readings over 40 sites ({per_site:,} at site 1"
          + (", 1 in 41 with an error flag" if slips else "")
          + f"), ready in {time.perf_counter() - t0:.0f} s: {db}")
    work = None
    if saves:     # saves go to a copy: the cached log stays as built
        import shutil
        work = tempfile.TemporaryDirectory(prefix="fieldapp-bench-pages-")
        shutil.copy(db, Path(work.name) / db.name)
        db = Path(work.name) / db.name
    srv = ServerProcess(db.parent).start(timeout=120)
    try:
        ft, fs, _, _, _ = fetch(srv.port, f"/api/readings/{uuid}", 5)
        print(f"{'floor: GET /api/readings/<uuid>':44s} {fs / 1024:8.1f} KB {ft * 1000:8.1f} ms")
        # the first site views load the chart and interpretation modules (web.Later)
        # and compile their templates: views of another site first, so that site
        # 1's first fetches are its own cost (counting its readings, the picks)
        warm = [fetch(srv.port, p, 1)[0] for p in ("/", "/sites", "/sites/2", "/sites/2/report",
                                                  "/api/sites/2/summary")]
        print(f"{'warm-up: /, /sites, site 2 page, report, API':44s} {'':11s} "
              + " / ".join(f"{w * 1000:.0f}" for w in warm) + " ms")
        print(f"{'':44s} {'size':>11s} {'median':>11s} {'first':>11s}")
        paths = ["/", "/sites", "/sites/1", "older", "/sites/1/report", "/map", "/meters",
                 "/api/readings", "/api/readings?site=Block%201", "/api/readings?limit=100",
                 "/api/sites", "/api/sites/1/summary"]
        older = None
        for p in paths:
            if p == "older":          # the site log's "Older readings" link
                if older is None:
                    continue
                p = older.group(1).decode().replace("&amp;", "&")
            # 1 + 3 fetches: the first one is the server's first sight of the page
            # (nothing kept from an earlier request), the median is of the three after it
            first, _, _, _, _ = fetch(srv.port, p, 1)
            t, size, h, body, _ = fetch(srv.port, p, REPEAT)
            if p == "/sites/1":
                older = re.search(rb'id="older-readings" rel="next" href="([^"]+)"', body)
            mark = "" if size < 250 * 1024 and max(t, first) < 0.150 else "   (over target)"
            print(f"{p[:44]:44s} {size / 1024:8.1f} KB {t * 1000:8.1f} ms {first * 1000:8.1f} ms"
                  + mark)
        if saves:
            ts = after_saves(srv.port)
            print(f"{'/sites/1 right after a save at site 1 (x5)':44s} {'':11s} "
                  f"{statistics.median(ts) * 1000:8.1f} ms (max {max(ts) * 1000:.1f} ms)")
    finally:
        srv.stop()
        if work is not None:
            work.cleanup()


if __name__ == "__main__":
    main()
