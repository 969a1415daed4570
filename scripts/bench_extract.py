"""Speed, memory and accuracy of Ic extraction from voltage maps.

Speed: a 1001-field x 2001-bias map; each criterion is timed beside one
vectorised pass over the same array, ``np.abs(v).argmax(axis=1)``, in the same
process; peak memory is the tracemalloc peak of the extraction over the map's
own size. The voltage criterion read on the RSJ onset (the default) is also timed
beside the same criterion with linear interpolation across the step.

Accuracy: RSJ maps (V = Rn sqrt(I^2 - Ic^2); Stewart 1968, McCumber 1968) at
bias steps of 2.5 %, 1 % and 0.25 % of Ic0, voltage noise 0.5 % of Rn Ic0;
the reading minus sqrt(Ic^2 + (V_th/Rn)^2) in bias steps over the rows with Ic
above 10 steps, for the onset reading and for linear interpolation.

Run: python scripts/bench_extract.py [--repeats 5]
"""

from __future__ import annotations

import argparse
import time
import tracemalloc

import numpy as np

from jjpattern.extract import registry
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


class LinearVoltage(registry.Voltage):
    """The voltage criterion with linear interpolation across the step (the former reading)."""

    name = "voltage-linear"
    auto_for = ()
    onset = None


def accuracy(rng, rn_ohm=12.0, ic0_A=10e-6):
    """Reading error in bias steps (mean, standard deviation) per step and reading."""
    field = np.linspace(-3.5e-3, 3.5e-3, 301)
    ic = ideal(field, "rectangular", ic0_A, 1e-3, 0.13e-3)
    for fraction in (0.025, 0.01, 0.0025):
        step = fraction * ic0_A
        quarter = np.arange(0.0, 1.5 * ic0_A + step / 2, step)
        bias = np.concatenate([quarter, quarter[-2::-1], -quarter[1:], -quarter[-2::-1]])
        v = rsj_map(rng, field, ic, ic, rn_ohm, bias, 0.005 * rn_ohm * ic0_A, offset_V=1e-6)
        ivmap = IVMap("acc", None, field, np.broadcast_to(bias, v.shape), v, "voltage")
        line = []
        for criterion in ("voltage", "voltage-linear"):
            ex = extract(ivmap, criterion=criterion)
            level = ex.threshold["value"]
            pos = ex.branches[0]
            clear = (pos.status == "ok") & (ic > 10 * step)
            error = (pos.ic_A[clear] - np.hypot(ic[clear], level / rn_ohm)) / step
            stated = np.sqrt(np.mean(pos.ic_uncertainty_A[clear] ** 2)) / step
            line.append(f"{criterion} {error.mean():+.3f} +- {error.std():.3f} "
                        f"(stated {stated:.3f})")
        print(f"  step {100 * fraction:g} % of Ic0, reading - expected in steps: "
              + "; ".join(line))


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
    with_linear = {**registry.REGISTRY, LinearVoltage.name: LinearVoltage}
    registry.REGISTRY.update(with_linear)
    try:
        t = best_of(args.repeats, lambda: extract(ivmap, criterion=LinearVoltage.name))
        print(f"  voltage, linear interpolation across the step: {1e3 * t:.1f} ms")
        print("accuracy on RSJ maps, rows with Ic above 10 bias steps:")
        accuracy(rng)
    finally:
        registry.REGISTRY.pop(LinearVoltage.name)


if __name__ == "__main__":
    main()
