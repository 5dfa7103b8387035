"""Benchmark: an office log on PostgreSQL, the site page and summary API, and
the export's memory.

    FIELDAPP_BENCH_PG=postgresql://USER@127.0.0.1:PORT/postgres \\
        .venv/bin/python tests/benchmarks/bench_pg.py [N_READINGS] [N_SITES]

(FIELDAPP_TEST_PG, as tests/run.sh sets it, serves too.) Builds, once, a
database ``fieldapp_bench_<N>_<SITES>`` of N invented readings (default
1,000,000 over 400 sites; the issue's figure is 10,000,000) inside the
server: the 160 converted template rows of ``bench._templates`` go into a
table, then ``INSERT ... SELECT`` over ``generate_series`` in chunks of
250,000 fills visits and readings (the flag-row trigger runs per statement).
A later run with the same N and SITES reuses the database. Then it starts
``serve --db`` on 127.0.0.1 and fetches, 30 times each, over loopback (so
nearly all of it is server time):

* floor, same server, same run: GET /api/readings/<uuid> (one stored reading
  through the same stack);
* GET /sites/<id> (a site's page) and GET /api/sites/<id>/summary;

printing p50 and p95 beside the floor's, against the issue's 150 ms. Then
the server's peak memory (VmHWM) before and after streaming one site's export
and the whole log's: flat memory means the peak does not grow with the rows.
Figures only; nothing passes or fails.
"""
from __future__ import annotations

import http.client
import os
import re
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))
from conftest import ServerProcess            # noqa: E402
from fieldapp import store             # noqa: E402
from fieldapp.store import pg          # noqa: E402
import bench  # noqa: E402  (tests/benchmarks/bench.py: the invented templates)

CHUNK = 250_000


def _url(server: str, dbname: str) -> str:
    from urllib.parse import urlsplit, urlunsplit
    return urlunsplit(urlsplit(server)._replace(path="/" + dbname))


