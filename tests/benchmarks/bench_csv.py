"""Benchmark: CSV export, import and convert-csv on large logs, each beside
its floor measured in the same run.

    .venv/bin/python tests/benchmarks/bench_csv.py [--n 200000] [--big 1000000]
                                                   [--cache DIR] [--only export,import,convert]

Logs are built once by ``bench.make_log`` (one executemany, invented
readings over 40 sites) into ``--cache`` (default: a folder in the system's
temporary directory) and reused by path on later runs; so are the CSV files.

Every figure comes from a fresh child process: the time of the job inside
it (convert-csv and its floor: from process start), and its peak resident
memory (VmHWM), so the figure and its floor carry the same interpreter
overhead.

- export: ``csvio.export`` of the whole log (to a sink that keeps nothing)
  beside a bare ``sqlite3`` query written with ``csv.writer`` (the same rows
  and machine columns). Target: within 1.5x, memory flat with rows.
- import: ``csvio.import_csv`` of the log's own export into an empty log
  beside a bare ``executemany`` of the same rows into an empty log (sites and
  visits made first, untimed). Target: within 2x, memory flat.
- convert: ``python -m fieldapp convert-csv FILE > /dev/null`` end to end
  beside a bare ``csv.reader`` -> ``csv.writer`` pass over the same file,
  also end to end from process start. Target: within 3x, memory flat. Run
  on two files: 160 kinds of reading repeated (convert-csv converts each
  distinct reading of a chunk once), and every row a different reading.

"Flat" is shown as the peak memory at the small size (n/10) beside the one at
n. Figures only; nothing passes or fails here.
"""
from __future__ import annotations

import argparse
import csv
import hashlib
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(HERE))
if sys.argv[1:3] not in (["_child", "csv_pass"], ["_child", "convert_cli"]):
    import bench  # noqa: E402  (tests/benchmarks/bench.py; not loaded by the convert-csv jobs)

# ---------------------------------------------------------------- the cache


def _schema_key() -> str:
    """Logs are rebuilt when the schema files change (another column, a view)."""
    h = hashlib.sha256()
    for p in sorted((ROOT / "fieldapp" / "schema").glob("*.sql")):
        h.update(p.name.encode() + p.read_bytes())
    return h.hexdigest()[:10]


def cached_log(cache: Path, n: int) -> Path:
    folder = cache / f"log-{n}-{_schema_key()}"
    done = folder / "built.json"
    if not done.exists():
        import shutil
        shutil.rmtree(folder, ignore_errors=True)
        t0 = time.perf_counter()
        db, _ = bench.make_log(folder, n)
        done.write_text(json.dumps({"n": n, "build_s": time.perf_counter() - t0}))
        print(f"  (built a log of {n:,} readings in {time.perf_counter() - t0:.0f} s: {db})")
    from fieldapp import store
    return folder / store.DB_NAME


def cached_export(cache: Path, n: int) -> Path:
    db = cached_log(cache, n)
    path = db.parent / "export.csv"
    if not path.exists():
        _child("export_file", str(db), str(path))
    return path


def cached_convert_input(cache: Path, n: int, distinct: bool = False) -> Path:
    """A convert-csv input of n rows: the kinds of reading a crew takes
    (bench._templates, invented), as a user would type them: 160 kinds of
    reading over and over, or with ``distinct`` every row's value a little
    different (seven significant digits), so no two rows are the same reading."""
    path = cache / f"convert-{n}{'-distinct' if distinct else ''}.csv"
    if path.exists():
        return path
    cols = ("sample", "value", "unit", "temp_c", "ratio", "texture", "depth_cm", "compensated")
    temps = bench._templates()
    tmp = path.with_suffix(".part")
    with open(tmp, "w", encoding="utf-8", newline="") as f:
        w = csv.writer(f, lineterminator="\r\n")
        w.writerow(cols)
        for i in range(n):
            t = temps[i % len(temps)]
            if distinct:
                t = {**t, "value": f"{float(t['value']) * (1 + i * 1e-7):.7g}"}
            w.writerow(["" if t.get(c) is None else
                        ("yes" if t.get(c) else "no") if c == "compensated" else
                        f"{t[c]:g}" if isinstance(t[c], float) else t[c] for c in cols])
    tmp.rename(path)
    return path


# ---------------------------------------------------------------- the jobs (in a child)

def job_export_core(db):
    bench._export_core(db)


def job_export_bare(db):
    bench._export_bare(db)


def job_export_file(db, out):
    from fieldapp import csvio, store
    conn = store.connect(db, upgrade=False)
    try:
        with open(out + ".part", "w", encoding="utf-8", newline="") as f:
            csvio.export(conn, f)
    finally:
        conn.close()
    os.replace(out + ".part", out)


def job_import_core(csv_path, target):
    from fieldapp import csvio, store
    conn = store.connect(Path(target) / store.DB_NAME)
    try:
        with open(csv_path, encoding="utf-8-sig", newline="") as f:
            counts = csvio.import_csv(conn, f)
    finally:
        conn.close()
    return counts["added"]


