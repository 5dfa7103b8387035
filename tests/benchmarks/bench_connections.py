"""Benchmark: the laptop's own page while tablets hold idle connections.

    .venv/bin/python tests/benchmarks/bench_connections.py

Starts `serve --lan --host 127.0.0.1`, times GET http://127.0.0.1:PORT/ 20
times with no other connection (the floor), then again while 1,000 idle
sockets from other loopback addresses (10 per address, playing tablets) are
open. Prints p50 / max of each. Figures only; nothing passes or fails."""
from __future__ import annotations

import statistics
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from conftest import ServerProcess               # noqa: E402
from test_connections import idle_sockets       # noqa: E402


def times(url, n=20):
    out = []
    for _ in range(n):
        t = time.perf_counter()
        urllib.request.urlopen(url, timeout=60).read()
        out.append(time.perf_counter() - t)
    return out


def main():
    with tempfile.TemporaryDirectory() as d:
        srv = ServerProcess(Path(d) / "lan", extra=["--lan", "--host", "127.0.0.1"]).start()
        try:
            floor = times(srv.url + "/")
            socks = idle_sockets(srv.port, 1000, per_host=10)
            time.sleep(0.5)
            held = times(srv.url + "/")
            for s in socks:
                s.close()
        finally:
            srv.stop()
    f = lambda xs: f"p50 {statistics.median(xs) * 1000:7.1f} ms, max {max(xs) * 1000:7.1f} ms"
    print(f"laptop page, no other connection (floor): {f(floor)}")
    print(f"laptop page, 1,000 idle tablet sockets:   {f(held)}")


if __name__ == "__main__":
    main()
