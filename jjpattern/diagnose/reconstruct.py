"""Current-density profile J(x) from a measured Ic(B) (Dynes & Fulton, Phys. Rev. B 3, 3015 (1971)).

Ic(u) is the modulus of the Fourier transform of J(x), with u = (B - B0)/period
and x in units of the junction length across the field. Two ways to restore
the lost sign or phase:

* ``symmetric`` (Dynes-Fulton): the pattern is averaged with its mirror image
  and the sign is flipped at every node, which gives the real transform of a
  symmetric J(x);
* ``support`` (iterative phase retrieval in the spirit of Gerchberg-Saxton and
  Fienup's error reduction): starting from the symmetric estimate, the measured
  modulus is imposed in field space and a non-negative J(x) confined to the
  junction in real space, in turn. It admits asymmetric profiles, but J(x) and
  J(-x) give the same pattern, so the side is not determined (mirror ambiguity),
  and the answer depends on the start where the data leave it open.

Truncation ringing is tamed by a Tukey window; the band comes from resampling
the measured noise with a seeded generator.
"""

from __future__ import annotations

import numpy as np

#: Fraction of the field range tapered by the Tukey window.
WINDOW_ALPHA = 0.4
#: x grid of the reported profile, in junction lengths (a margin shows any leakage).
X_SPAN = 0.75
#: Finest step of the u grid, in periods: a hundred per period resolve a lobe (the
#: integrand turns over no faster than once in 1.3 periods inside X_SPAN).
GRID_STEP = 0.01
#: Most points of the u grid: a bound on time and memory whatever the sampling.
MAX_GRID = 2**14


def tukey(n, alpha):
    """Tukey (tapered cosine) window of ``n`` points, a fraction ``alpha`` of it tapered.

    The definition of Harris, Proc. IEEE 66, 51 (1978), as scipy.signal.windows.tukey
    computes it (symmetric); written out so the analysis does not import scipy.signal.
    """
    if n <= 1:
        return np.ones(n)
    if alpha <= 0:
        return np.ones(n)
    k = np.arange(n)
    width = int(np.floor(alpha * (n - 1) / 2.0))
    w = np.ones(n)
    head, tail = k[:width + 1], k[n - width - 1:]
    w[:width + 1] = 0.5 * (1 + np.cos(np.pi * (-1 + 2.0 * head / alpha / (n - 1))))
    w[n - width - 1:] = 0.5 * (1 + np.cos(np.pi * (-2.0 / alpha + 1 + 2.0 * tail / alpha
                                                   / (n - 1))))
    return w


def local_minima(seq, order=1):
    """Indices of points strictly below their ``order`` neighbours on each side (ends
    compared with themselves, so never minima), as scipy.signal.argrelmin."""
    n = seq.size
    k = np.arange(n)
    keep = np.ones(n, dtype=bool)
    for shift in range(1, order + 1):
        keep &= seq < seq[np.minimum(k + shift, n - 1)]
        keep &= seq < seq[np.maximum(k - shift, 0)]
    return np.flatnonzero(keep)


