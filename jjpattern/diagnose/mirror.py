"""The field about which a pattern is most nearly mirror-symmetric, and how far from it.

Model-free: the data against their own mirror image, interpolated linearly.
"""

from __future__ import annotations

import numpy as np


def _mirror_spans(centres, x):
    """Indices ``(i0, i1)`` per centre ``c`` of the points strictly between ``c`` and ``c``
    plus its reach (the shorter distance to an end of the window)."""
    reach = np.minimum(centres - x[0], x[-1] - centres)
    return np.searchsorted(x, centres, "right"), np.searchsorted(x, centres + reach, "left")


def _mirror_cost(c, x, y):
    return float(_mirror_costs(np.array([c]), x, y)[0])


def _mirror_costs(centres, x, y):
    """Mean squared difference of the data and their mirror image about each centre.

    Over the points beyond the centre within its reach (``inf`` where fewer than 10):
    those are data points, a slice found by bisection, so only their mirror images
    are interpolated (a mask over the whole window per centre cost more than that).
    """
    i0, i1 = _mirror_spans(centres, x)
    costs = np.full(centres.size, np.inf)
    for k in np.flatnonzero(i1 - i0 >= 10):
        beyond = slice(i0[k], i1[k])
        d = y[beyond] - np.interp(2 * centres[k] - x[beyond], x, y)
        # np.mean's sum and division without its Python wrapper (the same numbers).
        costs[k] = np.add.reduce(d * d) / d.size
    return costs


def _grid_costs(centres, x, y):
    """:func:`_mirror_costs` where it decides the least one, estimates elsewhere.

    On an evenly sampled window the mirror image of the points beyond a centre is
    one fixed mix of two reversed slices of the data (no search): each cost is
    estimated so first. Its root differs from the exact one by at most ``tol``,
    the most the two interpolations can differ at a point, so only centres within
    ``2 tol`` of the least estimated root can hold the least cost; those are
    computed exactly and the others keep their estimates (which exceed it), so the
    least cost and where it lies are those of :func:`_mirror_costs` everywhere.
    """
    n = x.size
    step = (x[-1] - x[0]) / max(n - 1, 1)
    off_grid = np.max(np.abs(x - (x[0] + step * np.arange(n)))) if n > 1 else np.inf
    if not (n > 20 and step > 0 and off_grid < 1e-3 * step):
        return _mirror_costs(centres, x, y)
    dy = np.max(np.abs(np.diff(y)))
    tol = 4.0 * off_grid / step * dy + 1e-9 * dy + 1e-12 * np.max(np.abs(y))
    i0, i1 = _mirror_spans(centres, x)
    roots = np.full(centres.size, np.inf)
    for k in np.flatnonzero(i1 - i0 >= 10):
        where = (2 * centres[k] - 2 * x[0]) / step  # mirror of point i at index where - i
        j = int(np.floor(where))
        lo, hi = j - i1[k] + 1, j - i0[k] + 1  # the left points of the mirror images
        if lo < 0 or hi + 1 > n:
            roots[k] = -np.inf  # outside the window by rounding: computed exactly below
            continue
        t = where - j
        mirrored = (1.0 - t) * y[lo:hi][::-1] + t * y[lo + 1:hi + 1][::-1]
        d = y[i0[k]:i1[k]] - mirrored
        roots[k] = np.sqrt(np.add.reduce(d * d) / d.size)
    close = np.flatnonzero(roots <= np.min(roots[np.isfinite(roots)], initial=np.inf)
                           + 2.0 * tol)
    costs = roots**2
    costs[close] = _mirror_costs(centres[close], x, y)
    return costs


def mirror_centre(x, y, period_T):
    """Field about which the data are most nearly mirror-symmetric (model-free).

    A grid of a twentieth of a period over the middle half of the window, then a
    bounded refinement around the best grid point.
    """
    from scipy import optimize

    span = x[-1] - x[0]
    grid = np.linspace(x[0] + 0.25 * span, x[-1] - 0.25 * span,
                       max(21, int(round(0.5 * span / (period_T / 20)))))
    costs = _grid_costs(grid, x, y)
    k = int(np.argmin(costs))
    step = grid[1] - grid[0]
    res = optimize.minimize_scalar(_mirror_cost, bounds=(grid[k] - step, grid[k] + step),
                                   args=(x, y), method="bounded",
                                   options={"xatol": 1e-4 * period_T})
    return float(res.x if res.fun <= costs[k] else grid[k])


#: Median of a chi-square variable with one degree of freedom.
_CHI2_1_MEDIAN = 0.454936423119572


def mirror_redchi(x, y, centre, noise):
    """Robust reduced chi-square of ``Ic(c + b) - Ic(c - b)`` against twice the noise variance.

    The median of the squared differences (scaled to the mean for Gaussian noise)
    keeps a few premature-switching points from posing as asymmetry.
    """
    reach = min(centre - x[0], x[-1] - centre)
    b = x[(x > centre) & (x < centre + reach)]
    if b.size < 20:
        return None, int(b.size)
    diff = np.interp(b, x, y) - np.interp(2 * centre - b, x, y)
    return float(np.median(diff**2) / _CHI2_1_MEDIAN / (2 * noise**2)), int(b.size)
