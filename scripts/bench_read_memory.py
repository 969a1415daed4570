"""Peak memory of reading large text inputs, beside ``pandas.read_csv`` in the same process.

Two generated files, in a temporary folder: an Ic(B) sweep at the row limit
(``max_rows``, 200,000 rows) and a long-table raw map of a few hundred MB
(``--fields`` x ``--bias`` rows of field, bias and voltage; 401 x 20,001 by default,
about 8 million rows). For each: the file's size, and the peak resident memory
added by ``jjpattern.io.read`` and by a bare ``pandas.read_csv`` of the same file,
each in a fresh process (the peak RSS after reading less the RSS after the imports;
tracemalloc misses pandas' own parser buffers), and as multiples of the file's size.
The bound stated in the contributor guide is the jjpattern column.

Run: python scripts/bench_read_memory.py [--fields 401 --bias 20001]
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile

import numpy as np

from jjpattern.settings import ReadSettings

_MEASURE = """
import resource, sys, time
import pandas as pd
from jjpattern.io import read
from jjpattern.settings import ReadSettings
base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
path, which, max_points = sys.argv[1], sys.argv[2], int(sys.argv[3])
t0 = time.perf_counter()
if which == "jjpattern":
    read(path, ReadSettings(max_bytes=2**31, max_points=max_points))
else:
    pd.read_csv(path)
elapsed = time.perf_counter() - t0
print((resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - base) * 1024, elapsed)
"""


def peak(path, which, max_points):
    """Peak RSS added by one read, in bytes, and its time (a fresh process each)."""
    out = subprocess.run([sys.executable, "-c", _MEASURE, path, which, str(max_points)],
                         capture_output=True, text=True, check=True).stdout.split()
    return float(out[0]), float(out[1])


def write_sweep(path, rows):
    rng = np.random.default_rng(14)
    b = np.linspace(-3, 3, rows)
    ic = np.abs(10 * np.sinc(b) + rng.normal(0, 0.05, rows))
    np.savetxt(path, np.column_stack([b, ic]), delimiter=",", fmt="%.6f",
               header="B (mT),Ic (uA)", comments="")


def write_map(path, n_field, n_bias):
    rng = np.random.default_rng(14)
    field = np.linspace(-3, 3, n_field)
    bias = np.linspace(-15, 15, n_bias)
    with open(path, "w") as handle:
        handle.write("B (mT),I (uA),V (uV)\n")
        for b in field:  # one field step at a time: the generator itself stays small
            ic = abs(10 * np.sinc(b)) + 0.05
            v = np.sign(bias) * 5 * np.sqrt(np.clip(bias**2 - ic**2, 0, None))
            v += rng.normal(0, 0.02, n_bias)
            np.savetxt(handle, np.column_stack([np.full(n_bias, b), bias, v]),
                       delimiter=",", fmt="%.5g")


def report(label, path, max_points=20_000_000):
    size = os.path.getsize(path)
    ours, t_ours = peak(path, "jjpattern", max_points)
    bare, t_bare = peak(path, "pandas", max_points)
    print(f"{label:28s} {size / 2**20:8.1f} MiB | jjpattern +{ours / 2**20:8.1f} MiB "
          f"({ours / size:4.1f} x, {t_ours:5.1f} s) | pandas.read_csv +{bare / 2**20:8.1f} MiB "
          f"({bare / size:4.1f} x, {t_bare:5.1f} s)")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--fields", type=int, default=401)
    parser.add_argument("--bias", type=int, default=20_001)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        sweep = os.path.join(folder, "sweep.csv")
        write_sweep(sweep, ReadSettings().max_rows)
        report("sweep, 200,000 rows", sweep)
        os.remove(sweep)
        mapped = os.path.join(folder, "map.csv")
        write_map(mapped, args.fields, args.bias)
        rows = args.fields * args.bias
        report(f"map, {rows:,} rows", mapped, max(rows + 2, 20_000_000))


if __name__ == "__main__":
    main()
