"""Model-free noise estimate of a sampled curve."""

from __future__ import annotations

import numpy as np

#: MAD to standard deviation for Gaussian noise.
_MAD_TO_SIGMA = 1.482602218505602


def difference_noise(x, y) -> float:
    """Noise standard deviation from each point's departure from its neighbours' line.

    Each interior point is compared with the straight line through its two
    neighbours (uneven steps allowed); the spread is taken robustly (MAD), so
    the cusps at the nodes and a few glitches barely move it. Curvature of a
    coarsely sampled pattern makes this an overestimate, never an underestimate.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if x.size < 5:
        return float("nan")
    gap = x[2:] - x[:-2]
    w = (x[2:] - x[1:-1]) / gap
    resid = y[1:-1] - (w * y[:-2] + (1.0 - w) * y[2:])
    z = resid / np.sqrt(1.0 + w**2 + (1.0 - w) ** 2)
    return float(_MAD_TO_SIGMA * np.median(np.abs(z - np.median(z))))
