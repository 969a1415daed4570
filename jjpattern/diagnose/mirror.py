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


def _fast_length(n):
    """The least length of at least ``n`` with no prime factor above 5 (a quick FFT)."""
    best = 1 << int(np.ceil(np.log2(max(n, 1))))
    five = 1
    while five < best:
        three = five
        while three < best:
            two = three << max(0, int(np.ceil(np.log2(n / three))))
            best = min(best, two)
            three *= 3
        five *= 5
    return best


def _pair_sums(y, conv, s, a, b, most=3):
    """``sum_{i=a}^{b-1} y_i y_{s-i}`` per entry from the self-convolution ``conv`` of ``y``.

    The half of anti-diagonal ``s`` above ``s/2`` (half the convolution less its middle
    term) with the few terms where ``[a, b)`` departs from it added or taken off; NaN
    where that takes more than ``most`` terms at an end.
    """
    n = y.size
    mid = s // 2
    half = 0.5 * (conv[s] - np.where(s % 2 == 0, y[np.minimum(mid, n - 1)] ** 2, 0.0))
    first, last = mid + 1, np.minimum(s, n - 1) + 1  # the half's range [first, last)

    def terms(lo, hi):  # sum over [lo, hi) of at most ``most`` terms
        out = np.zeros(s.size)
        for q in range(most):
            i = lo + q
            inside = i < hi
            k = np.where(inside, i, 0)
            out += np.where(inside, y[k] * y[np.clip(s - k, 0, n - 1)], 0.0)
        return out

    total = half + terms(np.minimum(a, first), first) - terms(first, np.maximum(a, first))
    total -= terms(b, last)
    bad = (np.abs(a - first) > most) | (last - b > most) | (b > last)
    return np.where(bad, np.nan, total)


def _grid_costs(centres, x, y):
    """:func:`_mirror_costs` where it decides the least one, estimates elsewhere.

    On an evenly sampled window the mirror image of the points beyond a centre is
    one fixed mix of two reversed slices of the data (no search): each cost is
    estimated so first, for all centres at once, from prefix sums of the squares and
    of neighbour products and from one self-convolution (by FFT) for the products of
    the data with their mirror images. Its root differs from the exact one by at most
    ``tol``, the most the two interpolations can differ at a point, plus the round-off
    of those sums (bounded generously); only centres within twice that of the least
    estimated root can hold the least cost. Those are computed exactly and the others
    keep their estimates (which exceed it), so the least cost and where it lies are
    those of :func:`_mirror_costs` everywhere.
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
    slack = np.zeros(centres.size)
    use = np.flatnonzero(i1 - i0 >= 10)
    if use.size:
        where = (2 * centres[use] - 2 * x[0]) / step  # mirror of point i at index where - i
        j = np.floor(where).astype(np.intp)
        t = where - j
        a, b = i0[use], i1[use]
        lo, hi = j - b + 1, j - a + 1  # the left points of the mirror images
        inside = (lo >= 0) & (hi + 1 <= n)
        jj, lo, hi = np.where(inside, j, 0), np.clip(lo, 0, n - 1), np.clip(hi, 0, n - 1)
        size = _fast_length(2 * n - 1)
        spectrum = np.fft.rfft(y, size)
        conv = np.fft.irfft(spectrum * spectrum, size)[:2 * n]
        squares = np.concatenate([[0.0], np.cumsum(y * y)])
        pairs = np.concatenate([[0.0], np.cumsum(y[:-1] * y[1:])])
        straight = squares[b] - squares[a]
        near, far = squares[hi] - squares[lo], squares[hi + 1] - squares[lo + 1]
        cross0 = _pair_sums(y, conv, jj, a, b)
        cross1 = _pair_sums(y, conv, jj + 1, a, b)
        between = pairs[hi] - pairs[lo]
        u = 1.0 - t
        total = (straight + u * u * near + t * t * far - 2.0 * u * cross0 - 2.0 * t * cross1
                 + 2.0 * t * u * between)
        mean = np.maximum(total, 0.0) / (b - a)
        # Round-off of the sums: a few units of the last place of the whole data's energy
        # per FFT and prefix sum, over the points of the mean (a generous bound).
        err = 64.0 * np.finfo(float).eps * np.log2(size) * squares[-1] / (b - a)
        est = np.sqrt(mean)
        est[~(inside & np.isfinite(total))] = -np.inf  # computed exactly below
        roots[use] = est
        slack[use] = np.minimum(np.sqrt(err), err / np.maximum(est, np.sqrt(err)))
    finite = np.isfinite(roots)
    close = np.flatnonzero(roots <= np.min(roots[finite], initial=np.inf)
                           + 2.0 * tol + 2.0 * np.max(slack, initial=0.0))
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
