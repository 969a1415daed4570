"""Result documents for the catalog tests, built by hand (no fit): the fitted numbers are
given, the points are an ideal pattern written here with numpy (not jjpattern.physics)."""

from __future__ import annotations

import hashlib

import numpy as np

from jjpattern.result import FitResult, Result
from jjpattern.settings import Settings


def fit(branch="positive", *, ic0_A=47e-6, ic0_stderr_A=0.1e-6, period_T=0.731e-3,
        period_stderr_T=0.5e-6, field_offset_T=0.04e-3, field_offset_stderr_T=0.7e-6,
        model="rectangular") -> FitResult:
    field_T = np.linspace(-3 * period_T, 3 * period_T, 25)
    ic_A = ic0_A * np.abs(np.sinc((field_T - field_offset_T) / period_T))
    return FitResult(branch=branch, model=model, period_T=period_T,
                     period_stderr_T=period_stderr_T, field_offset_T=field_offset_T,
                     field_offset_stderr_T=field_offset_stderr_T, ic0_A=ic0_A,
                     ic0_stderr_A=ic0_stderr_A, effective_area_m2=2.067833848e-15 / period_T,
                     reduced_chisq=1.03, lobes_observed=6, nodes_observed=6,
                     points_used=field_T.size, field_T=field_T, ic_A=ic_A,
                     best_params={"ic0_A": ic0_A, "period_T": period_T,
                                  "field_offset_T": field_offset_T, "floor_A": 0.0})


def result(*, junction="KT14-J03", chip="KT-14", cooldown="CD-07", date=None,
           temperature_K=1.45, fits=None, settings=None, flags=(), sha=None,
           path=None, **numbers) -> Result:
    """A result document as the pipeline would write it; ``sha`` defaults to a hash of
    everything that makes this input different, so equal arguments give equal inputs."""
    fits = fits or [fit("positive", **numbers), fit("negative", **numbers)]
    metadata = {"lab": "Kestrel Low-Temperature Lab (fictional)"}
    for key, value in (("junction", junction), ("chip", chip), ("cooldown", cooldown),
                       ("date", date), ("temperature_K", temperature_K)):
        if value is not None:
            metadata[key] = str(value)
    if sha is None:
        sha = hashlib.sha256(repr((metadata, sorted(numbers.items()),
                                   [f.numbers() for f in fits])).encode()).hexdigest()
    used = sum(f.points_used for f in fits)
    return Result(input={"path": path or f"{junction}_{cooldown}.csv", "sha256": sha,
                         "rows_read": 25, "field_column": "B (mT)", "points_used": used,
                         "points_dropped": 0, "duplicates_merged": 0, "metadata": metadata},
                  fits=fits, flags=list(flags), settings=settings or Settings(),
                  method={"fit": "made by hand for a test"},
                  generated_utc="2026-11-30T10:00:00Z")
