"""Benchmark: an office log on PostgreSQL, the site page and summary API, and
the export's memory.

    FIELDAPP_BENCH_PG=postgresql://USER@127.0.0.1:PORT/postgres \\
        .venv/bin/python tests/benchmarks/bench_pg.py [N_READINGS] [N_SITES]
    ... bench_pg.py --compare N_READINGS N_SITES   (the fast build against the plain one)

(FIELDAPP_TEST_PG, as tests/run.sh sets it, serves too; the user must be a
superuser, since the build disables triggers.) Builds, once, a database
``fieldapp_bench_<N>_<SITES>`` of N invented readings (default 1,000,000 over
400 sites; the issue's figure is 10,000,000 over 4,000, the same 2,500 a
site). A later run with the same N and SITES reuses the database.

How it builds. The schema comes from the migrations (``store.connect``); the
160 converted template rows of ``bench._templates`` go into a table; then
``INSERT ... SELECT`` over ``generate_series`` fills visits and readings a
million rows a statement. The plain path (``build_slow``, 250,000 a chunk,
about 2,300 readings/s at a million) runs with every trigger and index live,
as a save does. The fast path (``build``) stores the same rows faster:

* ``synchronous_commit = off`` and ``maintenance_work_mem = 1GB`` for the
  build session;
* readings and reading_flags with ``DISABLE TRIGGER ALL``: the flag-row
  trigger and the foreign keys' row-by-row checks do not run; instead each
  chunk's flag rows go in by one more ``INSERT ... SELECT`` that joins every
  reading to its template's flag rows, made by the trigger's own expression
  (``jsonb_array_elements(fieldapp_flag_list(result_json)) WITH ORDINALITY``),
  and after the load one query checks what the foreign keys would have
  (every reading's visit and site, every flag row's reading: none missing);
* the secondary indexes of both tables and the two unique constraints of
  readings (uuid, supersedes_id) dropped during the load and made again
  afterwards from the very definitions the migrations left (pg_indexes'
  indexdef; the constraints under their own names), then the triggers enabled
  and the identity sequence set past the last id;
* reading ids are given as g + 1 (the plain path's identity hands out the same
  ids, in the same order), so the flag rows can be made without reading back.

Readings stay a logged table: other logged tables' foreign keys reference it,
so PostgreSQL refuses ``SET UNLOGGED``, and ``SET LOGGED`` would rewrite the
whole table into the WAL anyway.

Why it is the same log. At the end the fast build asserts that its indexes,
triggers (with their enabled state) and constraints equal those it had right
after migrating, and the measuring run prints whether they equal a freshly
migrated database's. ``--compare N SITES`` builds both ways at N and prints
md5s over every row of readings (with ids and without, by uuid with the
visit's date), reading_flags, visits and sites, the flag rows remade from
result_json by the trigger's expression, and the bytes of three sites' pages
and summary JSON from a server on each; at 200,000 readings over 80 sites all
of them are the same.

Then it starts ``serve --db`` on 127.0.0.1 and fetches, 30 times each, over
loopback (so nearly all of it is server time):

* floor, same server, same run: GET /api/readings/<uuid> (one stored reading
  through the same stack);
* GET /sites/<id> (a site's page) and GET /api/sites/<id>/summary;

printing p50 and p95 beside the floor's, against the issue's 150 ms. Then
the server's peak memory (VmHWM) before and after streaming one site's export,
and the whole log's export read to its first 100,000 rows and then to its
first 1,000,000 (the connection closed there: the whole of 10,000,000 would
take half an hour): flat memory means the peak does not grow with the rows.
Figures only; nothing passes or fails.
"""
from __future__ import annotations

import http.client
import os
import re
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))
from conftest import ServerProcess            # noqa: E402
from fieldapp import store             # noqa: E402
from fieldapp.store import pg          # noqa: E402
import bench  # noqa: E402  (tests/benchmarks/bench.py: the invented templates)

SLOW_CHUNK = 250_000      # the plain path: every trigger and index live, as a save
FAST_CHUNK = 1_000_000
READ_TABLES = ("readings", "reading_flags")
# constraints whose unique indexes take random inserts (uuid is an md5); dropped
# during the load and added back under the same names, as 001_init.sql makes them
DROPPED_CONSTRAINTS = {"readings_uuid_key": "UNIQUE (uuid)",
                       "readings_supersedes_id_key": "UNIQUE (supersedes_id)"}


def _url(server: str, dbname: str) -> str:
    from urllib.parse import urlsplit, urlunsplit
    return urlunsplit(urlsplit(server)._replace(path="/" + dbname))


