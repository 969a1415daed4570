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
    for rows, cols in reads:
        assert np.array_equal(d[rows, cols], full[rows, cols], equal_nan=True)
    view = d.columns(2, n - 1)
    assert view.shape == (v.shape[0], n - 3)
    assert np.array_equal(view[:, ::3], full[:, 2:n - 1][:, ::3], equal_nan=True)
    r = np.arange(v.shape[0])
    c = (r * 7) % n
    assert np.array_equal(d[r, c], full[r, c], equal_nan=True)
    assert np.array_equal(view[r, c % (n - 3)], full[r, 2 + c % (n - 3)], equal_nan=True)


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
