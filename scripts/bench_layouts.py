"""Speed of reading Ic(B) sweeps in the layouts labs write, beside bare pandas in one process.

Three files of the same numbers (``--rows`` field steps, swept up then down, both
polarities, a noisy field readback): a plain CSV (two current columns), a
semicolon file with decimal commas and a units row, and one signed current column
(two rows per field step). Each is read by ``pandas.read_csv`` alone (the baseline:
parsing only) and by ``jjpattern.io.read`` (bytes read once and hashed, layout
recognised, split by sign and by sweep direction, cleaned). Times are medians over
``--repeats`` runs, wall and CPU.

Run: python scripts/bench_layouts.py [--rows 100000] [--repeats 5]
"""

from __future__ import annotations

import argparse
import os
import statistics
import tempfile
import time

import numpy as np

from jjpattern.io import read


def timed(repeats, fn):
    wall, cpu = [], []
    for _ in range(repeats):
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return statistics.median(wall), statistics.median(cpu)


def write_files(folder, rows, seed):
    rng = np.random.default_rng(seed)
    up = np.linspace(-3.0, 3.0, rows // 2)
    field = np.r_[up, up[::-1]] + rng.normal(0, 2e-4, 2 * up.size)  # mT
    pos = np.abs(15 * np.sinc(field / 0.45) + rng.normal(0, 0.15, field.size))  # uA
    neg = np.abs(14 * np.sinc(field / 0.45) + rng.normal(0, 0.15, field.size))
    b, p, n = (np.char.mod("%.6f", a) for a in (field, pos, neg))
    paths = {}
    paths["plain csv"] = os.path.join(folder, "plain.csv")
    with open(paths["plain csv"], "w") as handle:
        handle.write("B (mT),Ic+ (uA),Ic- (uA)\n")
        handle.writelines(f"{x},{y},-{z}\n" for x, y, z in zip(b, p, n, strict=True))
    paths["comma ; units row"] = os.path.join(folder, "regional.csv")
    with open(paths["comma ; units row"], "w") as handle:
        handle.write("Field;Critical current +;Critical current -\nmT;uA;uA\n")
        handle.writelines(f"{x};{y};-{z}\n".replace(".", ",") for x, y, z in
                          zip(b, p, n, strict=True))
    paths["signed column"] = os.path.join(folder, "signed.csv")
    with open(paths["signed column"], "w") as handle:
        handle.write("B (mT),Ic (uA)\n")
        handle.writelines(f"{x},{y}\n{x},-{z}\n" for x, y, z in zip(b, p, n, strict=True))
    return paths


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=100_000)
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    import pandas as pd

    with tempfile.TemporaryDirectory() as folder:
        paths = write_files(folder, args.rows, args.seed)
        print(f"{args.rows} rows of field steps, swept up then down (median wall time, CPU "
              "in brackets)")
        for name, path in paths.items():
            options = ({"sep": ";", "decimal": ",", "skiprows": [1]} if "units" in name
                       else {})
            base = timed(args.repeats, lambda p=path, o=options: pd.read_csv(p, **o))
            ours = timed(args.repeats, lambda p=path: read(p))
            sweep = read(path)
            labels = ", ".join(b.label for b in sweep.branches)
            print(f"  {name:18s} pandas {1e3 * base[0]:7.1f} ms ({1e3 * base[1]:6.1f}) | "
                  f"jjpattern {1e3 * ours[0]:7.1f} ms ({1e3 * ours[1]:6.1f}) | "
                  f"ratio {ours[0] / base[0]:4.1f}x | {labels}")


if __name__ == "__main__":
    main()
