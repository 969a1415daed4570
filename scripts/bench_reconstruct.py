"""Speed of the support-constrained current-density retrieval, against the former loop.

The baseline is the former implementation, kept here: complex matrix-vector
products through BLAS, one retrieval per resample in a Python loop. The
current one (real products on the even and odd halves of the support, all
resamples as one batch, in numpy's einsum loop) is timed beside it, in this
process, on the same pattern (a 40 % linear gradient, the case that triggers
the support method) with the same generator seed; the largest difference of
the profiles and bands is printed too.

On a loaded machine BLAS threads wait for each other at every call, which
slows the baseline by several times; compare with OPENBLAS_NUM_THREADS=1.
The load average is printed with the figures.

Run: python scripts/bench_reconstruct.py [--points 1200] [--lobes 8] [--repeats 3]
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np

from jjpattern.diagnose import reconstruct as rc
from jjpattern.synthetic import profile_case


def _retrieve_loop(modulus, forward, inverse, start, support, iterations):
    j = np.where(support, np.clip(start, 0.0, None), 0.0)
    for _ in range(iterations):
        spectrum = forward @ j
        spectrum = modulus * np.exp(1j * np.angle(spectrum))
        j = np.real(inverse @ spectrum)
        j = np.where(support, np.clip(j, 0.0, None), 0.0)
    return j


def support_loop(field_T, ic_A, period_T, offset_T, noise_A, rng, resamples=200, n_x=301,
                 iterations=150):
    """The former ``reconstruct(..., method='support')`` up to the band (profile, band)."""
    u = (np.asarray(field_T) - offset_T) / period_T
    grid, values, du, _ = rc._grid(u, np.asarray(ic_A, dtype=float), False)
    window = rc.tukey(grid.size, rc.WINDOW_ALPHA)
    x = np.linspace(-rc.X_SPAN, rc.X_SPAN, n_x)
    inverse = np.exp(-2j * np.pi * np.outer(x, grid)) * du
    signs = rc.node_signs(grid, values)
    support = np.abs(x) <= 0.5
    forward = np.exp(2j * np.pi * np.outer(grid, x)) * (x[1] - x[0])
    start = np.real(inverse @ (values * signs * window)) * (1.0 + 0.3 * x)
    j = _retrieve_loop(values, forward, inverse, start, support, iterations)
    noisy = values[None, :] + rng.normal(0.0, noise_A, (min(resamples, 16), values.size))
    band = np.array([_retrieve_loop(np.abs(s), forward, inverse, j, support, iterations // 3)
                     for s in noisy])
    return j, band


def support_batch(field_T, ic_A, period_T, offset_T, noise_A, rng):
    """The current implementation: (profile, band)."""
    d = rc.reconstruct(field_T, ic_A, period_T, offset_T, noise_A, rng, method="support")
    return d["j_over_mean"], (d["j_low_over_mean"], d["j_high_over_mean"])


def best_of(repeats, fn):
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=1200)
    parser.add_argument("--lobes", type=int, default=8)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    case = profile_case(np.random.default_rng(1), "gradient", lobes=args.lobes,
                        n_points=args.points, noise_fraction=0.02, offset_fraction=0.0)
    data = (case.field_T, case.ic_A, case.period_T, case.field_offset_T, case.noise_A)
    t_old, (j_old, band_old) = best_of(
        args.repeats, lambda: support_loop(*data, np.random.default_rng(7)))
    t_new, (j_new, (low, high)) = best_of(
        args.repeats, lambda: support_batch(*data, np.random.default_rng(7)))
    low_old, high_old = np.percentile(band_old, [16, 84], axis=0)
    scale = np.max(np.abs(j_old))
    print(f"support retrieval, {args.points} points, {args.lobes} lobes each side, "
          f"150 + 16 x 50 iterations, best of {args.repeats}; "
          f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS', 'unset')}, "
          f"load average {os.getloadavg()[0]:.1f}")
    print(f"  former loop (complex, per resample): {1e3 * t_old:8.1f} ms")
    print(f"  batched (real, all resamples)     : {1e3 * t_new:8.1f} ms "
          f"= {t_old / t_new:.1f} x faster")
    print(f"  largest difference / max|J|: profile {np.max(np.abs(j_new - j_old)) / scale:.1e}, "
          f"band {max(np.max(np.abs(low - low_old)), np.max(np.abs(high - high_old))) / scale:.1e}")


if __name__ == "__main__":
    main()