def build(server: str, n: int, n_sites: int) -> str:
    """The bench database's URL, built unless a finished one is there."""
    import psycopg
    name = f"fieldapp_bench_{n}_{n_sites}"
    url = _url(server, name)
    admin = psycopg.connect(server, autocommit=True)
    try:
        exists = admin.execute("SELECT 1 FROM pg_database WHERE datname = %s",
                               (name,)).fetchone()
        if exists:
            conn = pg.connect(url)
            try:
                done = conn.execute("SELECT to_regclass('bench_done')").fetchone()[0]
                if done and conn.execute("SELECT n FROM bench_done").fetchone()[0] == n:
                    print(f"reusing {name} (built earlier)")
                    return url
            finally:
                conn.close()
            admin.execute(f"DROP DATABASE {name} WITH (FORCE)")
        admin.execute(f"CREATE DATABASE {name}")
    finally:
        admin.close()
    t0 = time.perf_counter()
    conn = store.connect(url)                 # the schema, by the same migrations
    try:
        names = [f"Block {i}" for i in range(1, n_sites // 2 + 1)] + \
            [f"Greenhouse B bench {i}" for i in range(1, n_sites - n_sites // 2 + 1)]
        with store.transaction(conn):
            for s in names:
                store.ensure_site(conn, s)
        temps = bench._templates()
        conn.execute("CREATE TABLE bench_templates AS SELECT 0::integer AS k, r.* "
                     "FROM readings r WHERE false")
        cols = ("k",) + tuple(c for c in store.INPUT_FIELDS if c != "taken_at") \
            + store.COMPUTED_FIELDS + ("result_json", "app_version")
        sql = store.readings_insert_sql(cols, dialect="postgresql").replace(
            "INSERT INTO readings", "INSERT INTO bench_templates", 1)
        rows = []
        for k, rec in enumerate(temps):
            vals = [k] + [rec.get(c) for c in cols[1:]]
            vals[cols.index("compensated")] = 1 if rec.get("compensated") else 0
            vals[cols.index("note")] = rec.get("note") or ""
            vals[cols.index("flags")] = rec.get("flags") or ""
            rows.append(vals)
        conn.executemany(sql, rows)
        rcols = [r[0] for r in conn.execute(
            "SELECT column_name FROM information_schema.columns WHERE table_name = 'readings' "
            "AND table_schema = current_schema() AND column_name <> 'id' "
            "ORDER BY ordinal_position")]
        special = {"uuid": "md5('fieldapp-bench-' || g)::uuid::text", "site_id": "x.site_id",
                   "visit_id": "v.id", "supersedes_id": "NULL", "taken_at": "x.taken_at",
                   "recorded_at": "x.recorded_at"}
        picked = ", ".join(special.get(c, f"t.{c}") for c in rcols)
        # one reading every step minutes over a year, at a site spread by a prime stride
        step = 525600.0 / n
        gen = (f"SELECT g, 1 + (g * 7919) % {n_sites} AS site_id, "
               f"timestamp '2025-03-01 07:00' + (g * {step!r}) * interval '1 minute' AS ts "
               "FROM generate_series(?::bigint, ?::bigint) g")
        ids = {r["name"]: r["id"] for r in store.list_sites(conn)}
        assert sorted(ids.values()) == list(range(1, n_sites + 1))
        for a in range(0, n, CHUNK):
            b = min(n, a + CHUNK) - 1
            t = time.perf_counter()
            with store.transaction(conn):
                conn.execute("INSERT INTO visits (site_id, visit_date, visited_by) "
                             f"SELECT DISTINCT site_id, to_char(ts, 'YYYY-MM-DD'), '' FROM ({gen}) q "
                             "ON CONFLICT DO NOTHING", (a, b))
                conn.execute(
                    f"INSERT INTO readings ({', '.join(rcols)}) SELECT {picked} FROM ("
                    f"SELECT g, site_id, to_char(ts, 'YYYY-MM-DD\"T\"HH24:MI:SS') || '+02:00' "
                    "AS taken_at, to_char(ts - interval '2 hours', 'YYYY-MM-DD\"T\"HH24:MI:SS') "
                    f"|| '+00:00' AS recorded_at, to_char(ts, 'YYYY-MM-DD') AS day FROM ({gen}) q"
                    f") x JOIN bench_templates t ON t.k = x.g % {len(temps)} "
                    "JOIN visits v ON v.site_id = x.site_id AND v.visit_date = x.day "
                    "AND v.visited_by = ''", (a, b))
            print(f"  readings {b + 1:>12,} of {n:,} ({time.perf_counter() - t:.0f} s for this "
                  f"chunk)", flush=True)
        conn.execute("VACUUM ANALYZE")
        conn.execute("CREATE TABLE bench_done (n bigint)")
        conn.execute("INSERT INTO bench_done VALUES (?)", (n,))
    finally:
        conn.close()
    print(f"built {name} in {time.perf_counter() - t0:.0f} s")
    return url


def timed(port: int, path: str, n: int = 30) -> tuple[dict, int]:
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=300)
    times, size = [], 0
    for i in range(n + 2):
        t = time.perf_counter()
        conn.request("GET", path)
        r = conn.getresponse()
        body = r.read()
        if i >= 2:                     # the first two warm the pool and the caches
            times.append(time.perf_counter() - t)
        size = len(body)
        assert r.status == 200, (path, r.status, body[:300])
    conn.close()
    a = np.asarray(times) * 1000
    return {"p50": float(np.percentile(a, 50)), "p95": float(np.percentile(a, 95))}, size


def hwm_kib(pid: int) -> int:
    with open(f"/proc/{pid}/status") as f:
        for line in f:
            if line.startswith("VmHWM:"):
                return int(line.split()[1])
    return 0


def export(port: int, query: str = "") -> tuple[float, int, int]:
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=3600)
    t = time.perf_counter()
    conn.request("GET", "/export.csv" + query)
    r = conn.getresponse()
    n_bytes = lines = 0
    while True:
        chunk = r.read(1 << 16)
        if not chunk:
            break
        n_bytes += len(chunk)
        lines += chunk.count(b"\n")
    conn.close()
    return time.perf_counter() - t, n_bytes, lines - 1


def main():
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000
    n_sites = int(sys.argv[2]) if len(sys.argv) > 2 else 400
    server = os.environ.get("FIELDAPP_BENCH_PG") or os.environ.get("FIELDAPP_TEST_PG")
    if not server:
        sys.exit("bench_pg: set FIELDAPP_BENCH_PG to a PostgreSQL server URL "
                 "(postgresql://USER@127.0.0.1:PORT/postgres, a user that may create databases)")
    url = build(server, n, n_sites)
    conn = pg.connect(url)
    try:
        total = conn.execute("SELECT COUNT(*) FROM readings").fetchone()[0]
        site_id, per_site = conn.execute(
            "SELECT site_id, COUNT(*) FROM readings WHERE site_id = ? GROUP BY site_id",
            (n_sites // 3,)).fetchone()
        site_name = store.get_site(conn, site_id)["name"]
        uuid = conn.execute("SELECT uuid FROM readings WHERE site_id = ? ORDER BY id DESC "
                            "LIMIT 1", (site_id,)).fetchone()[0]
        version = conn.execute("SHOW server_version").fetchone()[0]
    finally:
        conn.close()
    print(f"office log on PostgreSQL {version}: {total:,} readings over {n_sites} sites "
          f"({per_site:,} at {site_name})")
    with tempfile.TemporaryDirectory() as d:
        srv = ServerProcess(Path(d) / "unused", extra=["--db", url]).start(timeout=120)
        try:
            floor, fs = timed(srv.port, f"/api/readings/{uuid}")
            print(f"{'floor: GET /api/readings/<uuid>':40s} {fs / 1024:8.1f} KB   "
                  f"p50 {floor['p50']:7.1f} ms   p95 {floor['p95']:7.1f} ms")
            for path in (f"/sites/{site_id}", f"/api/sites/{site_id}/summary",
                         f"/api/readings?site={site_name.replace(' ', '%20')}"):
                t, size = timed(srv.port, path)
                mark = "" if t["p95"] < 150 else "   (over the 150 ms target)"
                print(f"{path[:40]:40s} {size / 1024:8.1f} KB   p50 {t['p50']:7.1f} ms   "
                      f"p95 {t['p95']:7.1f} ms   ({t['p95'] / floor['p95']:.0f}x the floor)"
                      f"{mark}")
            pid = srv.proc.pid
            h0 = hwm_kib(pid)
            s1, b1, r1 = export(srv.port, "?site=" + site_name.replace(" ", "%20"))
            h1 = hwm_kib(pid)
            print(f"export of one site: {r1:,} rows, {b1 / 1e6:.1f} MB in {s1:.1f} s; "
                  f"server peak memory {h0 / 1024:.0f} -> {h1 / 1024:.0f} MiB")
            s2, b2, r2 = export(srv.port)
            h2 = hwm_kib(pid)
            print(f"export of the whole log: {r2:,} rows, {b2 / 1e6:.1f} MB in {s2:.1f} s "
                  f"({r2 / s2:,.0f} rows/s); server peak memory {h1 / 1024:.0f} -> "
                  f"{h2 / 1024:.0f} MiB ({(h2 - h1) / 1024:+.0f} MiB for "
                  f"{r2 / max(r1, 1):.0f}x the rows)")
        finally:
            srv.stop()
    out = srv.proc.stdout.read().decode(errors="replace")
    if re.search(r"Traceback", out):
        print(out[-2000:])


if __name__ == "__main__":
    main()
