"""Benchmarks that print figures; they never pass or fail on time.

    python -m fieldapp bench convert [--n 1000000]

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
    from .science import convert
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


def main(argv=None) -> int:
    import argparse
    p = argparse.ArgumentParser(prog="fieldapp bench")
    p.add_argument("what", choices=["convert"])
    p.add_argument("--n", type=int, default=1_000_000)
    p.add_argument("--repeat", type=int, default=3)
    a = p.parse_args(argv)
    r = bench_convert(a.n, a.repeat)
    print(f"readings                 {r['n']:,}")
    print(f"core path (convert-csv)  {r['core_s']:.3f} s  ({r['core_readings_per_s']:,.0f} readings/s)")
    print(f"bare numpy, same arrays  {r['bare_numpy_s']:.4f} s")
    print(f"ratio core / bare        {r['ratio']:.1f}x   (target: within 5x)")
    return 0
