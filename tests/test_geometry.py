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


def _fit(**values):
    from types import SimpleNamespace

    base = dict(branch="positive", model="rectangular", period_T=None, period_stderr_T=None,
                ic0_A=None, ic0_stderr_A=None, effective_area_m2=None, derived={},
                derived_stderr={})
    base.update(values)
    if base["period_T"] is not None:
        base["effective_area_m2"] = PHI0_WB / base["period_T"]
    return SimpleNamespace(**base)


def test_planar_focusing_factor_is_the_enlargement_over_the_bulk_area():
    # A thin strip of width W obeys 1.84 Phi0 / W^2 (Rosenthal et al. 1991; Clem 2010; the
    # coefficient from memory): its effective area W^2 / 1.84 over the area W d' that the
    # field would thread without focusing is W / (1.84 d'); against the thin-film estimate
    # the ratio is 1.
    from jjpattern.diagnose.run import GeometryInputs, geometry_block

    w, d, t, lam = 4e-6, 2e-9, 200e-9, 90e-9
    dm = d + 2 * lam * np.tanh(t / (2 * lam))  # Weihnacht (1969), equal electrodes
    fit = _fit(period_T=1.84 * PHI0_WB / w**2, period_stderr_T=1e-7, ic0_A=1e-5)
    block = geometry_block([fit], GeometryInputs(width_m=w, length_m=w, barrier_m=d, t1_m=t,
                                                 lambda1_m=lam, planar=True))
    assert block["focusing_factor"] == pytest.approx(w / (1.84 * dm), rel=1e-9)
    assert block["focusing_factor"] > 10
    assert block["planar_area_over_thin_film_estimate"] == pytest.approx(1.0, rel=1e-12)
    assert block["planar_period_over_expected"] == pytest.approx(1.0, rel=1e-12)
    # The bulk numbers are kept, and a sentence says which apply.
    assert "magnetic_thickness_m" in block and "do not apply" in block["applies"]
    bulk = geometry_block([fit], GeometryInputs(width_m=w, length_m=w, barrier_m=d, t1_m=t,
                                                lambda1_m=lam))
    assert "applies" not in bulk and "focusing_factor" not in bulk


def test_long_junction_fit_gives_lambda_j_and_jc_from_the_pattern():
    # lambda_J = L / (L/lambda_J); Jc from Jc W L (the model's), not from the measured Ic0.
    from jjpattern.diagnose.run import GeometryInputs, geometry_block

    fit = _fit(model="long-inline", period_T=0.15e-3, period_stderr_T=1e-7, ic0_A=4e-5,
               ic0_stderr_A=1e-7, derived={"length_over_josephson_depth": 5.0,
                                           "jc_times_area_A": 7e-5},
               derived_stderr={"length_over_josephson_depth": 0.1, "jc_times_area_A": 1e-7})
    block = geometry_block([fit], GeometryInputs(length_m=20e-6, width_m=5e-6))
    assert block["josephson_depth_from_pattern_m"] == pytest.approx(4e-6, rel=1e-12)
    assert block["josephson_depth_from_pattern_stderr_m"] == pytest.approx(20e-6 * 0.1 / 25)
    assert block["jc_from_pattern_A_m2"] == pytest.approx(7e-5 / (20e-6 * 5e-6), rel=1e-12)
    assert "jc_from_ic0_A_m2" not in block
    assert block["magnetic_thickness_m"] == pytest.approx(PHI0_WB / (0.15e-3 * 20e-6))


def test_derived_errors_carry_the_correlation_of_period_and_ic0():
    # Var(a X + b Y) = a^2 + b^2 + 2 rho a b for the changes a, b of a derived number per
    # standard error of X and Y (first-order propagation; common practice). lambda_J
    # depends on both: on Ic0 through Jc, on the period through the London depth.
    from types import SimpleNamespace

    from jjpattern.diagnose.run import GeometryInputs, geometry_block

    inputs = GeometryInputs(width_m=5e-6, length_m=12e-6, barrier_m=2e-9, t1_m=150e-9)
    period, ic0, sp, si = 1.7e-3, 20e-6, 0.03e-3, 1.5e-6  # d' about 100 nm

    def err(period_err, ic0_err, rho=None, sign=1.0):
        fit = _fit(period_T=period, period_stderr_T=period_err, ic0_A=ic0, ic0_stderr_A=ic0_err)
        if rho is not None:
            cov = np.array([[sp**2, rho * sp * si], [rho * sp * si, si**2]])
            params = {"period_T": SimpleNamespace(value=sign * period),
                      "ic0_A": SimpleNamespace(value=ic0)}
            fit.fit_result = SimpleNamespace(var_names=["period_T", "ic0_A"], covar=cov,
                                               params=params)
        return geometry_block([fit], inputs)["josephson_depth_stderr_m"]

    a, b = err(sp, None), err(None, si)
    assert a > 0 and b > 0
    # lambda_J rises with the period (a smaller magnetic thickness needs a smaller London
    # depth, hence a thinner current layer) and falls with Ic0 (a larger Jc): a and b
    # enter with opposite signs.
    for rho in (-0.9, 0.0, 0.6):
        expected = np.sqrt(a * a + b * b - 2 * rho * a * b)
        assert err(sp, si, rho) == pytest.approx(expected, rel=1e-9)
    # A fit that converged on a negative period: the magnitudes' correlation flips sign.
    assert err(sp, si, 0.6, sign=-1.0) == pytest.approx(err(sp, si, -0.6), rel=1e-12)
    assert err(sp, si, 0.6) != pytest.approx(err(sp, si, -0.6), rel=1e-3)
