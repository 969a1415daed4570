"""dV/dI computed where the search reads it, against scipy's Savitzky-Golay filter."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.signal import savgol_filter

from jjpattern.extract.criteria import differential
from jjpattern.extract.derivative import Derivative
from jjpattern.synthetic import bias_sweep, ideal, rsj_map


def _map(mode, n_bias):
    rng = np.random.default_rng(5)
    field = np.linspace(-3e-3, 3e-3, 37)
    ic = ideal(field, "rectangular", 10e-6, 1e-3, 0.1e-3)
    bias = bias_sweep(16e-6, n_bias, mode)
    return rsj_map(rng, field, ic, ic, 12.0, bias, 0.1e-6, offset_V=2e-6), bias


@pytest.mark.parametrize("mode, n_bias", [("up", 401), ("up", 7), ("out-and-back", 201)])
def test_derivative_where_read_is_the_map_derivative(mode, n_bias):
    v, bias = _map(mode, n_bias)
    full = differential(v, np.broadcast_to(bias, v.shape), dense=True)
    d = Derivative(v, bias)
    n = v.shape[1]
    # Blocks forwards, backwards and every few columns, narrowed views, and single points:
    # the same numbers to the last bit, NaN at the same places.
    reads = [(slice(None), slice(None)), (slice(3, 20), slice(5, n - 2)),
             (slice(None, None, 4), slice(n - 1, None, -1)), (slice(None), slice(0, n, 5)),
             (slice(2, 9), slice(n - 3, 1, -2))]
    # Blocks (column steps up to half the window) are the same ndimage convolution: equal
    # to the last bit. Sparse columns and points are summed here: equal to round-off,
    # since ndimage's order of summation changes between scipy versions.
    for rows, cols in reads:
        _same(d[rows, cols], full[rows, cols], exact=abs(cols.step or 1) <= 3)
    view = d.columns(2, n - 1)
    assert view.shape == (v.shape[0], n - 3)
    _same(view[:, ::3], full[:, 2:n - 1][:, ::3], exact=True)
    r = np.arange(v.shape[0])
    c = (r * 7) % n
    _same(d[r, c], full[r, c], exact=False)
    _same(view[r, c % (n - 3)], full[r, 2 + c % (n - 3)], exact=False)


def _same(got, want, exact):
    assert np.array_equal(np.isnan(got), np.isnan(want))
    if exact:
        assert np.array_equal(got, want, equal_nan=True)
    else:
        # Relative to the scale: where dV/dI is near zero the sum cancels.
        scale = np.nanmax(np.abs(want)) if np.isfinite(want).any() else 0.0
        np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12 * scale)


def test_a_first_look_that_differs_by_round_off_does_not_change_the_search():
    from jjpattern.extract.search import COARSE, _first_in_order

    # The full pass's answer: row 0 first True at 40, row 1 at 5, row 2 at 100, row 3 none.
    n = 130
    mask = np.zeros((4, n), dtype=bool)
    mask[0, 40:] = mask[1, 5] = mask[2, 100] = True
    # The first look sees row 2 at column 64 (a value a round-off above the level there)
    # and misses row 0's hit at column 64 (a round-off below).
    look = mask.copy()
    look[2, 64] = True
    look[0, 64] = False

    def search(cols):
        m = (look if cols.step == COARSE else mask)[:, cols]
        k = np.argmax(m, axis=1)
        return k, m[np.arange(m.shape[0]), k]

    k, found = _first_in_order(search, n, True)
    assert found.tolist() == [True, True, True, False]
    assert k[:3].tolist() == [40, 5, 100]


def test_derivative_matches_scipy_savgol_filter_on_a_uniform_sweep():
    # Savitzky and Golay, Anal. Chem. 36, 1627 (1964), as scipy.signal.savgol_filter
    # computes it: a quadratic over 7 points, first derivative, step delta.
    v, bias = _map("up", 401)
    step = bias[1] - bias[0]
    expected = savgol_filter(v, 7, 2, deriv=1, delta=step, mode="nearest", axis=1)
    d = Derivative(v, bias)[:, :]
    inner = slice(4, -4)  # within half a window (3 steps) of the ends the derivative is NaN
    assert np.all(np.isnan(d[:, :4])) and np.all(np.isnan(d[:, -4:]))
    np.testing.assert_allclose(d[:, inner], expected[:, inner], rtol=1e-9,
                               atol=1e-9 * np.max(np.abs(expected)))
