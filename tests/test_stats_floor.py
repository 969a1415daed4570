"""The node-floor test against a noise model that knows Ic is a magnitude.

Data: uniform and floored patterns from jjpattern.synthetic (|sinc| written out
there, noise folded as |Ic + noise| unless stated), and a noise-free pattern from
a plain numpy |sinc|.
"""

import numpy as np
import pytest
from scipy import optimize, stats

from jjpattern.diagnose.shape import (
    FLOOR_SIGMAS,
    _null_floor_squared,
    floor_test,
    folded_mean,
    lifted_floor_A,
)
from jjpattern.fit.engine import fit_pattern
from jjpattern.synthetic import add_noise, ideal, profile_case


def test_folded_mean_is_scipys_folded_normal():
    # scipy.stats.foldnorm is |X| for X ~ N(c, 1); its mean at c = 0 is sqrt(2/pi).
    m = np.array([0.0, 0.3, 1.0, 2.5, 6.0])
    sigma = 0.7
    expect = [stats.foldnorm(c / sigma, scale=sigma).mean() for c in m]
    assert np.allclose(folded_mean(m, sigma), expect, rtol=1e-12, atol=1e-15)
    assert folded_mean(0.0, 1.0) == pytest.approx(np.sqrt(2 / np.pi), rel=1e-14)


@pytest.mark.parametrize("top", [9.0, 0.1])
def test_null_floor_is_the_bounded_least_squares_minimum(top):
    # Reference: scipy.optimize.minimize_scalar (bounded Brent, tight tolerance) in the
    # floor itself, as the node-floor test searched before; ``top`` 0.1 binds the bound.
    u = np.linspace(-9.0, 9.0, 4000) + 0.013
    f = 40.0 * np.abs(np.sinc(u))
    target = folded_mean(f, 1.0)
    ref = optimize.minimize_scalar(lambda k: np.sum((np.hypot(f, k) - target) ** 2),
                                   bounds=(0.0, np.sqrt(top)), method="bounded",
                                   options={"xatol": 1e-12}).x
    # Brent stops within its tolerance of a bound, not on it.
    assert np.sqrt(_null_floor_squared(f * f, target, top)) == pytest.approx(ref, abs=1e-7)
    # True zeros measured as plain values: no floor at all.
    assert _null_floor_squared(f * f, f, top) == 0.0


@pytest.mark.parametrize("noise", [0.005, 0.01, 0.03])
def test_uniform_junctions_with_folded_noise_have_no_lifted_nodes(noise):
    rng = np.random.default_rng(int(noise * 1000))
    floors = 0
    for _ in range(2):
        case = profile_case(rng, "uniform", lobes=int(rng.integers(3, 11)),
                            n_points=int(rng.integers(500, 1200)), noise_fraction=noise,
                            offset_fraction=rng.uniform(-0.5, 0.5))
        assert np.all(case.ic_A >= 0)
        fit = fit_pattern(case.field_T, case.ic_A)
        test = floor_test(fit)
        if test is None:
            continue
        floors += 1
        # Folding alone leaves a floor of about 0.6 noise units (the floored pattern's
        # least-squares match to the folded-normal mean), which the null accounts for.
        assert test["noise_model"] == "folded normal"
        assert 0.45 < test["null_floor_A"] / case.noise_A < 0.8
        assert abs(test["excess_sigmas"]) < 3.0
        assert not test["lifted"] and lifted_floor_A(fit) is None
    assert floors >= 1  # the fit does keep a floor on folded data: the test is exercised


@pytest.mark.parametrize(("points", "offset"), [(801, 0.23e-3), (990, 0.3271e-3)])
def test_noiseless_uniform_patterns_have_no_lifted_nodes(points, offset):
    # Floors of 1e-8 of Ic0 with standard errors from rounding residuals used to count as
    # lifted; they lift no measured point by any part of the noise.
    b = np.linspace(-5e-3, 5e-3, points)
    exact = 1e-6 * np.abs(np.sinc((b - offset) / 1e-3))
    rng = np.random.default_rng(5)
    quadrature = profile_case(rng, "uniform", lobes=7, n_points=points, noise_fraction=0.0)
    for field, ic in ((b, exact), (quadrature.field_T, quadrature.ic_A)):
        fit = fit_pattern(field, ic)
        assert fit.period_T is not None
        assert lifted_floor_A(fit) is None
        test = floor_test(fit)
        assert test is None or test["floor_visible_over_noise"] < 0.5


def test_unfolded_noise_uses_the_plain_null():
    rng = np.random.default_rng(6)
    case = profile_case(rng, "uniform", lobes=6, n_points=900, noise_fraction=0.02,
                        folded=False)
    assert np.any(case.ic_A < 0)
    fit = fit_pattern(case.field_T, case.ic_A, node_floor="on")
    test = floor_test(fit)
    assert test["noise_model"] == "normal" and test["null_floor_A"] == pytest.approx(0, abs=1e-12)
    assert not test["lifted"]


@pytest.mark.parametrize(("floor", "lifted"), [(0.03, True), (0.0, False)])
def test_a_real_floor_under_folded_noise(floor, lifted):
    rng = np.random.default_rng(7)
    b = np.linspace(-6e-3, 6e-3, 1200)
    ic = add_noise(rng, ideal(b, "rectangular", 1e-6, 1e-3, 0.1e-3, floor_A=floor * 1e-6),
                   0.01e-6)
    fit = fit_pattern(b, ic, node_floor="on")
    test = floor_test(fit)
    assert test["lifted"] is lifted
    if lifted:
        assert test["excess_sigmas"] > FLOOR_SIGMAS
        # sqrt(F^2 - null^2) recovers the floor put in, to within a fifth.
        assert test["lifted_floor_A"] == pytest.approx(floor * 1e-6, rel=0.2)