def _copy_sites_and_visits(src, dst):
    """Untimed set-up of the bare import: the same sites and visits, so the
    readings' site_id and visit_id point where they did."""
    for table in ("sites", "visits"):
        cols = [r[1] for r in src.execute(f"PRAGMA table_info({table})")]
        rows = src.execute(f"SELECT {', '.join(cols)} FROM {table} ORDER BY id").fetchall()
        dst.executemany(f"INSERT OR REPLACE INTO {table} ({', '.join(cols)}) VALUES "
                        f"({', '.join('?' * len(cols))})", [tuple(r) for r in rows])


def job_import_bare(db, target):
    """Returns seconds of the executemany alone (the rows are read first)."""
    from fieldapp import store
    src = store.connect(db, upgrade=False)
    dst = store.connect(Path(target) / store.DB_NAME)
    try:
        cols = ("uuid", "site_id", "visit_id") + store.INPUT_FIELDS + store.COMPUTED_FIELDS \
            + ("result_json", "app_version", "recorded_at")
        rows = [tuple(r) for r in src.execute(
            f"SELECT {', '.join(cols)} FROM readings ORDER BY id")]
        with store.transaction(dst):
            _copy_sites_and_visits(src, dst)
        sql = store.readings_insert_sql(cols, dialect=store.dialect(dst))
        t0 = time.perf_counter()
        dst.execute("BEGIN IMMEDIATE")
        dst.executemany(sql, rows)
        dst.execute("COMMIT")
        return time.perf_counter() - t0
    finally:
        src.close()
        dst.close()


def job_csv_pass(src, dst):
    """The convert-csv floor: every row read and written back, nothing else."""
    with open(src, newline="", encoding="utf-8-sig") as f, \
            open(dst, "w", newline="", encoding="utf-8") as out:
        csv.writer(out, lineterminator="\r\n").writerows(csv.reader(f))


def job_convert_cli(src, *options):
    """``python -m fieldapp convert-csv [OPTIONS] SRC`` as a user runs it
    (stdout is the file the parent opened)."""
    import runpy
    sys.argv = ["fieldapp", "convert-csv", *options, src]
    try:
        runpy.run_module("fieldapp", run_name="__main__", alter_sys=True)
    except SystemExit as e:
        if e.code:
            raise


def _vm_hwm_kib() -> int:
    """This process's peak resident memory since exec (Linux); ru_maxrss would
    carry the parent's from before the exec."""
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith("VmHWM:"):
                return int(line.split()[1])
    return 0


def _child_main(argv) -> int:
    t0 = time.perf_counter()
    inner = globals()["job_" + argv[0]](*argv[1:])
    import resource
    times = os.times()
    got = {"s": time.perf_counter() - t0, "rss_kib": _vm_hwm_kib(),
           "inner_s": inner if isinstance(inner, float) else None,
           # the processor time of this process and of the helpers it ended
           "cpu_s": times.user + times.system + times.children_user + times.children_system,
           "helper_rss_kib": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss}
    with open(os.environ["BENCH_CSV_RESULT"], "w") as f:
        json.dump(got, f)
    return 0


def _env():
    return bench._env()


def _child(*args, stdout=None) -> dict:
    """Run one job in a fresh interpreter (stdout to the file ``stdout``):
    the wall time from process start, the job's inner time, its peak RSS."""
    fd, result = tempfile.mkstemp(prefix="bench-csv-", suffix=".json")
    os.close(fd)
    env = dict(_env(), BENCH_CSV_RESULT=result)
    with open(stdout or os.devnull, "wb") as out:
        t0 = time.perf_counter()
        proc = subprocess.run([sys.executable, str(Path(__file__)), "_child", *args],
                              stdout=out, stderr=subprocess.PIPE, env=env)
        wall = time.perf_counter() - t0
    try:
        if proc.returncode != 0:
            raise RuntimeError(f"{args[0]} failed:\n{proc.stderr.decode()[-3000:]}")
        with open(result) as f:
            got = json.load(f)
    finally:
        os.unlink(result)
    got["wall_s"] = wall
    return got


# ---------------------------------------------------------------- the figures

def _mib(kib) -> str:
    return f"{kib / 1024:.0f} MiB"


def _print(label, core, floor, target, small=None, small_n=None):
    ratio = core["s"] / floor["s"]
    print(f"  {label:<26} {core['s']:8.2f} s   floor {floor['s']:7.2f} s   "
          f"ratio {ratio:5.2f}x (target {target})")
    mem = f"  {'':<26} peak RSS {_mib(core['rss_kib'])} (floor {_mib(floor['rss_kib'])})"
    if small:
        mem += f"; at {small_n:,}: {_mib(small['rss_kib'])}"
    print(mem)


def _alternate(job, floor, repeat: int = 2) -> tuple[dict, dict]:
    """The fastest of ``repeat`` runs of each, taken in turn (a busy machine
    slows both alike)."""
    jobs, floors = [], []
    for _ in range(repeat):
        jobs.append(job())
        floors.append(floor())
    return min(jobs, key=lambda r: r["s"]), min(floors, key=lambda r: r["s"])


