"""Every row of the speed table (issue 13) beside its reference, measured in one process.

Rows (pick with ``--rows``; all by default, about 2-4 minutes on the shared 2-core
machine):

* ``fit``: the automatic fit of 1000 points against one scipy ``least_squares`` fit of
  the same data started at the truth (target at most 3x);
* ``diagnose``: the diagnostics of a fit against the fit alone at 1e4 and 1e5 points,
  with peak memory (target at most 1x, memory linear in the points);
* ``startup``: ``jjpattern analyze small.csv --json``, whole process, against
  ``python -c pass`` (target at most 0.8 s CPU);
* ``read``: reading a 1001 x 2001 HDF5 map against h5py reading the same three
  datasets (target 1.5x time, 1.5x memory);
* ``loaded``: extraction of that map as read against the same map built in memory
  (target equal);
* ``extract``: each criterion on a 1001 x 2001 map against one
  ``np.abs(v).argmax(axis=1)`` pass (targets 5x voltage, 10x derivative criteria);
* ``report``: the report of one sweep against building its figures (target 1 s CPU).

Times are best-of or median wall time with the CPU time beside them; on a loaded
machine the CPU time and the ratio are the figures to compare. The test-suite row of
the table is not measured here (``pytest`` prints its own time).

Run: python scripts/bench_all.py [--rows fit diagnose ...] [--repeats 5] [--points 10000]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
ROWS = ("fit", "diagnose", "startup", "read", "loaded", "extract", "report")


def clock(repeats, fn):
    """``(best wall s, best CPU s)`` over ``repeats`` calls (after one warm-up call)."""
    fn()
    wall, cpu = np.inf, np.inf
    for _ in range(repeats):
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        wall = min(wall, time.perf_counter() - t0)
        cpu = min(cpu, time.process_time() - c0)
    return wall, cpu


def peak(fn) -> int:
    tracemalloc.start()
    fn()
    out = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return out


def show(stage, ours, ref, what_ref, target):
    """One line: ours and the reference (wall and CPU) and the ratio of each."""
    print(f"  {stage:34s} {1e3 * ours[0]:8.1f} ms (cpu {1e3 * ours[1]:7.1f}) | {what_ref} "
          f"{1e3 * ref[0]:8.1f} ms (cpu {1e3 * ref[1]:7.1f}) | ratio {ours[0] / ref[0]:5.2f} "
          f"(cpu {ours[1] / max(ref[1], 1e-9):5.2f}; target {target})")


def row_fit(args):
    from scipy import optimize

    from jjpattern.fit.engine import fit_pattern
    from jjpattern.synthetic import random_case

    case = random_case(np.random.default_rng(1), period_T=1e-3, lobes=8, n_points=1000,
                       noise_fraction=0.02, uneven=False)
    x, y = case.field_T, case.ic_A

    def residual(p):
        return (p[0] * np.abs(np.sinc((x - p[2]) / p[1])) - y) / case.noise_A

    truth = [case.ic0_A, case.period_T, case.field_offset_T]
    scale = np.abs(truth) + [0.0, 0.0, case.period_T]
    ours = clock(args.repeats, lambda: fit_pattern(x, y, geometry="rectangular"))
    ref = clock(args.repeats, lambda: optimize.least_squares(residual, truth, x_scale=scale))
    print("automatic fit, 1000 points, 8 lobes each side, 2 % noise:")
    show("fit_pattern", ours, ref, "least_squares from truth", "3x")


def row_diagnose(args):
    from bench_diagnose import measure

    print("fit plus diagnostics (no I/O), uniform pattern, 8 lobes each side:")
    for n in args.points:
        # Best of as many calls as the other rows: the diagnostics' BLAS product and the
        # fit's least squares vary by 2x from call to call on a loaded machine.
        t_fit, m_fit, t_diag, m_diag, data = measure(n, args.repeats)
        print(f"  {n:>7d} points: diagnostics {1e3 * t_diag:8.1f} ms, peak {m_diag / 2**20:6.1f}"
              f" MiB ({m_diag / data:5.1f} x the data) | automatic fit {1e3 * t_fit:8.1f} ms, "
              f"peak {m_fit / 2**20:5.1f} MiB | ratio {t_diag / t_fit:4.2f} (target 1)")


def row_startup(args):
    from bench_startup import rows

    print("whole process, command line (CPU, best of 3):")
    results = rows(repeats=3)
    base = results[0][1]
    for label, cpu, heavy in results[1:]:
        print(f"  {label:40s} {cpu:5.2f} s CPU | python -c pass {base:5.2f} s | "
              f"{cpu / base:5.1f}x (target 0.8 s) | imports {', '.join(heavy) or '-'}")


def _map_file(tmp):
    import h5py
    from bench_read import make_map

    field, bias, v = make_map(np.random.default_rng(1), 1001, 2001, False)
    path = os.path.join(tmp, "map.h5")
    with h5py.File(path, "w") as f:
        f.create_dataset("field", data=field * 1e3).attrs["units"] = "mT"
        f.create_dataset("bias", data=bias * 1e6).attrs["units"] = "uA"
        f.create_dataset("voltage", data=v * 1e6).attrs["units"] = "uV"
    return path, field, bias, v


def row_read(args):
    from bench_read import h5py_raw

    from jjpattern.io import read
    from jjpattern.io.source import open_source

    def read_and_digest():
        return read(path).sha256  # what writing a record asks for

    def digest():
        return open_source(path).sha256

    with tempfile.TemporaryDirectory() as tmp:
        path, _, _, v = _map_file(tmp)
        ours, ref = clock(args.repeats, lambda: read(path)), clock(args.repeats,
                                                                    lambda: h5py_raw(path))
        sha, both = clock(args.repeats, digest), clock(args.repeats, read_and_digest)
        p_ours, p_ref = peak(lambda: read(path)), peak(lambda: h5py_raw(path))
        p_both = peak(read_and_digest)
    # The input's hash is taken when a record is written, not while reading.
    print(f"reading a 1001 x 2001 HDF5 map ({v.nbytes / 2**20:.1f} MiB):")
    show("jjpattern read (no digest)", ours, ref, "h5py, 3 datasets", "1.5x")
    print(f"  SHA-256 when a record is written: {1e3 * sha[0]:.1f} ms (cpu {1e3 * sha[1]:.1f}) "
          f"= {sha[1] / max(ref[1], 1e-9):.2f} x h5py (cpu)")
    show("jjpattern read + digest", both, ref, "h5py, 3 datasets", "-")
    print(f"  peak memory {p_ours / v.nbytes:4.2f} x the map (read + digest "
          f"{p_both / v.nbytes:4.2f}) | h5py {p_ref / v.nbytes:4.2f} x | ratio "
          f"{p_ours / p_ref:4.2f} (target 1.5)")


def row_loaded(args):
    from jjpattern.extract.engine import extract
    from jjpattern.io import read
    from jjpattern.io.maps import IVMap

    with tempfile.TemporaryDirectory() as tmp:
        path, field, bias, v = _map_file(tmp)
        loaded = read(path)
    built = IVMap("memory", None, field, np.broadcast_to(bias, v.shape), v, "voltage")
    ours = clock(args.repeats, lambda: extract(loaded, criterion="voltage"))
    ref = clock(args.repeats, lambda: extract(built, criterion="voltage"))
    print("voltage extraction of the map as read from its file:")
    show("map as read", ours, ref, "map built in memory", "1x")


def row_extract(args):
    from jjpattern.extract.engine import extract
    from jjpattern.extract.registry import criterion_names
    from jjpattern.io.maps import IVMap
    from jjpattern.synthetic import bias_sweep, ideal, rsj_map

    rng = np.random.default_rng(1)
    field = np.linspace(-3e-3, 3e-3, 1001)
    ic = ideal(field, "rectangular", 10e-6, 1e-3, 0.1e-3)
    bias = bias_sweep(16e-6, 2001, "up")
    v = rsj_map(rng, field, ic, ic, 12.0, bias, 0.1e-6, offset_V=2e-6)
    ivmap = IVMap("bench", None, field, np.broadcast_to(bias, v.shape), v, "voltage")
    print(f"extraction, 1001 x 2001 voltage map ({v.nbytes / 2**20:.1f} MiB), best of "
          f"{args.repeats}:")
    for criterion in criterion_names(auto=False):
        base = clock(args.repeats, lambda: np.abs(v).argmax(axis=1))
        ours = clock(args.repeats, lambda c=criterion: extract(ivmap, criterion=c))
        memory = peak(lambda c=criterion: extract(ivmap, criterion=c)) / v.nbytes
        show(f"{criterion} (peak {memory:4.2f} x map)", ours, base, "abs-argmax pass",
             "5x" if criterion == "voltage" else "10x")


def row_report(args):
    from jjpattern.pipeline import analyze
    from jjpattern.report.bundle import write_report
    from jjpattern.report.plot import density_figure, pattern_figure

    demo = Path(__file__).resolve().parent.parent / "jjpattern" / "demo_data" / "kt14_j03.csv"
    result = analyze(str(demo))

    def figures():
        import matplotlib.pyplot as plt

        for fig in (pattern_figure(result.fits), density_figure(result.current_density)):
            plt.close(fig)

    with tempfile.TemporaryDirectory() as tmp:
        count = iter(range(10**6))
        ours = clock(max(1, args.repeats // 2),
                     lambda: write_report(result, os.path.join(tmp, f"r{next(count)}"), []))
    ref = clock(max(1, args.repeats // 2), figures)
    print("report of one sweep (the bundled kt14_j03.csv):")
    show("write_report", ours, ref, "building the figures", "1 s CPU")


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", nargs="+", choices=ROWS, default=list(ROWS))
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--points", type=int, nargs="+", default=[10_000, 100_000],
                        help="sizes of the diagnose row")
    args = parser.parse_args(argv)
    print(f"load average {os.getloadavg()[0]:.1f}; OPENBLAS_NUM_THREADS="
          f"{os.environ.get('OPENBLAS_NUM_THREADS', 'unset')}")
    for name in args.rows:
        globals()[f"row_{name}"](args)


if __name__ == "__main__":
    main()