def _fresh_db(server: str, name: str) -> bool:
    """Create database NAME; False if a finished build of it is already there."""
    import psycopg
    url = _url(server, name)
    admin = psycopg.connect(server, autocommit=True)
    try:
        exists = admin.execute("SELECT 1 FROM pg_database WHERE datname = %s",
                               (name,)).fetchone()
        if exists:
            conn = pg.connect(url)
            try:
                done = conn.execute("SELECT to_regclass('bench_done')").fetchone()[0]
                if done and conn.execute("SELECT count(*) FROM bench_done").fetchone()[0]:
                    return False
            finally:
                conn.close()
            admin.execute(f"DROP DATABASE {name} WITH (FORCE)")
        admin.execute(f"CREATE DATABASE {name}")
    finally:
        admin.close()
    return True


def schema_lists(conn) -> dict:
    """Indexes, triggers (with their enabled state) and constraints of the schema."""
    return {
        "indexes": sorted(tuple(r) for r in conn.execute(
            "SELECT tablename, indexname, indexdef FROM pg_indexes "
            "WHERE schemaname = current_schema() AND tablename NOT LIKE 'bench%'")),
        # a foreign key's internal triggers are named by their oid: those are told
        # apart by their constraint's name, their function and their type instead
        "triggers": sorted(tuple(r) for r in conn.execute(
            "SELECT c.relname, CASE WHEN t.tgisinternal THEN 'fk ' || k.conname "
            "ELSE t.tgname END, t.tgenabled, CASE WHEN t.tgisinternal THEN "
            "t.tgfoid::regproc::text || ' ' || t.tgtype ELSE pg_get_triggerdef(t.oid) END "
            "FROM pg_trigger t JOIN pg_class c ON c.oid = t.tgrelid "
            "JOIN pg_namespace s ON s.oid = c.relnamespace "
            "LEFT JOIN pg_constraint k ON k.oid = t.tgconstraint "
            "WHERE s.nspname = current_schema() AND c.relname NOT LIKE 'bench%'")),
        "constraints": sorted(tuple(r) for r in conn.execute(
            "SELECT c.relname, k.conname, pg_get_constraintdef(k.oid), k.convalidated "
            "FROM pg_constraint k JOIN pg_class c ON c.oid = k.conrelid "
            "JOIN pg_namespace s ON s.oid = c.relnamespace "
            "WHERE s.nspname = current_schema() AND c.relname NOT LIKE 'bench%'")),
    }


def fresh_schema_lists(server: str) -> dict:
    """The lists of a database just migrated, nothing in it."""
    import psycopg
    name = "fieldapp_bench_fresh_schema"
    admin = psycopg.connect(server, autocommit=True)
    try:
        admin.execute(f"DROP DATABASE IF EXISTS {name} WITH (FORCE)")
        admin.execute(f"CREATE DATABASE {name}")
        conn = store.connect(_url(server, name))
        try:
            return schema_lists(conn)
        finally:
            conn.close()
    finally:
        admin.execute(f"DROP DATABASE IF EXISTS {name} WITH (FORCE)")
        admin.close()


def _setup(conn, n: int, n_sites: int):
    """Sites, the template rows, and the pieces of the generating SELECT."""
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
    ids = {r["name"]: r["id"] for r in store.list_sites(conn)}
    assert sorted(ids.values()) == list(range(1, n_sites + 1))
    rcols = [r[0] for r in conn.execute(
        "SELECT column_name FROM information_schema.columns WHERE table_name = 'readings' "
        "AND table_schema = current_schema() ORDER BY ordinal_position")]
    # one reading every step minutes over a year, at a site spread by a prime stride
    step = 525600.0 / n
    gen = (f"SELECT g, 1 + (g * 7919) % {n_sites} AS site_id, "
           f"timestamp '2025-03-01 07:00' + (g * {step!r}) * interval '1 minute' AS ts "
           "FROM generate_series(?::bigint, ?::bigint) g")
    return len(temps), rcols, gen