def bench_export(cache, n, small_n):
    db = cached_log(cache, n)
    small = cached_log(cache, small_n)
    _child("export_core", str(small))                       # warm imports and the disk
    core, floor = _alternate(lambda: _child("export_core", str(db)),
                             lambda: _child("export_bare", str(db)))
    s_core = _child("export_core", str(small))
    print(f"export of {n:,} readings (csvio.export to a sink; floor: bare sqlite3 + "
          "csv.writer, machine columns)")
    _print("csvio.export", core, floor, "1.5x", s_core, small_n)


def bench_import(cache, n, small_n, work: Path):
    src = cached_export(cache, n)
    small_src = cached_export(cache, small_n)
    out = {}
    for key, path in (("n", src), ("small", small_src)):
        target = work / f"imported-{key}"
        target.mkdir()
        out[key] = _child("import_core", str(path), str(target))
    target = work / "bare"
    target.mkdir()
    floor = _child("import_bare", str(cached_log(cache, n)), str(target))
    floor = {"s": floor["inner_s"], "rss_kib": floor["rss_kib"]}
    print(f"import of {n:,} readings from the log's export into an empty log "
          f"({src.stat().st_size / 1e6:.0f} MB; floor: bare executemany of the same rows)")
    _print("csvio.import_csv", out["n"], floor, "2x", out["small"], small_n)


def bench_convert(cache, n, small_n, work: Path):
    """convert-csv beside its floor on the usual file (160 kinds of reading
    repeated), then on a file of all-different readings beside its own floor;
    each as a user runs it (on Linux with two cores: a helper process
    converts every second chunk) and with ``--jobs 1`` (one process)."""
    def ours(path, out, *options):
        r = _child("convert_cli", str(path), *options, stdout=out)
        return {**r, "s": r["wall_s"]}          # from process start, as a user waits

    def bare(path):
        r = _child("csv_pass", str(path), str(work / "bare.csv"))
        return {**r, "s": r["wall_s"]}

    for distinct in (False, True):
        src = cached_convert_input(cache, n, distinct)
        small_src = cached_convert_input(cache, small_n, distinct)
        ours(small_src, work / "warm.csv")
        runs = {"as run": [], "--jobs 1": [], "floor": []}
        for _ in range(3):              # in turn: a busy machine slows each alike
            runs["as run"].append(ours(src, work / "out.csv"))
            runs["--jobs 1"].append(ours(src, work / "out1.csv", "--jobs", "1"))
            runs["floor"].append(bare(src))
        core, one, floor = (min(runs[k], key=lambda r: r["s"]) for k in runs)
        s_core = ours(small_src, work / "small.csv")
        kind = "every row a different reading" if distinct else "160 kinds of reading repeated"
        print(f"convert-csv of {n:,} rows, {kind} ({src.stat().st_size / 1e6:.0f} MB; floor: "
              "bare csv.reader -> csv.writer, both from process start)")
        _print("fieldapp convert-csv", core, floor, "3x", s_core, small_n)
        print(f"  {'':<26} {n / core['s']:,.0f} rows/s; processor time {core['cpu_s']:.2f} s "
              f"(floor {floor['cpu_s']:.2f} s); helper's peak RSS "
              f"{_mib(core['helper_rss_kib'])}")
        _print("  with --jobs 1", one, floor, "3x")
        print(f"  {'':<26} processor time {one['cpu_s']:.2f} s")


def main(argv=None) -> int:
    p = argparse.ArgumentParser(prog="bench_csv")
    p.add_argument("--n", type=int, default=200_000, help="import and the rest (200,000)")
    p.add_argument("--big", type=int, default=1_000_000,
                   help="export and convert-csv also at this size (0: skip)")
    p.add_argument("--cache", default=str(Path(tempfile.gettempdir()) / "fieldapp-bench-cache"))
    p.add_argument("--only", default="export,import,convert")
    a = p.parse_args(argv)
    cache = Path(a.cache)
    cache.mkdir(parents=True, exist_ok=True)
    only = set(a.only.split(","))
    print(f"fieldapp CSV benchmark (cache {cache}; {os.cpu_count()} CPUs)")
    with tempfile.TemporaryDirectory(prefix="fieldapp-bench-csv-") as d:
        work = Path(d)
        for n in filter(None, (a.n, a.big)):
            small_n = max(1, n // 10)
            if "export" in only:
                bench_export(cache, n, small_n)
            if "import" in only and n == a.n:
                bench_import(cache, n, small_n, Path(tempfile.mkdtemp(dir=work)))
            if "convert" in only:
                bench_convert(cache, n, small_n, Path(tempfile.mkdtemp(dir=work)))
    return 0


if __name__ == "__main__":
    if sys.argv[1:2] == ["_child"]:
        sys.exit(_child_main(sys.argv[2:]))
    sys.exit(main())
