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
from scipy import signal as sps

#: Fraction of the field range tapered by the Tukey window.
WINDOW_ALPHA = 0.4
#: x grid of the reported profile, in junction lengths (a margin shows any leakage).
X_SPAN = 0.75


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
        minima = sps.argrelmin(seq, order=max(1, width // 2))[0]
        flips = np.zeros(idx.size)
        peak_before = np.maximum.accumulate(seq)
        step = max(1, int(round(0.1 / du)))
        for m in minima:
            after = seq[m:].max() if m < seq.size - 1 else 0.0
            if seq[m] >= 0.5 * min(peak_before[m], after):
                continue
            # A simple zero is V-shaped (|F| doubles from 0.1 to 0.2 away), a double zero
            # U-shaped (|F| quadruples) and keeps its sign: flip only at simple zeros.
            near = [seq[k] for k in (m - step, m + step) if 0 <= k < seq.size]
            far = [seq[k] for k in (m - 2 * step, m + 2 * step) if 0 <= k < seq.size]
            if near and far and np.mean(far) > 3.0 * np.mean(near) + seq[m]:
                continue
            flips[m:] += 1
        signs[idx] = np.where(flips % 2 == 1, -1.0, 1.0)
    return signs


def _grid(u, ic, symmetric):
    """Uniform u grid; for the symmetric method the mirror-averaged half-range."""
    du = float(np.median(np.diff(u)))
    if symmetric:
        top = min(u.max(), -u.min())
        if top <= 2 * du:
            top = max(u.max(), -u.min())
        grid = np.arange(-top, top + du / 2, du)
        values = 0.5 * (np.interp(grid, u, ic) + np.interp(-grid, u, ic))
    else:
        grid = np.arange(u.min(), u.max() + du / 2, du)
        values = np.interp(grid, u, ic)
    return grid, values, du


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
    grid, values, du = _grid(u, ic, symmetric)
    window = sps.windows.tukey(grid.size, WINDOW_ALPHA)
    x = np.linspace(-X_SPAN, X_SPAN, n_x)
    phase = 2.0 * np.pi * np.outer(grid, x)
    # J(x) = Re sum_u F(u) exp(-2 pi i u x) du: for a real F only the cosine counts.
    cosine = np.cos(phase)
    signs = node_signs(grid, values)
    _, flat, _ = _grid(u, _uniform_pattern(field_T, period_T, field_offset_T, model),
                       symmetric)
    flat_signs = node_signs(grid, flat)
    # Mirror averaging halves the variance of each point of the symmetric method.
    scale = noise_A / np.sqrt(2.0) if symmetric else noise_A
    if symmetric:
        j = (values * signs * window) @ cosine * du
        j_flat = (flat * flat_signs * window) @ cosine * du
        noisy = values[None, :] + rng.normal(0.0, scale, (resamples, values.size))
        band = (noisy * signs * window) @ cosine * du
    else:
        support = np.abs(x) <= 0.5
        transform = _MirrorTransform(grid, x[support], du)
        # A small tilt breaks the mirror symmetry of the start so the retrieval can move.
        tilt = 1.0 + 0.3 * x[support]
        start = (values * signs * window) @ cosine[:, support] * du * tilt
        j = np.zeros(n_x)
        j[support] = _retrieve(values[None, :], transform, start, iterations)[0]
        j_flat = np.zeros(n_x)
        start = (flat * flat_signs * window) @ cosine[:, support] * du * tilt
        j_flat[support] = _retrieve(flat[None, :], transform, start, iterations)[0]
        count = min(resamples, 16)
        noisy = values[None, :] + rng.normal(0.0, scale, (count, values.size))
        # All resamples at once, each started from the profile found above.
        band = np.zeros((count, n_x))
        band[:, support] = _retrieve(np.abs(noisy), transform, j[support], iterations // 3)
    low, high = np.percentile(band, [16, 84], axis=0)
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
        "j_over_mean": j / _junction_mean(x, j),
        "j_low_over_mean": low / _junction_mean(x, j),
        "j_high_over_mean": high / _junction_mean(x, j),
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
    inside = np.abs(x) <= 0.5 + tol
    p = np.clip(profiles, 0.0, None)
    xi, pi = x[inside], p[:, inside]
    total = np.trapezoid(pi, xi, axis=1)
    outer_left = inside & (x <= -0.4 + tol)
    outer_right = inside & (x >= 0.4 - tol)
    left = np.trapezoid(p[:, outer_left], x[outer_left], axis=1)
    right = np.trapezoid(p[:, outer_right], x[outer_right], axis=1)
    centre = np.trapezoid(pi * xi, xi, axis=1) / total
    core = p[:, np.abs(x) <= 0.4 + tol]
    spread = np.std(core, axis=1) / np.mean(core, axis=1)
    return np.stack([(left + right) / total, left / total, right / total, centre, spread],
                    axis=1)