def _chunk_sql(rcols, gen, n_temps, with_id: bool):
    """The visits and readings INSERT ... SELECT of one chunk [a, b]."""
    special = {"id": "x.g + 1", "uuid": "md5('fieldapp-bench-' || g)::uuid::text",
               "site_id": "x.site_id", "visit_id": "v.id", "supersedes_id": "NULL",
               "taken_at": "x.taken_at", "recorded_at": "x.recorded_at"}
    cols = [c for c in rcols if with_id or c != "id"]
    picked = ", ".join(special.get(c, f"t.{c}") for c in cols)
    visits = ("INSERT INTO visits (site_id, visit_date, visited_by) "
              f"SELECT DISTINCT site_id, to_char(ts, 'YYYY-MM-DD'), '' FROM ({gen}) q "
              "ON CONFLICT DO NOTHING")
    readings = (
        f"INSERT INTO readings ({', '.join(cols)}) SELECT {picked} FROM ("
        f"SELECT g, site_id, to_char(ts, 'YYYY-MM-DD\"T\"HH24:MI:SS') || '+02:00' "
        "AS taken_at, to_char(ts - interval '2 hours', 'YYYY-MM-DD\"T\"HH24:MI:SS') "
        f"|| '+00:00' AS recorded_at, to_char(ts, 'YYYY-MM-DD') AS day FROM ({gen}) q"
        f") x JOIN bench_templates t ON t.k = x.g % {n_temps} "
        "JOIN visits v ON v.site_id = x.site_id AND v.visit_date = x.day "
        "AND v.visited_by = ''" + (" ORDER BY x.g" if with_id else ""))
    return visits, readings


def build_slow(server: str, n: int, n_sites: int, name: str) -> str:
    """The plain path: each chunk goes in with every trigger and index live."""
    url = _url(server, name)
    if not _fresh_db(server, name):
        print(f"reusing {name} (built earlier)")
        return url
    t0 = time.perf_counter()
    conn = store.connect(url)                 # the schema, by the same migrations
    try:
        n_temps, rcols, gen = _setup(conn, n, n_sites)
        visits, readings = _chunk_sql(rcols, gen, n_temps, with_id=False)
        for a in range(0, n, SLOW_CHUNK):
            b = min(n, a + SLOW_CHUNK) - 1
            with store.transaction(conn):
                conn.execute(visits, (a, b))
                conn.execute(readings, (a, b))
        conn.execute("VACUUM ANALYZE")
        conn.execute("CREATE TABLE bench_done (n bigint)")
        conn.execute("INSERT INTO bench_done VALUES (?)", (n,))
    finally:
        conn.close()
    dt = time.perf_counter() - t0
    print(f"built {name} (plain path) in {dt:.0f} s ({n / dt:,.0f} readings/s)")
    return url


def build(server: str, n: int, n_sites: int, name: str | None = None) -> str:
    """The bench database's URL, built (the fast path) unless a finished one is there."""
    name = name or f"fieldapp_bench_{n}_{n_sites}"
    url = _url(server, name)
    if not _fresh_db(server, name):
        print(f"reusing {name} (built earlier)")
        return url
    t0 = time.perf_counter()
    conn = store.connect(url)                 # the schema, by the same migrations
    try:
        n_temps, rcols, gen = _setup(conn, n, n_sites)
        migrated = schema_lists(conn)
        conn.execute("SET synchronous_commit = off")
        conn.execute("SET maintenance_work_mem = '1GB'")
        # the flag rows of each template, by the trigger's own expression (014_flag_rows.sql)
        conn.execute(
            "CREATE TABLE bench_template_flags AS SELECT t.k, f.ord - 1 AS seq, "
            "f.value ->> 'code' AS code, f.value ->> 'severity' AS severity "
            "FROM bench_templates t, jsonb_array_elements(fieldapp_flag_list(t.result_json)) "
            "WITH ORDINALITY AS f(value, ord)")
        later = [(t, i, d) for t, i, d in migrated["indexes"] if t in READ_TABLES
                 and not i.endswith("_pkey") and i not in DROPPED_CONSTRAINTS]
        with store.transaction(conn):
            for t in READ_TABLES:
                conn.execute(f"ALTER TABLE {t} DISABLE TRIGGER ALL")
            for _, i, _ in later:
                conn.execute(f"DROP INDEX {i}")
            for c in DROPPED_CONSTRAINTS:
                conn.execute(f"ALTER TABLE readings DROP CONSTRAINT {c}")
        visits, readings = _chunk_sql(rcols, gen, n_temps, with_id=True)
        flags = ("INSERT INTO reading_flags (reading_id, seq, code, severity) "
                 "SELECT g + 1, f.seq, f.code, f.severity FROM generate_series(?::bigint, "
                 f"?::bigint) g JOIN bench_template_flags f ON f.k = g % {n_temps} "
                 "ORDER BY g, f.seq")
        for a in range(0, n, FAST_CHUNK):
            b = min(n, a + FAST_CHUNK) - 1
            t = time.perf_counter()
            with store.transaction(conn):
                conn.execute(visits, (a, b))
                conn.execute(readings, (a, b))
                conn.execute(flags, (a, b))
            dt = time.perf_counter() - t
            print(f"  readings {b + 1:>12,} of {n:,} ({dt:.0f} s for this chunk, "
                  f"{(b + 1 - a) / dt:,.0f} rows/s)", flush=True)
        t1 = time.perf_counter()
        print(f"  loaded in {t1 - t0:.0f} s; indexes and constraints:", flush=True)
        for t, i, d in later:
            t = time.perf_counter()
            conn.execute(d)
            print(f"    {i} ({time.perf_counter() - t:.0f} s)", flush=True)
        for c, d in DROPPED_CONSTRAINTS.items():
            t = time.perf_counter()
            conn.execute(f"ALTER TABLE readings ADD CONSTRAINT {c} {d}")
            print(f"    {c} ({time.perf_counter() - t:.0f} s)", flush=True)
        with store.transaction(conn):
            for t in READ_TABLES:
                conn.execute(f"ALTER TABLE {t} ENABLE TRIGGER ALL")
        conn.execute("SELECT setval(pg_get_serial_sequence('readings', 'id'), "
                     "(SELECT max(id) FROM readings))")
        # what the foreign keys would have checked row by row, checked once
        orphans = conn.execute(
            "SELECT (SELECT count(*) FROM readings r LEFT JOIN visits v ON v.id = r.visit_id "
            "        WHERE v.id IS NULL OR v.site_id <> r.site_id), "
            "       (SELECT count(*) FROM readings r LEFT JOIN sites s ON s.id = r.site_id "
            "        WHERE s.id IS NULL), "
            "       (SELECT count(*) FROM reading_flags f LEFT JOIN readings r "
            "        ON r.id = f.reading_id WHERE r.id IS NULL)").fetchone()
        assert tuple(orphans) == (0, 0, 0), orphans
        print(f"  indexes, constraints and checks in {time.perf_counter() - t1:.0f} s",
              flush=True)
        conn.execute("VACUUM ANALYZE")
        same = schema_lists(conn) == migrated
        assert same, "indexes/triggers/constraints differ from the migrated schema"
        conn.execute("CREATE TABLE bench_done (n bigint)")
        conn.execute("INSERT INTO bench_done VALUES (?)", (n,))
    finally:
        conn.close()
    dt = time.perf_counter() - t0
    print(f"built {name} in {dt:.0f} s ({n / dt:,.0f} readings/s)")
    return url


