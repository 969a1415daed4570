"""Long junctions: the shipped sine-Gordon table against published limits and against a
solution written here, and fits of long-junction patterns made without the table.

The generator below is independent of the table and of the script that made it: every
static solution of the in-line junction, phi'' = sin(phi) with phi'(0) = h - i/2 and
phi'(L) = h + i/2 (lengths in lambda_J; Owen and Scalapino, Phys. Rev. 164, 538 (1967)),
is a piece of length L of a pendulum orbit, so h and i are the mean and the difference
of the orbit's slope at the two ends of the piece. The slope along an orbit is a Jacobi
elliptic function (libration 2k cn(t|k^2), rotation (2/k) dn(t/k|k^2); Abramowitz and
Stegun ch. 16), and Ic(h) is the largest i over all pieces with that mean slope.
Measured Ic is a magnitude (|Ic + noise|); both polarities, swept down in file order.
"""

import numpy as np
import pytest
from scipy import special

from jjpattern.fit.engine import fit_pattern
from jjpattern.physics.models import long_junction as lj


def _cn_dn(w, m):
    # Reduce the argument to [0, K] first: scipy's ellipj is inaccurate far beyond K when
    # m is within 1e-9 of 1 (near the separatrix, where long junctions live).
    k = special.ellipk(m)
    r = np.mod(w, 4 * k)
    r = np.where(r > 2 * k, 4 * k - r, r)
    flip = r > k
    _, cn, dn, _ = special.ellipj(np.where(flip, 2 * k - r, r), m)
    return np.where(flip, -cn, cn), dn


def _pieces(kind, m, ell, n_t):
    """Mean and difference of the end slopes of every piece of length ``ell`` of each orbit,
    the pieces starting at ``n_t`` phases spread over one period."""
    k = special.ellipk(m)
    period = 4 * k if kind == "libration" else 2 * k * np.sqrt(m)
    t = np.linspace(0, 1, n_t, endpoint=False)[None, :] * period[:, None]
    mm = np.broadcast_to(m[:, None], t.shape)
    if kind == "libration":
        p0, p1 = (2 * np.sqrt(mm) * _cn_dn(s, mm)[0] for s in (t, t + ell))
    else:
        p0, p1 = (2 / np.sqrt(mm) * _cn_dn(s / np.sqrt(mm), mm)[1] for s in (t, t + ell))
    return 0.5 * (p0 + p1), p1 - p0


def _largest_on_contour(a, b, da, db):
    """Largest interpolated current where the mean slope crosses h between two samples."""
    cross = (a <= 0) & (b > 0) | (a > 0) & (b <= 0)
    if not cross.any():
        return 0.0
    w = a[cross] / (a[cross] - b[cross])
    return float(np.max(da[cross] + w * (db[cross] - da[cross])))


def inline_ic(u, ell, n_t=400):
    """Ic / (Jc W L) of an in-line junction of length ``ell`` lambda_J at flux ``u``."""
    h = 2 * np.pi * np.abs(np.asarray(u, float)) / ell
    q = 10.0 ** -np.linspace(0.3, 13, 120)  # orbits crowding towards the separatrix
    orbits = {"libration": np.unique(np.r_[np.linspace(5e-4, 1 - 5e-4, 400), 1 - q]),
              "rotation": np.unique(np.clip(4 / np.r_[2 / np.sqrt(1 - q), np.arange(
                  2.0, h.max() + 4.0, 0.01)[1:]] ** 2, 1e-12, 1 - 1e-13))}
    best = np.zeros(h.size)
    for kind, m in orbits.items():
        mean0, diff0 = _pieces(kind, m, ell, n_t)
        for sign in (1.0, -1.0):
            mean, diff = sign * mean0, sign * diff0
            lo, hi = mean.min(axis=1), mean.max(axis=1)
            pair_lo, pair_hi = np.minimum(lo[:-1], lo[1:]), np.maximum(hi[:-1], hi[1:])
            mean_t, diff_t = np.roll(mean, -1, axis=1), np.roll(diff, -1, axis=1)
            for j, hj in enumerate(h):
                # The contour mean = h on the (orbit, phase) grid, met along the phase ...
                rows = np.flatnonzero((lo <= hj) & (hj <= hi))
                best[j] = max(best[j], _largest_on_contour(
                    mean[rows] - hj, mean_t[rows] - hj, diff[rows], diff_t[rows]))
                # ... and from one orbit to the next at the same phase.
                pairs = np.flatnonzero((pair_lo <= hj) & (hj <= pair_hi))
                best[j] = max(best[j], _largest_on_contour(
                    mean[pairs] - hj, mean[pairs + 1] - hj, diff[pairs], diff[pairs + 1]))
    return best / ell


@pytest.fixture(scope="module")
def patterns():
    u = np.linspace(0.0, 8.0, 401)
    return u, {ell: inline_ic(u, ell) for ell in (1.0, 3.0, 7.0)}


