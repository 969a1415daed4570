"""The scan's fast sums against their definitions, summed directly in double precision.

The scan gets its (period, offset) surface from single-precision FFTs of templates laid
out around index 0, a type-1 DCT, and window sums from blocked cumulative sums of half
templates; here each sum is written out term by term instead (the definition of a
weighted cross-correlation), on invented data.
"""

import numpy as np
import pytest

from jjpattern.fit.scan import _median, _Surface, _uniform, period_grid, scan_pattern


def _shape(u):
    return np.abs(np.sinc(u))


def _surface(gap: bool, period: float = 0.3, extend: float = 1.0):
    rng = np.random.default_rng(5)
    x = np.linspace(-3.0, 3.0, 400)
    y = np.abs(_shape((x - 0.4) / period)) + rng.normal(0.0, 0.02, x.size)
    if gap:
        keep = (x < -0.5) | (x > 0.6)  # a gap far wider than five usual steps
        x, y = x[keep], y[keep]
    span = x[-1] - x[0]
    return _Surface(x, y, _shape, span / 120, extend), x, y


def _direct(surface, x, y, period):
    """Sums over the uniform grid of w*y*t, w*t, w*t^2 at every lag, one term at a time."""
    grid, yg, wg = _uniform(x, y, surface.step)
    yg = yg / surface.unit
    k = surface.k_half
    lags = np.arange(surface.valid)
    # Lag s puts the template centre (field difference 0) at grid index k - s.
    d = (np.arange(grid.size)[None, :] - (k - lags)[:, None]) * surface.step
    t = _shape(d / period)
    return t @ (wg * yg), t @ wg, (t * t) @ wg


@pytest.mark.parametrize(("gap", "extend"), [(False, 1.0), (True, 1.0), (False, 0.0)])
def test_correlations_equal_the_direct_sums(gap, extend):
    surface, x, y = _surface(gap, extend=extend)
    assert surface.gapless is not gap
    span = x[-1] - x[0]
    periods = period_grid(span, span / 60, 2 * span, 1.0)[::9]
    fast = surface._correlations(periods)
    for row, period in enumerate(periods):
        for got, want in zip((a[row] for a in fast), _direct(surface, x, y, period),
                             strict=True):
            # Single precision throughout, and templates interpolated in a table
            # (within 3e-5 of the shape): agreement to a few 1e-5 of the largest sum.
            assert np.max(np.abs(got - want)) <= 5e-5 * np.max(np.abs(want)) + 1e-6


@pytest.mark.parametrize("true_period", [0.3, 2.0])
def test_best_offsets_are_the_best_of_every_lag(true_period):
    # Closed-form least squares of y = amp * template + bkg (normal equations, common
    # practice) at every lag in double precision, over the lags the scan admits (template
    # overlap above 1e-4 of the best): the scan's pick is as good as the best of them.
    # Periods of 4 to 80 grid steps: coarse lag steps of one to eight.
    surface, x, y = _surface(False, true_period)
    periods = true_period * np.array([0.7, 1.0, 1.3]) if true_period < 1 else \
        true_period * np.array([0.5, 1.0, 2.0])
    chisq, offsets, amps, bkgs = surface.best_offsets(periods)
    grid, yg, _ = _uniform(x, y, surface.step)
    y1 = yg / surface.unit
    n, sy, syy = grid.size, y1.sum(), (y1**2).sum()
    for i, period in enumerate(periods):
        s_yf, s_f, s_ff = _direct(surface, x, y, period)
        det = n * s_ff - s_f**2
        amp = (n * s_yf - s_f * sy) / det
        bkg = (s_ff * sy - s_f * s_yf) / det
        both = (amp > 0) & (bkg >= 0)
        gain = np.where(both, amp * s_yf + bkg * sy, np.maximum(s_yf, 0) ** 2 / s_ff)
        gain = np.where(s_ff > 1e-4 * s_ff.max(), gain, 0.0)
        assert chisq[i] == pytest.approx((syy - gain.max()) * surface.unit**2, rel=1e-3)
        # The picked offset, amplitude and background give that chi-square on the grid.
        model = amps[i] * _shape((grid - offsets[i]) / period) + bkgs[i]
        assert np.sum((yg - model) ** 2) == pytest.approx(chisq[i], rel=1e-3)


@pytest.mark.parametrize("size", [1, 2, 7, 400, 401])
def test_median_is_numpys(size):
    values = np.random.default_rng(size).normal(size=size)
    assert _median(values) == float(np.median(values))  # reference: numpy.median


@pytest.mark.parametrize(("gap", "extend"), [(False, 1.0), (True, 1.0), (False, 0.0)])
def test_candidates_carry_the_chisq_of_their_own_numbers(gap, extend):
    # Each candidate's period, offset, amplitude and background, put back into the model
    # on the scan's uniform grid (step a quarter of the shortest period searched, as
    # scan_pattern sets it), give its chi-square scaled from grid to data points, within
    # single precision and the template table (1e-3).
    _, x, y = _surface(gap, extend=extend)
    found = scan_pattern(x, y, _shape, extend=extend)
    assert found.candidates[0].period_T == pytest.approx(0.3, rel=0.03)
    assert found.candidates[0].field_offset_T == pytest.approx(0.4, abs=0.03)
    assert found.profile_chisq_A2.size == found.periods_T.size
    assert np.all(np.diff(found.periods_T) > 0)
    span = x[-1] - x[0]
    step = max(span / 60, 4 * np.median(np.diff(x))) / 4
    grid, yg, wg = _uniform(x, y, step)
    for c in found.candidates:
        model = c.amplitude_A * _shape((grid - c.field_offset_T) / c.period_T) + c.background_A
        direct = float(np.sum(wg * (yg - model) ** 2)) * x.size / wg.sum()
        assert c.chisq_A2 == pytest.approx(direct, rel=1e-3)
        i = int(np.flatnonzero(found.periods_T == c.period_T)[0])
        assert found.profile_chisq_A2[i] == pytest.approx(c.chisq_A2)