def node_signs(u, ic, smooth=0.1):
    """+1/-1 per point, flipping at each deep minimum of |Ic| on either side of u = 0.

    A minimum counts when it lies below half of the lower of its two
    neighbouring maxima (a node, lifted or not, rather than a noise wiggle).
    """
    du = np.median(np.diff(u))
    width = max(1, int(round(smooth / du)))
    kernel = np.ones(width) / width
    level = np.convolve(ic, kernel, mode="same")
    signs = np.ones_like(u)
    for side in (u > 0, u < 0):
        idx = np.flatnonzero(side)
        if side[0]:  # walk away from the centre on the negative side
            idx = idx[::-1]
        if idx.size < 3:
            continue
        seq = level[idx]
        minima = local_minima(seq, order=max(1, width // 2))
        flips = np.zeros(idx.size)
        peak_before = np.maximum.accumulate(seq)
        # The largest value from each point on, so that noise wiggles (most minima) are
        # set aside at once rather than one by one.
        after = np.maximum.accumulate(seq[::-1])[::-1]
        after[-1] = 0.0
        minima = minima[seq[minima] < 0.5 * np.minimum(peak_before[minima], after[minima])]
        step = max(1, int(round(0.1 / du)))
        for m in minima:
            # A simple zero is V-shaped (|F| doubles from 0.1 to 0.2 away), a double zero
            # U-shaped (|F| quadruples) and keeps its sign: flip only at simple zeros.
            near = [float(seq[k]) for k in (m - step, m + step) if 0 <= k < seq.size]
            far = [float(seq[k]) for k in (m - 2 * step, m + 2 * step) if 0 <= k < seq.size]
            # Means of one or two values in plain arithmetic (as np.mean rounds them).
            if near and far and sum(far) / len(far) > 3.0 * (sum(near) / len(near)) + seq[m]:
                continue
            flips[m:] += 1
        signs[idx] = np.where(flips % 2 == 1, -1.0, 1.0)
    return signs


def _grid(u, ic, symmetric):
    """Uniform u grid, the values on it and the number of points behind each value.

    The step is the median sampling step, but never finer than :data:`GRID_STEP`
    (finer data are averaged in bins of one step, which keeps their noise
    averaged rather than dropped) nor so fine that the grid exceeds
    :data:`MAX_GRID` points: the grid follows the resolution, not the number of
    points. The symmetric method's grid is symmetric about u = 0 over the
    mirror-averaged half-range. Returns ``(grid, values, step, counts)``.
    """
    du = float(np.median(np.diff(u)))
    if symmetric:
        top = min(u.max(), -u.min())
        if top <= 2 * du:
            top = max(u.max(), -u.min())
        lo, hi = -top, top
    else:
        lo, hi = float(u.min()), float(u.max())
    step = max(du, GRID_STEP, (hi - lo) / MAX_GRID)
    if symmetric:
        half = int(np.floor(top / step + 1e-9))
        grid = step * np.arange(-half, half + 1)
    else:
        grid = lo + step * np.arange(int(np.floor((hi - lo) / step + 1e-9)) + 1)
    if step == du:
        at, means, counts = u, ic, np.ones(grid.size)
    else:
        k = np.rint((u - grid[0]) / step).astype(np.intp)
        keep = (k >= 0) & (k < grid.size)
        k, n = k[keep], np.bincount(k[keep], minlength=grid.size)
        filled = n > 0
        at = np.bincount(k, weights=u[keep], minlength=grid.size)[filled] / n[filled]
        means = np.bincount(k, weights=ic[keep], minlength=grid.size)[filled] / n[filled]
        # An empty bin holds an interpolated value: as noisy as one neighbouring bin.
        counts = np.interp(grid, grid[filled], n[filled].astype(float))
    values = np.interp(grid, at, means)
    if symmetric:
        values = 0.5 * (values + values[::-1])
    return grid, values, step, counts


def _even_weights(u, x, du):
    """Weights ``W`` (n, n_x) with ``g @ W = sum_u G(u) cos(2 pi u x) du`` for a G even in
    u, from its half ``g`` (m, n) on ``u = 0, du, 2 du, ...``, at ``x >= 0`` (the upper
    half of a grid symmetric about 0, where the transform is even too).

    The cosines by the angle sum from two tables of about sqrt(n) rows, u = q B du + r du,
    B rows at a time: a product and a difference cost less than a cosine (they agree to
    round-off, 2e-14 at |2 pi u x| ~ 40) and no table-sized temporary is made.
    """
    weights = np.empty((u.size, x.size))
    weights[0] = du
    rows = max(1, int(np.ceil(np.sqrt(u.size - 1))))
    coarse = 2.0 * np.pi * np.outer(du * rows * np.arange(-(-(u.size - 1) // rows)), x)
    fine = 2.0 * np.pi * np.outer(du * np.arange(1, rows + 1), x)
    cos_c, sin_c = 2.0 * du * np.cos(coarse), 2.0 * du * np.sin(coarse)
    cos_f, sin_f, part = np.cos(fine), np.sin(fine), np.empty_like(fine)
    for q in range(cos_c.shape[0]):
        block = weights[1 + q * rows:1 + (q + 1) * rows]
        k = block.shape[0]
        np.multiply(cos_f[:k], cos_c[q], out=block)
        block -= np.multiply(sin_f[:k], sin_c[q], out=part[:k])
    return weights


def _unfold(half, n):
    """An even profile on the whole grid of ``n`` points from its x >= 0 half."""
    return np.concatenate([half[..., ::-1][..., :n // 2], half], axis=-1)


class _MirrorTransform:
    """Fourier transform of a real J(x) on a grid symmetric about x = 0, and back.

    cos(2 pi u x) sees only the even part of J and sin(2 pi u x) only the odd
    part, so each needs the x > 0 half of the grid: real arithmetic on half the
    points, an eighth of the work of complex products over the whole grid.
    """

    def __init__(self, grid, x, du):
        self.n, self.h = x.size, x.size // 2
        self.dx, self.du = x[1] - x[0], du
        phase = 2.0 * np.pi * np.outer(x[self.n - self.h:], grid)  # (h, n_u), x > 0
        self.cos, self.sin = np.cos(phase), np.sin(phase)
        self.cos_t, self.sin_t = self.cos.T.copy(), self.sin.T.copy()

    def forward(self, j):
        """Real and imaginary parts of sum_x J(x) exp(2 pi i u x) dx, each (m, n_u)."""
        n, h = self.n, self.h
        upper, lower = j[:, n - h:], j[:, h - 1::-1]  # J(x) and J(-x) for x > 0
        re = _product(upper + lower, self.cos)
        if n % 2:
            re += j[:, h:h + 1]  # x = 0
        return re * self.dx, _product(upper - lower, self.sin) * self.dx

    def inverse(self, re, im):
        """Re sum_u (re + i im)(u) exp(-2 pi i u x) du on the grid, (m, n)."""
        n, h = self.n, self.h
        even = _product(re, self.cos_t) * self.du
        odd = _product(im, self.sin_t) * self.du
        j = np.empty((re.shape[0], n))
        j[:, n - h:] = even + odd
        j[:, :h] = (even - odd)[:, ::-1]
        if n % 2:
            j[:, h] = re.sum(axis=1) * self.du
        return j


def _product(a, b):
    """``a @ b`` in numpy's own loop rather than threaded BLAS.

    A retrieval makes a few hundred small products, and on a loaded machine
    BLAS threads wait for each other at every one: on the shared 2-core test
    machine the batched retrieval took 1.7 s through BLAS against 0.5 s here
    (at most 2x faster through single-threaded BLAS on an idle machine).
    """
    return np.einsum("ij,jk->ik", a, b)


def _retrieve(modulus, transform, start, iterations):
    """Error reduction: alternate the measured modulus and a non-negative J on the support.

    ``modulus`` is (m, n_u): m retrievals from the same start run together,
    one batch of products per iteration. Returns J on the support, (m, n_in).
    """
    j = np.clip(np.broadcast_to(start, (modulus.shape[0], start.size)), 0.0, None)
    for _ in range(iterations):
        re, im = transform.forward(j)
        size = np.hypot(re, im)
        # A zero of the spectrum has no phase: it takes the modulus as a real number.
        zero = size == 0.0
        scale = modulus / np.where(zero, 1.0, size)
        re *= scale
        im *= scale
        re[zero] = modulus[zero]
        j = np.clip(transform.inverse(re, im), 0.0, None)
    return j


def _uniform_pattern(field_T, period_T, field_offset_T, model):
    """Ic of a uniform junction of ``model`` (peak 1) at the measured fields."""
    from ..physics.models import get_model

    return np.asarray(get_model(model).formula(np.asarray(field_T, dtype=float), 1.0, period_T,
                                                field_offset_T, 0.0), dtype=float)


def reconstruct(field_T, ic_A, period_T, field_offset_T, noise_A, rng, *,
                method="symmetric", resamples=200, n_x=301, iterations=150,
                model="rectangular"):
    """J(x) with a 68 % band, the resolution and the numbers users quote.

    Parameters
    ----------
    field_T, ic_A : ndarray
        Sorted data of one branch.
    period_T, field_offset_T : float
        From the fit: they fix u and so x in units of the junction length.
    noise_A : float
        Noise of one point, for the resampled band.
    rng : numpy.random.Generator
        Source of the resampling; its seed belongs in the settings.
    method : {'symmetric', 'support'}
        ``support`` uses ``iterations`` steps and at most 16 resamples for its band.
    model : str
        Pattern model of the fit. A uniform junction of it, sampled at the same
        fields, goes through the same window, grid and method; its numbers are the
        ``uniform_reference`` the measured ones are read against (a truncated,
        windowed transform rounds the edges of even a uniform profile, so its edge
        fraction is not 0.2) and its profile is ``j_uniform_over_mean``.
    """
    u = (np.asarray(field_T) - field_offset_T) / period_T
    ic = np.asarray(ic_A, dtype=float)
    symmetric = method == "symmetric"
    grid, values, du, counts = _grid(u, ic, symmetric)
    window = tukey(grid.size, WINDOW_ALPHA)
    x = np.linspace(-X_SPAN, X_SPAN, n_x)
    signs = node_signs(grid, values)
    _, flat, _, _ = _grid(u, _uniform_pattern(field_T, period_T, field_offset_T, model),
                          symmetric)
    flat_signs = node_signs(grid, flat)
    sigma = noise_A / np.sqrt(counts)  # noise of each grid value
    if symmetric:
        centre = grid.size // 2
        taper = (signs * window)[centre:]
        # A mirror average and its mirror image are one number, so its noise (half the
        # variance of the two values averaged) is drawn once for both.
        spread = 0.5 * np.hypot(sigma[centre:], sigma[centre::-1])
        spread[0] = sigma[centre]  # u = 0 is its own mirror image
        # The profile, the uniform reference and the resamples through one table of
        # weights; the resamples are drawn into place (the draws of rng.normal(0, 1, ...))
        # and scaled there.
        weights = _even_weights(grid[centre:], x[n_x // 2:], du)
        out = np.empty((resamples + 2, weights.shape[1]))
        chunk = np.empty((min(max(resamples, 2), 50), spread.size))
        chunk[0] = values[centre:] * taper
        chunk[1] = (flat * flat_signs * window)[centre:]
        np.matmul(chunk[:2], weights, out=out[:2])
        # A resample is the profile plus the transform of its tapered noise, so the
        # scaling of the noise goes into the weights once, not into every draw.
        weights *= (spread * taper)[:, None]
        # The resamples a few dozen at a time (memory independent of their number); the
        # draws are those of one rng.standard_normal of all of them, in order.
        for first in range(0, resamples, chunk.shape[0]):
            noisy = rng.standard_normal(out=chunk[:min(chunk.shape[0], resamples - first)])
            np.matmul(noisy, weights, out=out[2 + first:2 + first + noisy.shape[0]])
        out[2:] += out[0]
        j, j_flat = _unfold(out[0], n_x), _unfold(out[1], n_x)
        # Even profiles: their percentiles at x >= 0 are those at -x too.
        band = _unfold(out[2:], n_x)
        low, high = _unfold(np.percentile(out[2:], [16, 84], axis=0), n_x)
    else:
        support = np.abs(x) <= 0.5
        transform = _MirrorTransform(grid, x[support], du)
        # A small tilt breaks the mirror symmetry of the start so the retrieval can move.
        tilt = 1.0 + 0.3 * x[support]
        starts = transform.inverse(np.stack([values * signs * window,
                                             flat * flat_signs * window]),
                                   np.zeros((2, grid.size))) * tilt
        j = np.zeros(n_x)
        j[support] = _retrieve(values[None, :], transform, starts[0], iterations)[0]
        j_flat = np.zeros(n_x)
        j_flat[support] = _retrieve(flat[None, :], transform, starts[1], iterations)[0]
        count = min(resamples, 16)
        noisy = values[None, :] + rng.normal(0.0, 1.0, (count, values.size)) * sigma
        # All resamples at once, each started from the profile found above.
        band = np.zeros((count, n_x))
        band[:, support] = _retrieve(np.abs(noisy), transform, j[support], iterations // 3)
        low, high = np.percentile(band, [16, 84], axis=0)
    mean = _junction_mean(x, j)
    reference = {"model": model, **profile_numbers(x, j_flat),
                 "meaning": "a uniform junction of this model at the measured fields, "
                            "through the same window, grid and method"}
    return {
        "method": method,
        "assumption": ("J(x) symmetric about the junction centre; sign flipped at each node"
                       if symmetric else
                       "J(x) >= 0 and confined to the junction; J(x) and J(-x) are "
                       "indistinguishable (mirror ambiguity)"),
        "x_over_length": x,
        # Dimensionless: J(x) over its mean across the junction (1 for uniform current).
        "j_over_mean": j / mean,
        "j_low_over_mean": low / mean,
        "j_high_over_mean": high / mean,
        "resolution_over_length": float(1.0 / (2.0 * np.max(np.abs(grid)))),
        "window": f"Tukey, alpha {WINDOW_ALPHA}",
        "resamples": int(band.shape[0]),
        **profile_numbers(x, j, band),
        "uniform_reference": reference,
        "j_uniform_over_mean": j_flat / _junction_mean(x, j_flat),
    }


def _junction_mean(x, j) -> float:
    """Mean of J over the junction, |x| <= L/2 (its integral over x/L); 1 if none."""
    inside = np.abs(x) <= 0.5 + 1e-9
    mean = float(np.trapezoid(j[inside], x[inside]))
    return mean if mean > 0 else 1.0


def profile_numbers(x, j, band=None) -> dict:
    """Edge fraction (outer 10 % each side), centre of mass and non-uniformity.

    An exactly uniform J(x) has an edge fraction of 0.2; a reconstruction never
    gives that (see ``uniform_reference`` in :func:`reconstruct`).
    """
    main = _numbers(x, j[None, :])[0]
    out = dict(zip(("edge_fraction", "edge_fraction_left", "edge_fraction_right",
                    "centre_of_mass_over_length", "nonuniformity"), main.tolist(), strict=True))
    if band is not None:
        spread = np.std(_numbers(x, np.asarray(band)), axis=0)
        out.update(dict(zip(("edge_fraction_stderr", "edge_fraction_left_stderr",
                             "edge_fraction_right_stderr", "centre_of_mass_stderr",
                             "nonuniformity_stderr"), spread.tolist(), strict=True)))
    return out


def _numbers(x, profiles):
    """The five numbers of :func:`profile_numbers` for each row of ``profiles`` (m, n_x)."""
    # Grid points on the edges (x = +-0.4, +-0.5) count on both sides despite rounding,
    # and each part is integrated over its own points (no ramp from zeroed neighbours).
    tol = 1e-9
    inside = _span(np.abs(x) <= 0.5 + tol)
    # Clipped over the junction only; each part is a slice of it (views, not copies).
    pi = np.clip(profiles[:, inside], 0.0, None)
    xi = x[inside]
    total = np.trapezoid(pi, xi, axis=1)
    outer_left = _span(xi <= -0.4 + tol)
    outer_right = _span(xi >= 0.4 - tol)
    left = np.trapezoid(pi[:, outer_left], xi[outer_left], axis=1)
    right = np.trapezoid(pi[:, outer_right], xi[outer_right], axis=1)
    centre = np.trapezoid(pi * xi, xi, axis=1) / total
    core = pi[:, _span(np.abs(xi) <= 0.4 + tol)]
    spread = np.std(core, axis=1) / np.mean(core, axis=1)
    return np.stack([(left + right) / total, left / total, right / total, centre, spread],
                    axis=1)


def _span(mask):
    """The one run of True of ``mask`` (a range of a sorted x) as a slice."""
    where = np.flatnonzero(mask)
    return slice(int(where[0]), int(where[-1]) + 1) if where.size else slice(0, 0)
