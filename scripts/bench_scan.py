"""Speed of the global period/offset scan (``fit/scan.py::scan_pattern``).

Representative cases (1000 and 10,000 points, few and many lobes, a gap), each timed
beside a baseline measured in the same process and interleaved with it: one
``scipy.fft.rfft`` of the data (same length), a fixed unit that makes the ratio
comparable across machines; and, with ``--against PATH``, the ``scan.py`` found at PATH
(for example a checkout of the main branch), loaded as a standalone module, with its
first candidate printed beside this one's. Times are medians (and minima) over
``--repeats`` runs; BLAS is pinned to one thread as in the other benchmarks.

Run: python scripts/bench_scan.py [--repeats 200] [--against OTHER/jjpattern/fit/scan.py]
"""

from __future__ import annotations

import argparse
import importlib.util
import os
import sys
import time

for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

import numpy as np  # noqa: E402
from scipy import fft as sfft  # noqa: E402

from jjpattern.fit import scan  # noqa: E402
from jjpattern.physics.models import get_model  # noqa: E402
from jjpattern.synthetic import random_case  # noqa: E402

#: (label, lobes each side, points, gap): the gap removes a tenth of the window.
CASES = (("1000 pts, 2 lobes", 2, 1000, False), ("1000 pts, 8 lobes", 8, 1000, False),
         ("1000 pts, 15 lobes", 15, 1000, False), ("1000 pts, 8 lobes, gap", 8, 1000, True),
         ("10000 pts, 8 lobes", 8, 10_000, False), ("10000 pts, 15 lobes", 15, 10_000, False))


def case_data(lobes, points, gap, seed=1):
    """Normalised field (span 1, centred) and current (peak 1), as the fit scans them."""
    rng = np.random.default_rng(seed)
    case = random_case(rng, period_T=1e-3, lobes=lobes, n_points=points, noise_fraction=0.02,
                       uneven=False, folded=False)
    x, y = case.field_T, case.ic_A
    if gap:
        u = (x - x[0]) / (x[-1] - x[0])
        x, y = x[(u < 0.4) | (u > 0.5)], y[(u < 0.4) | (u > 0.5)]
    return (x - x.mean()) / (x[-1] - x[0]), y / y.max()


def load_other(path):
    spec = importlib.util.spec_from_file_location("other_scan", path)
    module = importlib.util.module_from_spec(spec)
    sys.modules["other_scan"] = module  # dataclasses look their module up there
    spec.loader.exec_module(module)
    return module


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=200)
    parser.add_argument("--against", help="another scan.py to time beside this one")
    args = parser.parse_args()
    other = load_other(args.against) if args.against else None
    shape = get_model("rectangular").unit_shape
    header = f"{'case':24s} {'scan ms':>15s} {'rfft us':>8s} {'scan/rfft':>9s}"
    print(header + ("" if other is None else f" {'other ms':>15s} {'other/scan':>10s}"))
    for label, lobes, points, gap in CASES:
        x, y = case_data(lobes, points, gap)
        calls = {"scan": lambda x=x, y=y: scan.scan_pattern(x, y, shape),
                 "rfft": lambda y=y: sfft.rfft(y)}
        if other is not None:
            calls["other"] = lambda x=x, y=y: other.scan_pattern(x, y, shape)
        times = {name: [] for name in calls}
        for _ in range(args.repeats):
            for name, call in calls.items():
                t0 = time.perf_counter()
                call()
                times[name].append(time.perf_counter() - t0)
        med = {name: float(np.median(t)) for name, t in times.items()}
        low = {name: float(np.min(t)) for name, t in times.items()}
        line = (f"{label:24s} {1e3 * med['scan']:7.2f} ({1e3 * low['scan']:5.2f}) "
                f"{1e6 * med['rfft']:8.1f} {med['scan'] / med['rfft']:9.0f}")
        if other is not None:
            line += (f" {1e3 * med['other']:7.2f} ({1e3 * low['other']:5.2f})"
                     f" {med['other'] / med['scan']:10.2f}")
        print(line)
        if other is not None:
            mine = scan.scan_pattern(x, y, shape).candidates[0]
            theirs = other.scan_pattern(x, y, shape).candidates[0]
            print(f"    best: P {mine.period_T:.6f} B0 {mine.field_offset_T:+.6f} | "
                  f"P {theirs.period_T:.6f} B0 {theirs.field_offset_T:+.6f}")
    print("(medians, minima in brackets)")


if __name__ == "__main__":
    main()