def test_generator_reproduces_the_long_junction_limits():
    # Owen and Scalapino (1967); Barone and Paterno (1982) ch. 5: a long in-line junction
    # carries 4 Jc W lambda_J at zero field (2 at each end, where |phi'| <= 2), and on its
    # vortex-free branch the ends limit it to i = 4 - 2h (from the first integral).
    g = inline_ic(np.array([0.0, 0.1, 0.2, 0.3]), 12.0)
    h = 2 * np.pi * np.array([0.0, 0.1, 0.2, 0.3]) / 12.0
    assert g * 12.0 == pytest.approx(4.0 - 2.0 * h, rel=3e-3)
    # A short junction gives the Fraunhofer pattern (departure of order (L/lambda_J)^2).
    u = np.linspace(0.0, 2.0, 41)
    assert np.max(np.abs(inline_ic(u, 0.3) - np.abs(np.sinc(u)))) < 2e-3


def test_table_agrees_with_an_independent_solution(patterns):
    u, exact = patterns
    for ell, g in exact.items():
        table = lj.shape(u, ell, "inline") * lj.zero_field_ratio(ell, "inline")
        err = np.abs(table - g)
        # Linear interpolation between table points misses the cusps by up to ~1 %
        # of Jc W L; elsewhere the two agree to a few 1e-4.
        assert np.max(err) < 0.015, ell
        assert np.sqrt(np.mean(err**2)) < 1.5e-3, ell


@pytest.mark.parametrize("feed", ["inline", "overlap"])
def test_table_short_junction_limit(feed):
    # L << lambda_J: the phase is linear across the junction and Ic/(Jc W L) = |sinc(u)|;
    # the departure grows as (L/lambda_J)^2.
    u = np.linspace(0.0, 10.0, 2001)
    dev = [np.max(np.abs(lj.shape(u, ell, feed) * lj.zero_field_ratio(ell, feed)
                         - np.abs(np.sinc(u)))) for ell in (0.25, 0.5)]
    assert dev[0] < 2e-3
    assert 3.0 < dev[1] / dev[0] < 5.0


def test_table_long_junction_limits():
    # In-line: Ic(0) -> 4 Jc W lambda_J (Owen and Scalapino 1967; Barone and Paterno 1982,
    # ch. 5; from memory), approached from below.
    assert lj.zero_field_ratio(12.0, "inline") * 12.0 == pytest.approx(4.0, rel=5e-3)
    assert lj.zero_field_ratio(3.0, "inline") * 3.0 < 3.0
    # Overlap: uniform injection, so phi = pi/2 everywhere carries Jc W L at zero field.
    assert lj.zero_field_ratio(9.0, "overlap") == pytest.approx(1.0, abs=1e-6)
    # Overlap, vortex-free branch of a long junction: each end screens the field with the
    # bulk at phi_s = arcsin(gamma); from the first integral of phi'' = sin(phi) - gamma the
    # end slope h can reach h^2 = 4 cos(phi_s) - 2 gamma (pi - 2 phi_s) (derived here).
    gamma = np.array([0.98, 0.9, 0.7, 0.5])
    phi_s = np.arcsin(gamma)
    h = np.sqrt(4 * np.cos(phi_s) - 2 * gamma * (np.pi - 2 * phi_s))
    u = h * 12.0 / (2 * np.pi)
    assert lj.shape(u, 12.0, "overlap") == pytest.approx(gamma, rel=0.01)
    # In-line, vortex-free branch: i = 4 - 2h (each end holds |phi'| <= 2), so
    # Ic/Ic(0) = 1 - h/2 while that branch is the highest.
    h = np.array([0.25, 0.5, 1.0])
    assert lj.shape(h * 12.0 / (2 * np.pi), 12.0, "inline") == pytest.approx(1 - h / 2,
                                                                              abs=0.01)


def _sweep(rng, g, u, period, offset, noise_fraction=0.003):
    """A down sweep of both polarities (file order kept), Ic read as a magnitude."""
    field = offset + period * u[::-1]
    ic = 20e-6 * g[::-1] / g.max()
    noise = noise_fraction * 20e-6
    return (field, np.abs(ic + rng.normal(0.0, noise, ic.size)),
            -np.abs(ic + rng.normal(0.0, noise, ic.size)))


@pytest.mark.parametrize("ell", [1.0, 3.0, 7.0])
def test_long_junction_is_recognised_with_its_length_and_period(patterns, ell):
    u_half, exact = patterns
    u = np.r_[-u_half[:0:-1], u_half]
    g = np.r_[exact[ell][:0:-1], exact[ell]]
    rng = np.random.default_rng(int(10 * ell))
    period, offset = 0.148e-3, 0.021e-3
    field, positive, negative = _sweep(rng, g, u, period, offset)
    for ic in (positive, negative):
        fit = fit_pattern(field, ic)
        assert fit.model == "long-inline", fit.model_choice["candidates"][:2]
        assert fit.derived["length_over_josephson_depth"] == pytest.approx(ell, rel=0.10)
        # The period keeps its short-junction meaning, Phi0 / (L d').
        assert fit.period_T == pytest.approx(period, rel=0.02)
        assert fit.reduced_chisq < 1.5
        # Jc W L is the zero-field Ic over the table's g(0; L/lambda_J).
        assert fit.derived["jc_times_area_A"] == pytest.approx(20e-6 / exact[ell][0], rel=0.05)
