"""Synthetic Ic(B) sweeps for benchmarks and round-trip tests.

The built-in patterns are written out here with numpy and scipy directly rather
than through :mod:`jjpattern.physics`, so a round trip checks the fit against an
independent formula (models added later are drawn with their own formula).
Randomness only through the ``numpy.random.Generator`` passed in.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special


@dataclass(frozen=True)
class SyntheticCase:
    """One synthetic sweep and the truth it was made from."""

    field_T: np.ndarray
    ic_A: np.ndarray
    period_T: float
    field_offset_T: float
    ic0_A: float
    noise_A: float
    geometry: str
    lobes_each_side: int


def ideal(field_T, geometry, ic0_A, period_T, field_offset_T, floor_A=0.0, **extra):
    """Noise-free pattern of a registered model.

    The built-in models are written out here independently of their files in
    :mod:`jjpattern.physics.models`, so a round trip checks the fit against a
    second formula. Any other registered model is drawn with its own formula:
    such a round trip tests the fit procedure, not the formula (check that
    against a reference of its own, as ``tests/test_models_example.py`` does).

    Parameters
    ----------
    geometry : str
        A name from :func:`jjpattern.physics.models.model_names`;
        ``"two-channel:0.3"`` is short for ``"two-channel"`` with ``asymmetry=0.3``.
    **extra
        Extra parameters of the model, at the formula's defaults when not given.
    """
    from .physics.models import get_model

    name, _, value = geometry.partition(":")
    if value:
        # "two-channel:0.3" carries the asymmetry (I1 - I2) / (I1 + I2).
        extra = {"asymmetry": float(value), **extra}
    spec = get_model(name)
    u = (np.asarray(field_T) - field_offset_T) / period_T
    if name == "rectangular":
        shape = np.abs(np.sinc(u))
    elif name == "circular":
        x = np.pi * np.where(u == 0, 1e-12, u)
        shape = np.abs(2.0 * special.j1(x) / x)
    elif name == "two-channel":
        a = float(extra.get("asymmetry", 0.0))
        shape = np.abs(np.cos(np.pi * u) + 1j * a * np.sin(np.pi * u))
    else:
        return spec.formula(field_T, ic0_A, period_T, field_offset_T, floor_A, **extra)
    return np.sqrt((ic0_A * shape) ** 2 + floor_A**2)


def add_noise(rng, ic_A, noise_A, folded: bool = True):
    """``ic_A`` plus Gaussian noise of ``noise_A``; folded (``|Ic + noise|``) by default.

    A measured switching current is a magnitude, so near a node the noise folds
    back above zero (mean ``noise_A * sqrt(2/pi)`` at a true zero, the folded
    normal); ``folded=False`` gives the plain Gaussian, which can go negative.
    """
    noisy = np.asarray(ic_A, dtype=float) + rng.normal(0.0, noise_A, np.shape(ic_A))
    return np.abs(noisy) if folded else noisy


def make_field(rng, half_width_T, n_points, uneven: bool):
    """Field points over ``[-half, +half]``: evenly stepped, or jittered with varying density."""
    if not uneven:
        return np.linspace(-half_width_T, half_width_T, n_points)
    t = np.sort(rng.uniform(-1.0, 1.0, n_points))
    t[0], t[-1] = -1.0, 1.0
    # Denser near the centre, as when a user zooms in on the main lobe.
    return half_width_T * np.sign(t) * np.abs(t) ** rng.uniform(0.8, 1.25)


def random_case(rng, *, geometry="rectangular", period_T=None, lobes=None, n_points=None,
                noise_fraction=None, uneven=None, offset_fraction=None,
                folded=True) -> SyntheticCase:
    """One member of the family the fit must handle (any argument can be pinned).

    Periods 1 uT to 30 mT (log-uniform), 2 to 15 visible lobes each side,
    offsets up to half a period, 100 to 3000 points with at least 8 per period,
    0.5 to 5 % Gaussian noise relative to Ic0, even or uneven steps. The noise is
    folded as measured (``|Ic + noise|``, :func:`add_noise`); ``folded=False`` gives
    plain Gaussian noise, which pull tests of the least-squares fit use: a fit without
    a noise model for the nodes is biased by folding (at 12 lobes the spread of the
    period's pulls grows to 1.5).
    """
    period = period_T if period_T is not None else 10 ** rng.uniform(-6, np.log10(3e-2))
    n_lobes = lobes if lobes is not None else int(rng.integers(2, 16))
    half = (n_lobes + 1.0) * period
    min_points = int(np.ceil(8 * 2 * half / period))
    n = n_points if n_points is not None else int(rng.integers(max(100, min_points), 3001))
    n = max(n, min_points) if n_points is None else n
    frac = noise_fraction if noise_fraction is not None else rng.uniform(0.005, 0.05)
    uneven = bool(rng.integers(0, 2)) if uneven is None else uneven
    offset = (offset_fraction if offset_fraction is not None else rng.uniform(-0.5, 0.5)) * period
    ic0 = 10 ** rng.uniform(-8, -3)
    field = make_field(rng, half, n, uneven)
    ic = add_noise(rng, ideal(field, geometry, ic0, period, offset), frac * ic0, folded)
    return SyntheticCase(field, ic, period, offset, ic0, frac * ic0, geometry, n_lobes)


def bias_sweep(i_max_A, n_points, mode="up"):
    """Bias in acquisition order: ``up`` (-Imax to +Imax) or ``out-and-back``
    (0, +Imax, 0, -Imax, 0)."""
    if mode == "up":
        return np.linspace(-i_max_A, i_max_A, n_points)
    quarter = np.linspace(0.0, i_max_A, n_points // 4 + 1)
    return np.concatenate([quarter, quarter[-2::-1], -quarter[1:], -quarter[-2::-1]])


def rsj_map(rng, field_T, ic_pos_A, ic_neg_A, rn_ohm, bias_A, noise_V, offset_V=0.0,
            retrap_fraction=None):
    """Voltage map ``(n_field, n_bias)`` for a junction measured along ``bias_A``.

    Without ``retrap_fraction``: the overdamped RSJ curve V = Rn sqrt(I^2 - Ic^2)
    (Stewart 1968, McCumber 1968, beta_c -> 0). With it: a hysteretic junction
    that switches at Ic going away from zero, and on the way back stays on the
    ohmic branch V = Rn I until it retraps at ``retrap_fraction * Ic``.
    """
    bias = np.asarray(bias_A, dtype=float)[None, :]
    ic = np.where(bias >= 0, np.asarray(ic_pos_A)[:, None], np.asarray(ic_neg_A)[:, None])
    if retrap_fraction is None:
        v = np.sign(bias) * rn_ohm * np.sqrt(np.clip(bias**2 - ic**2, 0.0, None))
    else:
        mag = np.abs(bias)
        step = np.diff(mag, axis=1)
        outbound = np.concatenate([step[:, :1], step], axis=1) > 0
        resistive = np.where(outbound, mag > ic, mag > retrap_fraction * ic)
        v = np.where(resistive, rn_ohm * bias, 0.0)
    return v + offset_V + rng.normal(0.0, noise_V, (np.size(field_T), bias.shape[1]))


#: Current-density profiles over x / L in [-1/2, 1/2] for diagnostics round trips.
PROFILES = {
    "uniform": lambda x: np.ones_like(x),
    "edges": lambda x: np.where(np.abs(x) > 0.4, 3.0, 1.0),      # edges carry 3x the bulk
    "gaussian": lambda x: np.exp(-0.5 * (x / 0.15) ** 2),         # peaked in the middle
    "gradient": lambda x: 1.0 + 0.4 * 2.0 * x,                    # 40 % linear gradient
    "zero-pi": lambda x: -np.sign(x),                              # pi shift over one half
}


def profile_case(rng, profile, *, period_T=1e-3, lobes=6, n_points=800, noise_fraction=0.02,
                 offset_fraction=0.2, folded=True):
    """A sweep of the pattern of ``PROFILES[profile]`` by a direct numerical integral.

    The integral is a plain trapezoid sum on 4001 points (independent of the
    Simpson rule in :func:`jjpattern.physics.patterns.profile_pattern`); the
    result is scaled so that the largest Ic is 1 uA. ``noise_fraction`` 0 gives
    the noise-free pattern; the noise is folded unless ``folded=False``.
    """
    x = np.linspace(-0.5, 0.5, 4001)
    j = PROFILES[profile](x)
    offset = offset_fraction * period_T
    half = (lobes + 1.0) * period_T
    field = np.linspace(-half, half, n_points) + offset
    u = (field - offset) / period_T
    phase = np.exp(2j * np.pi * np.outer(u, x))
    ic = np.abs(np.trapezoid(j[None, :] * phase, x, axis=1))
    ic *= 1e-6 / ic.max()
    ic = add_noise(rng, ic, noise_fraction * 1e-6, folded)
    return SyntheticCase(field, ic, period_T, offset, 1e-6, noise_fraction * 1e-6,
                         "rectangular", lobes)
