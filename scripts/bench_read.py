"""Speed and memory of reading a raw map, beside the bare library read in the same process.

HDF5: a 1001-field x 2001-bias voltage map (float64, one shared bias row),
read by h5py alone (the three datasets, nothing else) and by jjpattern
(checks, units to SI, sorted by field). The input's SHA-256 is not taken while
reading but when a record is written (``.sha256`` of what was read): its time,
streaming the file, is shown on its own, and so is the whole read + digest.
Text: a long table of 201 x 401 rows, read by ``pandas.read_csv`` alone and
by jjpattern. Times are medians over ``--repeats`` runs; peak memory is the
tracemalloc peak of one more run, in units of the map's own size. The
extraction time on the map as read shows what the shared bias row is for.

Run: python scripts/bench_read.py [--repeats 7] [--descending]
"""

from __future__ import annotations

import argparse
import hashlib
import os
import statistics
import tempfile
import time
import tracemalloc
from dataclasses import dataclass

import h5py
import numpy as np

from jjpattern.extract.engine import extract
from jjpattern.io import read
from jjpattern.io.digest import held
from jjpattern.io.source import open_source
from jjpattern.synthetic import bias_sweep, ideal, rsj_map


def median_time(repeats, fn):
    """Median wall-clock time; CPU time is printed too, steadier on a shared machine."""
    wall, cpu = [], []
    for _ in range(repeats):
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return Timing(statistics.median(wall), statistics.median(cpu))


def alternated(repeats, *fns):
    """Median Timing of each function, run in turn within each repeat, so that a change of
    load on the shared machine touches each alike."""
    wall, cpu = [[] for _ in fns], [[] for _ in fns]
    for _ in range(repeats):
        for i, fn in enumerate(fns):
            t0, c0 = time.perf_counter(), time.process_time()
            fn()
            wall[i].append(time.perf_counter() - t0)
            cpu[i].append(time.process_time() - c0)
    return [Timing(statistics.median(w), statistics.median(c))
            for w, c in zip(wall, cpu, strict=True)]


@dataclass(frozen=True)
class Timing:
    wall: float
    cpu: float

    def __str__(self):
        return f"{1e3 * self.wall:6.1f} ms (cpu {1e3 * self.cpu:5.1f})"


def peak_bytes(fn):
    tracemalloc.start()
    fn()
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak


def make_map(rng, n_field, n_bias, descending):
    field = np.linspace(-3e-3, 3e-3, n_field)
    if descending:
        field = field[::-1].copy()
    ic = ideal(field, "rectangular", 10e-6, 1e-3, 0.1e-3)
    bias = bias_sweep(16e-6, n_bias, "up")
    return field, bias, rsj_map(rng, field, ic, ic, 12.0, bias, 0.1e-6, offset_V=2e-6)


def h5py_raw(path):
    with h5py.File(path, "r") as f:
        return f["field"][()], f["bias"][()], f["voltage"][()]


def line(what, t_lib, p_lib, t_ours, p_ours, size, lib="library", ours="jjpattern"):
    print(f"  {what:5s} {lib} {t_lib}, peak {p_lib / size:4.2f} x map | "
          f"{ours} {t_ours}, peak {p_ours / size:4.2f} x map | "
          f"ratio {t_ours.wall / t_lib.wall:4.2f} (cpu {t_ours.cpu / t_lib.cpu:4.2f})")


def read_and_digest(path):
    got = read(path)
    return got, got.sha256  # what writing a record asks for


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=7)
    parser.add_argument("--descending", action="store_true",
                        help="field stored from +B to -B (the reader must reorder rows)")
    args = parser.parse_args()
    rng = np.random.default_rng(1)
    with tempfile.TemporaryDirectory() as tmp:
        field, bias, v = make_map(rng, 1001, 2001, args.descending)
        path = os.path.join(tmp, "map.h5")
        with h5py.File(path, "w") as f:
            f.create_dataset("field", data=field * 1e3).attrs["units"] = "mT"
            f.create_dataset("bias", data=bias * 1e6).attrs["units"] = "uA"
            f.create_dataset("voltage", data=v * 1e6).attrs["units"] = "uV"
        size = v.nbytes
        print(f"HDF5 map {v.shape[0]} x {v.shape[1]} ({size / 2**20:.1f} MiB, file "
              f"{os.path.getsize(path) / 2**20:.1f} MiB), field "
              f"{'descending' if args.descending else 'ascending'}, median of {args.repeats}")
        h5py_raw(path), read_and_digest(path)  # warm the page cache and imports
        t_lib, t_ours, t_sha, t_both = alternated(
            args.repeats, lambda: h5py_raw(path), lambda: read(path),
            lambda: open_source(path).sha256, lambda: read_and_digest(path))
        line("hdf5", t_lib, peak_bytes(lambda: h5py_raw(path)), t_ours,
             peak_bytes(lambda: read(path)), size, "h5py read",
             "jjpattern read (no digest)")
        print(f"  SHA-256 when a record is written: {t_sha} = {t_sha.cpu / t_lib.cpu:4.2f} x "
              f"h5py (cpu), peak {peak_bytes(lambda: open_source(path).sha256) / 2**20:.1f} MiB")
        line("hdf5", t_lib, peak_bytes(lambda: h5py_raw(path)), t_both,
             peak_bytes(lambda: read_and_digest(path)), size, "h5py read",
             "jjpattern read + digest")
        got = read(path)
        expected = hashlib.sha256(open(path, "rb").read()).hexdigest()
        print(f"  digest not taken while reading: {not isinstance(held(got), str)}; equals "
              f"hashlib over the file: {got.sha256 == expected}")
        print(f"  bias row shared (stride 0): {got.bias_A.strides[0] == 0}; map an array of "
              f"its own: {got.signal.flags.owndata}")
        # Why the shared row matters: extraction takes its fast path on the map as read.
        t_ex = median_time(args.repeats, lambda: extract(got, criterion="voltage"))
        print(f"  voltage-criterion extraction on the map as read: {t_ex}")

        import pandas as pd

        field, bias, v = make_map(rng, 201, 401, False)
        text = os.path.join(tmp, "long.csv")
        f2 = np.repeat(field * 1e3, bias.size)
        b2 = np.tile(bias * 1e6, field.size)
        np.savetxt(text, np.column_stack([f2, b2, v.ravel() * 1e6]), delimiter=",",
                   fmt="%.10g", header="B (mT),I (uA),V (uV)", comments="")
        size = v.nbytes
        print(f"text long table {f2.size} rows ({os.path.getsize(text) / 2**20:.1f} MiB file)")
        t_lib = median_time(args.repeats, lambda: pd.read_csv(text))
        t_ours = median_time(args.repeats, lambda: read(text))
        line("text", t_lib, peak_bytes(lambda: pd.read_csv(text)), t_ours,
             peak_bytes(lambda: read(text)), size)


if __name__ == "__main__":
    main()
