"""The runs test on the signs of residuals in field order.

A model that describes the data leaves residual signs that change at random from
point to point; one that only bends towards the data leaves long stretches of one
sign. With ``n1`` positive and ``n2`` negative residuals (zeros dropped) the number
of runs has mean ``mu = 2 n1 n2 / n + 1`` and variance
``(mu - 1)(mu - 2) / (n - 1)`` under randomness (Wald and Wolfowitz, Ann. Math.
Stat. 11, 147 (1940), from memory); ``z = (runs - mu) / sqrt(var)`` is far below
zero for structured residuals.
"""

from __future__ import annotations

import numpy as np

__all__ = ["runs_ratio", "runs_z"]


def _runs(residual):
    """``(n1, n2, runs)`` of the residual signs (zeros dropped), or ``None`` when fewer
    than ten residuals have a sign or one sign is missing."""
    r = np.asarray(residual, dtype=float)
    signs = r[r != 0] > 0
    n1 = int(np.count_nonzero(signs))
    n2 = signs.size - n1
    if signs.size < 10 or n1 == 0 or n2 == 0:
        return None
    return n1, n2, 1 + int(np.count_nonzero(signs[1:] != signs[:-1]))


def runs_z(residual) -> float:
    """Normal score of the number of sign runs of ``residual`` (in field order); 0.0
    when fewer than ten residuals have a sign or one sign is missing."""
    counts = _runs(residual)
    if counts is None:
        return 0.0
    n1, n2, runs = counts
    n = n1 + n2
    mu = 2.0 * n1 * n2 / n + 1.0
    var = (mu - 1.0) * (mu - 2.0) / (n - 1.0)
    return float((runs - mu) / np.sqrt(var)) if var > 0 else 0.0


def runs_ratio(residual) -> float:
    """Number of sign runs of ``residual`` over its mean under randomness (1.0 when there
    is no test): how much structure there is, where :func:`runs_z` says how significant
    it is."""
    counts = _runs(residual)
    if counts is None:
        return 1.0
    n1, n2, runs = counts
    return float(runs / (2.0 * n1 * n2 / (n1 + n2) + 1.0))
