"""Geometry and materials formulas on published check values."""

import numpy as np
import pytest
from scipy import constants, optimize

from jjpattern.physics import geometry as g
from jjpattern.physics.constants import PHI0_WB
from jjpattern.physics.patterns import profile_pattern


def test_josephson_depth_check_value():
    # Check value given with the formula lambda_J = sqrt(Phi0 / (2 pi mu0 Jc d_s)):
    # Jc = 1 kA/cm^2 = 1e7 A/m^2 and d_s = 180 nm give 12.06 um.
    assert g.josephson_depth_m(1e7, 180e-9) == pytest.approx(12.06e-6, abs=0.005e-6)


def test_magnetic_thickness_limits():
    # Weihnacht (1969): thick electrodes give d + l1 + l2, thin ones d + (t1 + t2)/2.
    d, lam = 2e-9, 90e-9
    assert g.magnetic_thickness_m(d, lam, 50 * lam) == pytest.approx(d + 2 * lam, rel=1e-9)
    thin = g.magnetic_thickness_m(d, lam, 1e-3 * lam, lam, 2e-3 * lam)
    assert thin == pytest.approx(d + 1.5e-3 * lam / 2 * 2, rel=1e-6)
    # d_s: thick electrodes give d + l1 + l2 as well (coth -> 1).
    assert g.current_thickness_m(d, lam, 50 * lam) == pytest.approx(d + 2 * lam, rel=1e-9)


def test_period_and_london_depth_round_trip():
    length, d, t = 10e-6, 1.5e-9, 200e-9
    lam = 85e-9
    dm = g.magnetic_thickness_m(d, lam, t)
    period = g.expected_period_T(length, dm)
    assert period == pytest.approx(PHI0_WB / (length * dm), rel=1e-12)
    assert g.london_depth_from_period(period, length, d, t) == pytest.approx(lam, rel=1e-9)
    # With the second electrode's depth known, the first one is solved for.
    dm2 = g.magnetic_thickness_m(d, 70e-9, t, 140e-9, t)
    p2 = g.expected_period_T(length, dm2)
    assert g.london_depth_from_period(p2, length, d, t, lambda2_m=140e-9) == pytest.approx(
        70e-9, rel=1e-9)
    # A period too small for any lambda with these electrodes has no answer.
    assert g.london_depth_from_period(period / 50, length, d, t) is None


def test_planar_strip_period():
    # Rosenthal et al. (1991) / Clem (2010): 1.84 Phi0 / W^2 (coefficient from memory).
    w = 4e-6
    assert g.planar_period_T(w) == pytest.approx(1.84 * constants.h / (2 * constants.e) / w**2)
    assert g.focusing_factor(3e-12, 1e-12) == pytest.approx(3.0)


def test_zero_pi_junction_check_values():
    # A pi shift over half the length: J(x) = +1 on one half, -1 on the other. From the
    # phase integral Ic(u) = |sin^2(pi u / 2)| / |pi u / 2|, so Ic(0) = 0 and the first
    # maxima sit at Phi = +-0.742 Phi0 with height 0.7246 Ic0.
    x = np.linspace(-0.5, 0.5, 4001)
    j = -np.sign(x)  # the sample at the step takes the mean of the two halves
    pattern = lambda u: profile_pattern(u, x, j)  # noqa: E731
    assert pattern(0.0) < 1e-12
    res = optimize.minimize_scalar(lambda u: -pattern(u), bounds=(0.3, 1.2), method="bounded",
                                   options={"xatol": 1e-8})
    assert res.x == pytest.approx(0.742, abs=1e-3)
    assert -res.fun == pytest.approx(0.7246, abs=2e-4)
