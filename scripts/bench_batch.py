"""Speed of ``jjpattern batch`` beside what it cannot beat, measured in the same run.

Generates N raw V(I, B) maps (HDF5, n_field x n_bias, bias 0 -> +Imax -> 0 ->
-Imax -> 0) and M Ic(B) tables (CSV, both polarities) into a temporary folder
with a manifest, then times, one after the other:

1. reading the same files with h5py / pandas alone (the floor of any tool);
2. the sum of the per-junction analysis times, ``jjpattern.analyze`` called in
   this process one file after another;
3. two plain processes analysing one half each (what the two cores give right now,
   other users of the machine included);
4. the batch with 1 worker and with 2 workers (wall time, fresh output folders).

Targets: 1-worker wall within 1.15 x the in-process sum; parallel efficiency
(1-worker wall / (2 x 2-worker wall)) at least 90 %.

Run: python scripts/bench_batch.py --maps 200 --tables 1000   (full size: long)
     python scripts/bench_batch.py --maps 10 --tables 50      (a few minutes)
"""

from __future__ import annotations

import os

# One BLAS thread in this process too, as in the batch workers, so the sums compare.
for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_name] = "1"

import argparse  # noqa: E402
import shutil  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402
from scipy.constants import e, h  # noqa: E402

PHI0 = h / (2 * e)
D_M, JC = 236e-9, 3.3e5  # magnetic thickness (m), critical current density (A/m^2)


def _pattern(rng, length_um, b_T):
    period = PHI0 / (D_M * length_um * 1e-6)
    ic0 = JC * (length_um * 1e-6) * 10e-6
    offset = rng.normal(0, 0.02) * period
    return ic0 * np.abs(np.sinc((b_T - offset) / period)), period, ic0


def write_map(rng, path, length_um, n_field, n_bias):
    """An RSJ-like voltage map of a hysteretic junction, written with h5py."""
    import h5py

    period = PHI0 / (D_M * length_um * 1e-6)
    b_T = np.linspace(-4.5, 4.5, n_field) * period
    ic, _, ic0 = _pattern(rng, length_um, b_T)
    ic = np.abs(ic + rng.normal(0, 0.01 * ic0, ic.size))
    q = (n_bias - 1) // 4
    up = np.linspace(0, 1.5 * ic0, q + 1)
    bias = np.concatenate([up, up[-2::-1], -up[1:], -up[-2::-1]])[:n_bias]
    mag = np.abs(bias)
    outbound = np.concatenate([[True], np.diff(mag) > 0])[None, :]
    resistive = np.where(outbound, mag[None, :] > ic[:, None], mag[None, :] > 0.4 * ic[:, None])
    rn = 10.0
    volt = np.where(resistive, rn * np.sign(bias) * np.sqrt(np.maximum(
        bias**2 - (0.4 * ic[:, None]) ** 2, 0)), 0.0)
    volt += 2e-7 + rng.normal(0, 2e-8, volt.shape)
    with h5py.File(path, "w") as f:
        f.attrs["chip"] = "BENCH"
        f.create_dataset("field", data=b_T).attrs["units"] = "T"
        f.create_dataset("bias", data=bias).attrs["units"] = "A"
        f.create_dataset("voltage", data=volt.astype(np.float32)).attrs["units"] = "V"


def write_table(rng, path, length_um, n_points):
    period = PHI0 / (D_M * length_um * 1e-6)
    b_T = np.linspace(-5.0, 5.0, n_points) * period
    ic, _, ic0 = _pattern(rng, length_um, b_T)
    pos = np.abs(ic + rng.normal(0, 0.01 * ic0, ic.size)) * 1e6
    neg = -np.abs(ic + rng.normal(0, 0.01 * ic0, ic.size)) * 1e6
    rows = "".join(f"{b:.6g},{p:.5f},{n:.5f}\n" for b, p, n in zip(b_T * 1e3, pos, neg,
                                                                    strict=True))
    with open(path, "w") as handle:
        handle.write("B (mT),Ic+ (uA),Ic- (uA)\n" + rows)


def generate(folder, n_maps, n_tables, n_field, n_bias, n_points, seed):
    rng = np.random.default_rng(seed)
    lines = ["file,junction,chip,length (um),width (um)"]
    for k in range(n_maps):
        length = float(rng.uniform(4, 20))
        write_map(rng, os.path.join(folder, f"m{k:04d}.h5"), length, n_field, n_bias)
        lines.append(f"m{k:04d}.h5,M{k:04d},BENCH,{length:.3f},10")
    for k in range(n_tables):
        length = float(rng.uniform(4, 20))
        write_table(rng, os.path.join(folder, f"t{k:04d}.csv"), length, n_points)
        lines.append(f"t{k:04d}.csv,T{k:04d},BENCH,{length:.3f},10")
    manifest = os.path.join(folder, "manifest.csv")
    with open(manifest, "w") as handle:
        handle.write("\n".join(lines) + "\n")
    return manifest


