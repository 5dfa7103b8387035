"""Cold start: ``python -m fieldapp serve`` from process start until the first
page (the entry page, from a log of N invented readings) is served, beside a
bare Flask + waitress process answering "ok" and a bare interpreter start,
measured alternately in the same run. Prints figures; never passes or fails.

    python tests/benchmarks/cold_start.py [--n 10000] [--repeat 7] [--before TREE]
    python -m fieldapp bench start [--n N]          # the same figure, from bench.py

``--before TREE`` also starts the fieldapp of another checkout (an older
commit, e.g. from ``git archive``) on the same log, in turn with the others.
"""
from __future__ import annotations

import argparse
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import bench  # noqa: E402  (tests/benchmarks/bench.py)


def _interpreter_s() -> float:
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-c", "pass"], check=True)
    return time.perf_counter() - t0


def _serve_s(cmd, port, tree=None) -> float:
    env = bench._env()
    if tree:
        env["PYTHONPATH"] = str(tree)
    s, proc = bench._start(cmd, port, env=env)
    proc.terminate()
    proc.wait(10)
    return s


def _before_s(tree, log) -> float:
    """The other checkout's serve: -P keeps this folder's fieldapp (python -m puts
    the working folder first on the path) from shadowing the tree's."""
    port = bench._free_port()
    return _serve_s([sys.executable, "-P", "-m", "fieldapp", "serve", "--data", str(log),
                     "--port", str(port)], port, tree)


def main(argv=None) -> int:
    p = argparse.ArgumentParser(prog="cold_start")
    p.add_argument("--n", type=int, default=10_000, help="readings in the log (default 10,000)")
    p.add_argument("--repeat", type=int, default=7)
    p.add_argument("--before", metavar="TREE", help="another checkout's fieldapp, for a "
                   "before/after in the same run")
    a = p.parse_args(argv)
    work = Path(tempfile.mkdtemp(prefix="fieldapp-cold-"))
    try:
        bench.make_log(work / "log", a.n)
        ours, bare, interp, before = [], [], [], []
        _serve_s([sys.executable, "-m", "fieldapp", "serve", "--data", str(work / "log"),
                  "--port", str(port := bench._free_port())], port)        # warm the disk cache
        if a.before:
            _before_s(a.before, work / "log")                  # and write its bytecode
        for _ in range(a.repeat):
            port = bench._free_port()
            ours.append(_serve_s([sys.executable, "-m", "fieldapp", "serve", "--data",
                                  str(work / "log"), "--port", str(port)], port))
            port = bench._free_port()
            bare.append(_serve_s([sys.executable, "-c", bench._BARE_SERVER, str(port)], port))
            interp.append(_interpreter_s())
            if a.before:
                before.append(_before_s(a.before, work / "log"))
        med = statistics.median
        print(f"cold start, process start to the first page served (log of {a.n:,}; "
              f"median of {a.repeat}, min in brackets)")
        print(f"  python -m fieldapp serve, GET /     {med(ours):.3f} s  ({min(ours):.3f})")
        print(f"  bare Flask + waitress, GET /        {med(bare):.3f} s  ({min(bare):.3f})")
        print(f"  bare interpreter (python -c pass)   {med(interp):.3f} s  ({min(interp):.3f})")
        print(f"  ratio fieldapp / bare Flask         {med(ours) / med(bare):.2f}x   (target 2x)")
        if before:
            print(f"  before: {a.before}  {med(before):.3f} s  ({min(before):.3f}), "
                  f"ratio {med(before) / med(bare):.2f}x")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
