"""Clean-up shared by the loaders and the fit: finite, sorted, duplicates averaged."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Tidy:
    """A sampled curve after clean-up, with counts of what was done to it."""

    x: np.ndarray
    y: np.ndarray
    dropped: int
    merged: int


def tidy(x, y) -> Tidy:
    """Drop non-finite pairs, sort by ``x`` and average points with exactly equal ``x``."""
    x = np.asarray(x, dtype=float).ravel()
    y = np.asarray(y, dtype=float).ravel()
    if x.shape != y.shape:
        raise ValueError(f"field and current have different lengths ({x.size} and {y.size})")
    finite = np.isfinite(x) & np.isfinite(y)
    dropped = int(x.size - np.count_nonzero(finite))
    xs, ys = (x, y) if not dropped else (x[finite], y[finite])
    step = np.diff(xs)
    # Most sweeps arrive sorted one way or the other, with no field twice.
    if np.all(step > 0):
        return Tidy(xs.copy(), ys.copy(), dropped, 0)
    if np.all(step < 0):
        return Tidy(xs[::-1].copy(), ys[::-1].copy(), dropped, 0)
    order = np.argsort(xs, kind="stable")
    xs, ys = xs[order], ys[order]
    uniq, inverse, counts = np.unique(xs, return_inverse=True, return_counts=True)
    if uniq.size < xs.size:
        ys = np.bincount(inverse, weights=ys) / counts
    return Tidy(uniq, ys, dropped, int(xs.size - uniq.size))
