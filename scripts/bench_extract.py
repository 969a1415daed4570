"""Speed and memory of Ic extraction from a 1001-field x 2001-bias voltage map.

Each criterion is timed beside one vectorised pass over the same array,
``np.abs(v).argmax(axis=1)``, in the same process; peak memory is the
tracemalloc peak of the extraction over the map's own size.

Run: python scripts/bench_extract.py [--repeats 5]
"""

from __future__ import annotations

import argparse
import time
import tracemalloc

import numpy as np

from jjpattern.extract.engine import extract
from jjpattern.extract.registry import criterion_names
from jjpattern.io.maps import IVMap
from jjpattern.synthetic import bias_sweep, ideal, rsj_map


def best_of(repeats, fn):
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--mode", choices=("up", "out-and-back"), default="up")
    args = parser.parse_args()
    rng = np.random.default_rng(1)
    field = np.linspace(-3e-3, 3e-3, 1001)
    ic = ideal(field, "rectangular", 10e-6, 1e-3, 0.1e-3)
    bias = bias_sweep(16e-6, 2001, args.mode)
    v = rsj_map(rng, field, ic, ic, 12.0, bias, 0.1e-6, offset_V=2e-6)
    ivmap = IVMap("bench", None, field, np.broadcast_to(bias, v.shape), v, "voltage")
    base = best_of(args.repeats, lambda: np.abs(v).argmax(axis=1))
    print(f"map {v.shape[0]} x {v.shape[1]} ({v.nbytes / 2**20:.1f} MiB), bias {args.mode}; "
          f"baseline np.abs(v).argmax(axis=1): {1e3 * base:.2f} ms")
    for criterion in criterion_names(auto=False):
        extract(ivmap, criterion=criterion)
        t = best_of(args.repeats, lambda c=criterion: extract(ivmap, criterion=c))
        tracemalloc.start()
        extract(ivmap, criterion=criterion)
        peak = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
        print(f"  {criterion:15s} {1e3 * t:7.1f} ms = {t / base:5.1f} x baseline (target 10x)"
              f" | peak memory {peak / v.nbytes:.2f} x map (target < 3x)")


if __name__ == "__main__":
    main()
