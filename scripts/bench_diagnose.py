"""Cost of the diagnostics against the automatic fit alone, in time and memory.

A uniform (|sinc|) pattern with folded 2 % noise, 8 lobes each side, at each
number of points; the automatic fit (``fit_pattern``) is timed first and the
diagnostics of that fit (``diagnose``: current density with its resampled band,
shape flags, period drift) beside it, in the same process. Peak memory is the
tracemalloc peak of each step over the size of the data (two float64 arrays).
Target: diagnostics at most the fit's cost, memory linear in the points.

Run: python scripts/bench_diagnose.py [--points 10000 100000] [--repeats 3]
"""

from __future__ import annotations

import argparse
import time
import tracemalloc

import numpy as np

from jjpattern.diagnose.run import diagnose
from jjpattern.fit.engine import fit_pattern
from jjpattern.synthetic import add_noise, ideal


def pattern(n_points, lobes=8, seed=1):
    """Field and folded-noise Ic of a uniform junction (period 1 mT, peak 1 uA)."""
    rng = np.random.default_rng(seed)
    field = np.linspace(-(lobes + 1) * 1e-3, (lobes + 1) * 1e-3, n_points) + 0.13e-3
    ic = add_noise(rng, ideal(field, "rectangular", 1e-6, 1e-3, 0.13e-3), 0.02e-6)
    return field, ic


def timed(repeats, fn):
    """Best wall time of ``repeats`` calls, the tracemalloc peak of one more, and its result."""
    best = np.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    tracemalloc.start()
    fn()
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return best, peak, out


def measure(n_points, repeats=3):
    """``(fit s, fit peak B, diagnose s, diagnose peak B, data B)`` at ``n_points``."""
    field, ic = pattern(n_points)
    # The model the pipeline fits by default (fit_pattern alone would choose automatically).
    t_fit, m_fit, fit = timed(repeats, lambda: fit_pattern(field, ic, geometry="rectangular"))
    t_diag, m_diag, _ = timed(repeats, lambda: diagnose([fit]))
    return t_fit, m_fit, t_diag, m_diag, field.nbytes + ic.nbytes


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, nargs="+", default=[10_000, 100_000])
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args(argv)
    for n in args.points:
        t_fit, m_fit, t_diag, m_diag, data = measure(n, args.repeats)
        print(f"{n:>8d} points: automatic fit {1e3 * t_fit:7.1f} ms (peak {m_fit / 2**20:6.1f} MiB)"
              f" | diagnostics {1e3 * t_diag:7.1f} ms = {t_diag / t_fit:4.2f} x the fit "
              f"(target <= 1) | peak {m_diag / 2**20:6.1f} MiB = {m_diag / data:5.1f} x the data")


if __name__ == "__main__":
    main()