def _cpu() -> float:
    """CPU seconds of this process and of its reaped children (the pool's workers)."""
    import resource

    own, kids = (resource.getrusage(w) for w in (resource.RUSAGE_SELF,
                                                 resource.RUSAGE_CHILDREN))
    return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime


def read_only(rows) -> tuple[float, float]:
    import h5py
    import pandas as pd

    start, cpu = time.perf_counter(), _cpu()
    for row in rows:
        if row.file_path.endswith(".h5"):
            with h5py.File(row.file_path, "r") as f:
                for name in ("field", "bias", "voltage"):
                    f[name][()]
        else:
            pd.read_csv(row.file_path)
    return time.perf_counter() - start, _cpu() - cpu


def in_process(rows) -> tuple[float, float]:
    from jjpattern import analyze

    total, cpu = 0.0, _cpu()
    for row in rows:
        start = time.perf_counter()
        try:
            analyze(row.file_path, row.settings())
        except Exception:  # noqa: BLE001 - timed like the batch, which records failures
            pass
        total += time.perf_counter() - start
    return total, _cpu() - cpu


def _half(manifest, index):
    """Analyse every other junction (``index`` 0 or 1) in this process: one half of a
    two-process run without the batch machinery."""
    from jjpattern.batch.manifest import read_manifest

    in_process(read_manifest(manifest)[index::2])


def two_halves(manifest) -> float:
    """Wall time of two plain processes analysing one half each: what two cores give now."""
    import multiprocessing

    ctx = multiprocessing.get_context("spawn")
    procs = [ctx.Process(target=_half, args=(manifest, k)) for k in (0, 1)]
    start = time.perf_counter()
    for p in procs:
        p.start()
    for p in procs:
        p.join()
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--maps", type=int, default=200)
    parser.add_argument("--tables", type=int, default=1000)
    parser.add_argument("--fields", type=int, default=401)
    parser.add_argument("--bias", type=int, default=1001)
    parser.add_argument("--points", type=int, default=401, help="points per Ic(B) table")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--keep", metavar="DIR", help="generate into DIR and keep it")
    args = parser.parse_args()

    from jjpattern.batch.manifest import read_manifest
    from jjpattern.batch.runner import run_batch

    folder = args.keep or tempfile.mkdtemp(prefix="jjpattern-bench-")
    os.makedirs(folder, exist_ok=True)
    try:
        start = time.perf_counter()
        manifest = generate(folder, args.maps, args.tables, args.fields, args.bias,
                            args.points, args.seed)
        size = sum(os.path.getsize(os.path.join(folder, n)) for n in os.listdir(folder))
        print(f"{args.maps} maps ({args.fields} x {args.bias}, HDF5) + {args.tables} tables "
              f"({args.points} points, CSV): {size / 2**20:.0f} MiB, generated in "
              f"{time.perf_counter() - start:.0f} s; {os.cpu_count()} cores")
        rows = read_manifest(manifest)
        read_only(rows[:5])  # warm the imports and the page cache
        in_process(rows[:2])
        t_read, c_read = read_only(rows)
        t_sum, c_sum = in_process(rows)
        t_halves = two_halves(manifest)
        runs = {}
        for workers in (1, 2):
            out = os.path.join(folder, f"out{workers}")
            shutil.rmtree(out, ignore_errors=True)
            cpu = _cpu()
            outcome = run_batch(manifest, out, workers=workers, progress=False)
            runs[workers] = (outcome, _cpu() - cpu)
        print("                                    wall        CPU")
        print(f"read only (h5py / pandas)        {t_read:8.2f} s {c_read:8.2f} s")
        print(f"analysis in this process, sum    {t_sum:8.1f} s {c_sum:8.1f} s   "
              f"({1e3 * t_sum / len(rows):.0f} ms wall per junction)")
        for workers, (outcome, cpu) in runs.items():
            print(f"batch, {workers} worker{'s' if workers > 1 else ' '}                "
                  f"{outcome.seconds:8.1f} s {cpu:8.1f} s   (inside the workers' analyses: "
                  f"wall {outcome.analysis_seconds:.1f} s, CPU "
                  f"{outcome.analysis_cpu_seconds:.1f} s)")
        print(runs[2][0].last_line())
        w1, w2 = runs[1][0].seconds, runs[2][0].seconds
        print(f"1-worker wall / in-process sum   {w1 / t_sum:8.2f}     (target <= 1.15); "
              f"CPU ratio {runs[1][1] / c_sum:.2f}")
        print(f"two plain processes, half each   {t_halves:8.1f} s              (no batch "
              "machinery; their start-up and imports included)")
        print(f"parallel efficiency, 2 workers   {100 * w1 / (2 * w2):8.0f} %   "
              "(target >= 90 %)")
        print(f"  the same for two plain processes {100 * t_sum / (2 * t_halves):6.0f} %   "
              "(what the machine gives at the moment)")
        print(f"load average during the run: {', '.join(f'{v:.1f}' for v in os.getloadavg())}"
              " (other processes on the machine share its cores)")
    finally:
        if not args.keep:
            shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
