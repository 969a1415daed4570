"""Catalog figures: recording speed against plain SQLite inserts of the same bytes (measured
in the same process), file size per record, history query time, and drift false alarms
and detections on noise-only and stepped histories.

    python scripts/bench_catalog.py --records 300 --histories 2000 --seed 1
"""

from __future__ import annotations

import argparse
import os
import sqlite3
import tempfile
import time

import numpy as np

from jjpattern.catalog import open_catalog
from jjpattern.catalog.document import pack
from jjpattern.catalog.drift import Tolerances, junction_drift
from jjpattern.catalog.history import junction_history
from jjpattern.catalog.store import RecordRow
from jjpattern.result import FitResult, Result
from jjpattern.settings import Settings
from jjpattern.synthetic import ideal

PERIOD_T, IC0_A = 0.731e-3, 47e-6


def demo_like(rng, junction: str, cooldown: str, points: int = 601) -> Result:
    """A document the size of the demo's: two branches of ``points`` points each."""
    field_T = np.linspace(-5e-3, 5e-3, points)
    fits = []
    for branch in ("positive", "negative"):
        ic_A = np.abs(ideal(field_T, "rectangular", IC0_A, PERIOD_T, 4e-5)
                      + rng.normal(0, 0.02 * IC0_A, points))
        fits.append(FitResult(branch=branch, model="rectangular", period_T=PERIOD_T,
                              period_stderr_T=5e-7, field_offset_T=4e-5,
                              field_offset_stderr_T=7e-7, ic0_A=IC0_A, ic0_stderr_A=1e-7,
                              points_used=points, field_T=field_T, ic_A=ic_A))
    sha = f"{junction}-{cooldown}-{rng.integers(1 << 62)}"
    return Result(input={"path": f"{junction}.csv", "sha256": sha, "metadata": {
        "junction": junction, "chip": "KT-14", "cooldown": cooldown}},
        fits=fits, flags=[], settings=Settings())


def bench_recording(rng, n: int, folder: str) -> None:
    docs = [demo_like(rng, f"KT14-J{i % 40:02d}", f"CD-{i // 40:02d}") for i in range(n)]
    blobs = [pack(d.to_dict()) for d in docs]
    base = sqlite3.connect(os.path.join(folder, "plain.sqlite"), isolation_level=None)
    base.execute("PRAGMA journal_mode = WAL")
    base.execute("PRAGMA synchronous = FULL")
    base.execute("CREATE TABLE t (id INTEGER PRIMARY KEY, doc BLOB)")
    t0 = time.perf_counter()
    for blob in blobs:
        base.execute("BEGIN IMMEDIATE")
        base.execute("INSERT INTO t (doc) VALUES (?)", (blob,))
        base.execute("COMMIT")
    plain = (time.perf_counter() - t0) / n
    base.close()
    path = os.path.join(folder, "catalog.sqlite")
    with open_catalog(path) as cat:
        t0 = time.perf_counter()
        for d in docs:
            cat.record(d)
        ours = (time.perf_counter() - t0) / n
        t0 = time.perf_counter()
        for d in docs[:50]:
            cat.record(d)
        again = (time.perf_counter() - t0) / 50
        t0 = time.perf_counter()
        history = junction_history(cat, "KT14-J00")
        query = time.perf_counter() - t0
    size = os.path.getsize(path) / n
    print(f"recording {n} demo-sized documents (2 x 601 points):")
    print(f"  baseline plain INSERT of the packed bytes, one commit each: {1e3 * plain:.2f} ms")
    print(f"  catalog record (labels, fits, flags, settings diff): {1e3 * ours:.2f} ms "
          f"= {ours / plain:.1f} x baseline; already present: {1e3 * again:.2f} ms")
    print(f"  file size {size / 1024:.1f} KiB per record (JSON text "
          f"{len(docs[0].to_json()) / 1024:.1f} KiB)")
    print(f"  history of one junction ({len(history['records'])} records) in a catalog of "
          f"{n} with chip-wide drift: {1e3 * query:.1f} ms")


def _row(i, fits):
    return RecordRow(id=i, junction="J", chip="C", cooldown=f"CD-{i}", measured="",
                     measured_iso=None, temperature_K=None, input_path="",
                     input_sha256=f"in-{i}", settings_sha256="s", tool_version="",
                     generated_utc="", recorded_utc="", recorded_by="", origin="",
                     changed=None, fits=fits)


def history(rng, cooldowns, rel_ic0, rel_period, rel_offset, step=None):
    """An unchanged junction measured ``cooldowns`` times; ``step`` = (key, size) changes
    one number from the last cooldown on (relative, or in periods for the offset)."""
    rows = []
    for i in range(cooldowns):
        truth = {"ic0_A": IC0_A, "period_T": PERIOD_T, "field_offset_T": 0.0}
        if step and i == cooldowns - 1:
            key, size = step
            truth[key] += size * (PERIOD_T if key == "field_offset_T" else truth[key])
        fits = []
        for branch in ("positive", "negative"):
            errors = {"ic0_A": rel_ic0 * IC0_A, "period_T": rel_period * PERIOD_T,
                      "field_offset_T": rel_offset * PERIOD_T}
            fit = {"branch": branch, "model": "rectangular"}
            for key, err in errors.items():
                fit[key] = truth[key] + rng.normal(0, err)
                fit[key.replace("_A", "_stderr_A").replace("_T", "_stderr_T")] = err
            fits.append(fit)
        rows.append(_row(i + 1, fits))
    return rows


def bench_drift(rng, n: int) -> None:
    tol = Tolerances()
    print(f"drift flags, {n} histories of 5 cooldowns each, default tolerances:")
    for label, errs in (("small errors (0.3 % Ic0, 0.05 % period, 0.5 % offset)",
                         (3e-3, 5e-4, 5e-3)),
                        ("large errors (3 % Ic0, 0.5 % period, 4 % offset)",
                         (3e-2, 5e-3, 4e-2))):
        false = sum(any(f for f, _ in junction_drift(history(rng, 5, *errs), tol).values())
                    for _ in range(n))
        print(f"  {label}: false drift in {100 * false / n:.2f} % of unchanged junctions "
              "(target < 1 %)")
        for key, size, code in (("ic0_A", -0.10, "ic0-changed"),
                                ("period_T", 0.02, "period-changed"),
                                ("field_offset_T", 0.2, "offset-moved")):
            hit = 0
            for _ in range(n // 4):
                rows = history(rng, 5, *errs, step=(key, size))
                flags, _ = junction_drift(rows, tol)[rows[-1].id]
                hit += any(f.code == code for f in flags)
            print(f"    step {key} {size:+g}: {code} caught in {100 * hit / (n // 4):.1f} %")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--records", type=int, default=300)
    parser.add_argument("--histories", type=int, default=2000)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    rng = np.random.default_rng(args.seed)
    with tempfile.TemporaryDirectory() as folder:
        bench_recording(rng, args.records, folder)
    bench_drift(rng, args.histories)


if __name__ == "__main__":
    main()
