"""The current-density reconstruction on a grid set by the resolution, and its band.

Data: |sinc| patterns (the transform of a uniform junction; Bracewell, common
practice) with Gaussian noise drawn here, folded as a measured magnitude.
"""

import tracemalloc

import numpy as np
import pytest

from jjpattern.diagnose.reconstruct import GRID_STEP, MAX_GRID, _grid, reconstruct


def _sinc_data(rng, n_points, noise, lobes=8):
    field = np.linspace(-(lobes + 1) * 1e-3, (lobes + 1) * 1e-3, n_points)
    return field, np.abs(np.abs(np.sinc(field / 1e-3)) + rng.normal(0.0, noise, n_points))


def test_band_covers_the_scatter_between_measurements():
    # The 16-84 % band is a standard deviation wide: over independent noise draws the
    # profile scatters as much as the band of one draw says (a mirror average and its
    # mirror image share their noise; drawn apart, the band was sqrt(2) too narrow).
    rng = np.random.default_rng(61)
    profiles, halves = [], []
    for _ in range(50):
        field, ic = _sinc_data(rng, 1200, 0.002)
        d = reconstruct(field, ic, 1e-3, 0.0, 0.002, rng, resamples=100)
        profiles.append(d["j_over_mean"])
        halves.append(0.5 * (d["j_high_over_mean"] - d["j_low_over_mean"]))
    inside = np.abs(d["x_over_length"]) <= 0.4
    ratio = np.std(profiles, axis=0)[inside] / np.mean(halves, axis=0)[inside]
    assert np.mean(ratio) == pytest.approx(1.0, abs=0.15)


def test_dense_data_are_averaged_onto_a_grid_set_by_the_resolution():
    rng = np.random.default_rng(62)
    field, ic = _sinc_data(rng, 40_000, 0.004)
    grid, values, step, counts = _grid(field / 1e-3, ic, True)
    assert step == pytest.approx(GRID_STEP)
    assert grid.size == 1801  # 9 periods each side at 100 per period, not 40 000 points
    # Each grid value is the mean of the points in its bin: the noise drops by sqrt(count).
    assert np.median(counts) == pytest.approx(0.01 / np.median(np.diff(field / 1e-3)), rel=0.1)
    clean = np.abs(np.sinc(grid))
    away = clean > 0.05
    assert np.std((values - clean)[away]) == pytest.approx(
        0.004 / np.sqrt(2 * np.median(counts)), rel=0.25)
    # The same junction read from 40 000 points and from 1200 gives the same numbers.
    dense = reconstruct(field, ic, 1e-3, 0.0, 0.004, rng, resamples=50)
    field, ic = _sinc_data(rng, 1200, 0.004)
    sparse = reconstruct(field, ic, 1e-3, 0.0, 0.004, rng, resamples=50)
    assert dense["edge_fraction"] == pytest.approx(sparse["edge_fraction"], abs=0.01)
    assert dense["resolution_over_length"] == pytest.approx(sparse["resolution_over_length"],
                                                            rel=0.01)
    assert dense["edge_fraction_stderr"] < sparse["edge_fraction_stderr"]


@pytest.mark.parametrize("method", ["symmetric", "support"])
def test_memory_is_bounded_whatever_the_sampling(method):
    # 199 fields 0.1 nT apart and one a period away: the median step asks for 10 million
    # grid points (the former grid, and an np.outer of 24 GB); the grid stays at the
    # resolution's size and the memory small.
    field = np.concatenate([np.arange(199) * 1e-10 - 1e-3, [1e-3]])
    ic = np.abs(np.sinc(field / 1e-3)) + 0.01
    tracemalloc.start()
    d = reconstruct(field, ic, 1e-3, 0.0, 0.01, np.random.default_rng(0), method=method,
                    resamples=20)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert peak < 20 * 2**20
    assert np.all(np.isfinite(d["j_over_mean"]))
    grid = _grid(field / 1e-3, ic, method == "symmetric")[0]
    assert grid.size <= MAX_GRID + 1


@pytest.mark.parametrize("n", [0, 1, 2, 3, 10, 101, 1800])
@pytest.mark.parametrize("alpha", [0.0, 0.4, 1.0])
def test_window_and_minima_match_scipy(n, alpha):
    # The reconstruction writes these out so the analysis does not import scipy.signal;
    # scipy.signal's own functions are the reference.
    from scipy import signal

    from jjpattern.diagnose.reconstruct import local_minima, tukey

    assert np.allclose(tukey(n, alpha), signal.windows.tukey(n, alpha), atol=1e-15)
    seq = np.round(np.random.default_rng(n).normal(size=n), 1)  # ties too
    for order in (1, 3):
        assert np.array_equal(local_minima(seq, order), signal.argrelmin(seq, order=order)[0])
