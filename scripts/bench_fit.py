"""Benchmark and acceptance run of the automatic fit.

Each part printed beside its baseline from the same process:
1. success over a randomised family (period within 2 %, offset within 0.05 period);
2. scatter and bias over noise realisations, against a plain least-squares fit of the
   same data started at the true values;
3. time of one automatic fit of a 1000-point pattern against that plain fit, and of the
   automatic model choice (``--model auto``) against the single-model automatic fit;
4. false-choice rate of the automatic model choice: uniform short junctions at 0.5-3 %
   noise (folded, |Ic + noise|) must come out rectangular in at least 99 % of cases.

Timings pin BLAS to one thread (the products are small; threads only add overhead on a
shared 2-core machine), as the test suite and the batch workers do.

Parts 1 and 2 fit the model the data were made with (``geometry`` given), as before the
automatic choice existed, on plain Gaussian noise (``folded=False``: the oracle is least
squares on Gaussian noise, and the recorded figures were set on it).

Run: python scripts/bench_fit.py [--cases 2000] [--realisations 300] [--choices 300]
     [--seed 1]
"""

from __future__ import annotations

import argparse
import os
import time

for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

import numpy as np  # noqa: E402

from jjpattern.fit.engine import fit_pattern  # noqa: E402
from jjpattern.fit.models import pattern_model  # noqa: E402
from jjpattern.physics.models import get_model  # noqa: E402
from jjpattern.synthetic import random_case  # noqa: E402


def plain_fit(case):
    model = pattern_model(case.geometry)
    params = model.make_params(ic0_A=case.ic0_A, period_T=case.period_T,
                               field_offset_T=case.field_offset_T)
    return model.fit(case.ic_A, params, field_T=case.field_T, method="leastsq")


def scipy_fit(case):
    """The reference: one scipy ``least_squares`` fit (trf, finite-difference Jacobian) of
    the same data started at the true values, parameters scaled by the truth."""
    from scipy import optimize

    formula = get_model(case.geometry).formula
    scale = np.array([case.ic0_A, case.period_T, case.period_T])
    truth = np.array([case.ic0_A, case.period_T, case.field_offset_T]) / scale

    def residual(v):
        ic0, period, offset = v * scale
        return formula(case.field_T, ic0, period, offset) - case.ic_A

    return optimize.least_squares(residual, truth).x * scale


def family(cases, seed):
    rng = np.random.default_rng(seed)
    failures = []
    start = time.perf_counter()
    for i in range(cases):
        geometry = "circular" if i % 4 == 3 else "rectangular"
        case = random_case(rng, geometry=geometry, folded=False)
        fit = fit_pattern(case.field_T, case.ic_A, geometry=geometry)
        ok = (fit.period_T is not None and fit.field_offset_T is not None
              and abs(fit.period_T / case.period_T - 1) < 0.02
              and abs(fit.field_offset_T - case.field_offset_T) < 0.05 * case.period_T)
        if not ok:
            failures.append((i, case, fit))
    elapsed = time.perf_counter() - start
    rate = 1 - len(failures) / cases
    print(f"family: {cases} cases, right lobe found in {100 * rate:.2f} % "
          f"(target >= 99.5 %), {1e3 * elapsed / cases:.1f} ms per fit")
    for i, case, fit in failures[:10]:
        print(f"  miss #{i}: {case.geometry} P={case.period_T:.3e} lobes={case.lobes_each_side}"
              f" n={case.field_T.size} noise={case.noise_A / case.ic0_A:.3f}"
              f" -> P={fit.period_T} B0={fit.field_offset_T} (true {case.field_offset_T:.3e})"
              f" flags={[f.code for f in fit.flags]}")