def fingerprint(url: str) -> dict:
    """md5 over the rows (in id order) of the tables a site page and summary read."""
    conn = pg.connect(url)
    try:
        q = ("SELECT count(*), md5(string_agg(md5(x::text), '' ORDER BY {o})) FROM "
             "(SELECT {c} FROM {t}) x")
        return {
            "readings": tuple(conn.execute(q.format(o="id", c="*", t="readings")).fetchone()),
            "reading_flags": tuple(conn.execute(q.format(
                o="reading_id, seq", c="*", t="reading_flags")).fetchone()),
            # the same without the ids: each reading by its uuid, with its visit's date
            "readings_by_uuid": tuple(conn.execute(
                "SELECT count(*), md5(string_agg(md5(x::text), '' ORDER BY uuid)) FROM "
                "(SELECT (r.*)::text AS row, v.site_id, v.visit_date, v.visited_by, r.uuid "
                "FROM readings r JOIN visits v ON v.id = r.visit_id) x").fetchone()),
            "visits": tuple(conn.execute(q.format(o="id", c="*", t="visits")).fetchone()),
            "sites": tuple(conn.execute(q.format(
                o="id", c="id, name, crop, sp_pct, texture, kind, notes",
                t="sites")).fetchone()),
            # the flag rows again, as the trigger's expression makes them from result_json
            "flags_by_trigger_sql": tuple(conn.execute(
                "SELECT count(*), md5(string_agg(md5(x::text), '' ORDER BY reading_id, seq)) "
                "FROM (SELECT r.id AS reading_id, f.ord - 1 AS seq, f.value ->> 'code' AS "
                "code, f.value ->> 'severity' AS severity FROM readings r, "
                "jsonb_array_elements(fieldapp_flag_list(r.result_json)) WITH ORDINALITY "
                "AS f(value, ord)) x").fetchone()),
        }
    finally:
        conn.close()


def summaries(url: str, site_ids) -> dict:
    with tempfile.TemporaryDirectory() as d:
        srv = ServerProcess(Path(d) / "unused", extra=["--db", url]).start(timeout=120)
        try:
            out = {}
            for s in site_ids:
                for path in (f"/api/sites/{s}/summary", f"/sites/{s}"):
                    with urllib.request.urlopen(srv.url + path, timeout=120) as r:
                        out[path] = r.read()
            return out
        finally:
            srv.stop()


