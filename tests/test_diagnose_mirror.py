"""The mirror centre: estimated grid costs must pick the centre the exact costs pick."""

from __future__ import annotations

import numpy as np
import pytest

from jjpattern.diagnose.mirror import _grid_costs, _mirror_costs, mirror_centre
from jjpattern.synthetic import add_noise, ideal


@pytest.mark.parametrize("n, seed, tilt", [(400, 1, 0.0), (3000, 2, 0.0), (3000, 3, 0.3),
                                           (20000, 4, 0.1)])
def test_estimated_grid_costs_keep_the_least_cost_and_its_place(n, seed, tilt):
    rng = np.random.default_rng(seed)
    field = np.linspace(-9e-3, 9e-3, n) + 0.13e-3
    ic = add_noise(rng, ideal(field, "rectangular", 1e-6, 1e-3, 0.13e-3), 0.02e-6)
    ic = ic * (1.0 + tilt * np.tanh(field / 3e-3))
    span = field[-1] - field[0]
    grid = np.linspace(field[0] + 0.25 * span, field[-1] - 0.25 * span, 180)
    exact, fast = _mirror_costs(grid, field, ic), _grid_costs(grid, field, ic)
    k = int(np.argmin(exact))
    assert int(np.argmin(fast)) == k and fast[k] == exact[k]
    # Elsewhere an estimate, within round-off of the exact cost.
    np.testing.assert_allclose(fast, exact, rtol=1e-9)


def test_mirror_centre_of_an_exact_pattern_is_its_offset():
    # |sinc((B - B0)/P)| (Fraunhofer pattern of a uniform junction, common practice) is
    # symmetric about B0; on an even grid and on an uneven one.
    for field in (np.linspace(-9e-3, 9e-3, 5001) + 0.3e-3,
                  np.sort(np.random.default_rng(5).uniform(-9e-3, 9.6e-3, 5001))):
        ic = np.abs(np.sinc((field - 0.37e-3) / 1e-3))
        assert mirror_centre(field, ic, 1e-3) == pytest.approx(0.37e-3, abs=2e-7)