def scatter(realisations, seed):
    print("scatter over noise realisations (auto fit | plain fit from truth):")
    for lobes, noise in ((2, 0.03), (6, 0.02), (15, 0.01)):
        rng = np.random.default_rng(seed)
        auto, plain = [], []
        for _ in range(realisations):
            case = random_case(rng, period_T=1e-3, lobes=lobes, n_points=800,
                               noise_fraction=noise, uneven=False, offset_fraction=0.2,
                               folded=False)
            auto.append(fit_pattern(case.field_T, case.ic_A, geometry="rectangular").period_T)
            plain.append(abs(plain_fit(case).params["period_T"].value))
        auto, plain = np.array(auto, dtype=float), np.array(plain)
        bias_auto = 100 * (np.nanmean(auto) / 1e-3 - 1)
        bias_plain = 100 * (plain.mean() / 1e-3 - 1)
        print(f"  lobes={lobes:2d} noise={noise:.2f}: std ratio "
              f"{np.nanstd(auto) / np.std(plain):.3f} (target <= 1.05), bias "
              f"{bias_auto:+.4f} % | {bias_plain:+.4f} % (target |bias| < 0.1 %)")


def _median_time(call, repeats):
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        call()
        times.append(time.perf_counter() - t0)
    return float(np.median(times))


def timing(seed, repeats=20):
    rng = np.random.default_rng(seed)
    case = random_case(rng, period_T=1e-3, lobes=8, n_points=1000, noise_fraction=0.02,
                       uneven=False)

    def single():
        return fit_pattern(case.field_T, case.ic_A, geometry="rectangular")

    def auto():
        return fit_pattern(case.field_T, case.ic_A, geometry="auto")

    single(), auto(), plain_fit(case), scipy_fit(case)
    # Interleaved rounds, medians: the machine is shared and timings drift.
    t_scipy, t_plain, t_single, t_auto = [], [], [], []
    for _ in range(5):
        t_scipy.append(_median_time(lambda: scipy_fit(case), repeats // 4))
        t_plain.append(_median_time(lambda: plain_fit(case), repeats // 4))
        t_single.append(_median_time(single, repeats // 4))
        t_auto.append(_median_time(auto, repeats // 4))
    t_scipy, t_plain, t_single, t_auto = (float(np.median(t))
                                          for t in (t_scipy, t_plain, t_single, t_auto))
    print(f"timing, 1000 points: automatic {1e3 * t_single:.1f} ms | scipy least_squares "
          f"from truth {1e3 * t_scipy:.1f} ms | ratio {t_single / t_scipy:.1f}x (target <= 3x)")
    print(f"timing, 1000 points: automatic {1e3 * t_single:.1f} ms | plain lmfit from truth "
          f"{1e3 * t_plain:.1f} ms | ratio {t_single / t_plain:.1f}x")
    print(f"timing, 1000 points: --model auto {1e3 * t_auto:.1f} ms | single-model automatic "
          f"{1e3 * t_single:.1f} ms | ratio {t_auto / t_single:.2f}x (target <= 3x)")


def choice(cases, seed):
    """Uniform short junctions through the automatic choice: how often rectangular wins."""
    rng = np.random.default_rng(seed)
    chosen = {}
    margins = []
    start = time.perf_counter()
    for _ in range(cases):
        case = random_case(rng, geometry="rectangular", noise_fraction=rng.uniform(0.005, 0.03))
        fit = fit_pattern(case.field_T, case.ic_A, geometry="auto")
        chosen[fit.model] = chosen.get(fit.model, 0) + 1
        if fit.model_choice and fit.model_choice["runner_up"]:
            margins.append(fit.model_choice["criterion_difference"])
    elapsed = time.perf_counter() - start
    rate = chosen.get("rectangular", 0) / cases
    others = ", ".join(f"{k} {v}" for k, v in sorted(chosen.items()) if k != "rectangular")
    print(f"choice: {cases} uniform junctions at 0.5-3 % noise, rectangular chosen in "
          f"{100 * rate:.1f} % (target >= 99 %){'; ' + others if others else ''}; "
          f"median BIC gap to the runner-up {np.median(margins):.1f}; "
          f"{1e3 * elapsed / cases:.0f} ms per fit")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=2000)
    parser.add_argument("--realisations", type=int, default=300)
    parser.add_argument("--choices", type=int, default=300)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--skip", choices=("family", "scatter", "timing", "choice"),
                        action="append", default=[])
    args = parser.parse_args()
    if "timing" not in args.skip:
        timing(args.seed)
    if "choice" not in args.skip:
        choice(args.choices, args.seed)
    if "family" not in args.skip:
        family(args.cases, args.seed)
    if "scatter" not in args.skip:
        scatter(args.realisations, args.seed)


if __name__ == "__main__":
    main()