def compare(server: str, n: int, n_sites: int):
    """The fast build against the plain one at N: rows, flag rows, pages, summaries."""
    fast = build(server, n, n_sites, f"fieldapp_bench_fast_{n}_{n_sites}")
    slow = build_slow(server, n, n_sites, f"fieldapp_bench_slow_{n}_{n_sites}")
    ff, fs = fingerprint(fast), fingerprint(slow)
    for k in ff:
        print(f"  {k:22s} fast {ff[k][0]:>9,} rows md5 {ff[k][1]}   "
              f"plain {fs[k][0]:>9,} rows md5 {fs[k][1]}   {'same' if ff[k] == fs[k] else 'DIFFERENT'}")
    print(f"  flag rows equal the trigger's expression over result_json: fast "
          f"{ff['reading_flags'] == ff['flags_by_trigger_sql']}, plain "
          f"{fs['reading_flags'] == fs['flags_by_trigger_sql']}")
    sites = (1, n_sites // 3, n_sites)
    a, b = summaries(fast, sites), summaries(slow, sites)
    for p in a:
        print(f"  {p:28s} fast {len(a[p]):>8,} B   plain {len(b[p]):>8,} B   "
              f"{'same bytes' if a[p] == b[p] else 'DIFFERENT'}")
    print("  schema lists (indexes, triggers, constraints) fast == plain: "
          f"{schema_lists_of(fast) == schema_lists_of(slow)}")


def schema_lists_of(url: str) -> dict:
    conn = pg.connect(url)
    try:
        return schema_lists(conn)
    finally:
        conn.close()


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


def export(port: int, query: str = "", limit: int | None = None) -> tuple[float, int, int]:
    """Stream /export.csv; with LIMIT, close the connection after that many rows."""
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=3600)
    t = time.perf_counter()
    conn.request("GET", "/export.csv" + query)
    r = conn.getresponse()
    assert r.status == 200, r.status
    n_bytes = lines = 0
    while limit is None or lines - 1 < limit:
        chunk = r.read1(1 << 16)
        if not chunk:
            break
        n_bytes += len(chunk)
        lines += chunk.count(b"\n")
    conn.close()
    return time.perf_counter() - t, n_bytes, lines - 1


def main():
    compare_mode = sys.argv[1:2] == ["--compare"]
    if compare_mode:
        del sys.argv[1]
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000
    n_sites = int(sys.argv[2]) if len(sys.argv) > 2 else 400
    server = os.environ.get("FIELDAPP_BENCH_PG") or os.environ.get("FIELDAPP_TEST_PG")
    if not server:
        sys.exit("bench_pg: set FIELDAPP_BENCH_PG to a PostgreSQL server URL "
                 "(postgresql://USER@127.0.0.1:PORT/postgres, a user that may create databases)")
    if compare_mode:
        compare(server, n, n_sites)
        return
    url = build(server, n, n_sites)
    same = schema_lists_of(url) == fresh_schema_lists(server)
    print(f"indexes, triggers (and their enabled state) and constraints equal those of a "
          f"freshly migrated database: {'yes' if same else 'NO'}")
    conn = pg.connect(url)
    try:
        size = conn.execute("SELECT pg_database_size(current_database())").fetchone()[0]
    finally:
        conn.close()
    print(f"database size {size / 1e9:.1f} GB")
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
            # the whole log's export, read to a bound and then hung up on: the peak
            # after 100,000 rows against the peak after ten times as many
            parts = []
            for limit in (100_000, 1_000_000):
                hb = hwm_kib(pid)
                s2, b2, r2 = export(srv.port, limit=limit)
                time.sleep(1)
                parts.append((limit, r2, b2, s2, hb, hwm_kib(pid)))
            for limit, r2, b2, s2, hb, ha in parts:
                print(f"export of the whole log, first {limit:,} rows (then closed): {r2:,} "
                      f"rows, {b2 / 1e6:.1f} MB in {s2:.1f} s ({r2 / s2:,.0f} rows/s); server "
                      f"peak memory {hb / 1024:.0f} -> {ha / 1024:.0f} MiB")
            print(f"peak after {parts[1][0]:,} rows minus peak after {parts[0][0]:,}: "
                  f"{(parts[1][5] - parts[0][5]) / 1024:+.0f} MiB for 10x the rows")
        finally:
            srv.stop()
    out = srv.proc.stdout.read().decode(errors="replace")
    if re.search(r"Traceback", out):
        print(out[-2000:])


if __name__ == "__main__":
    main()
