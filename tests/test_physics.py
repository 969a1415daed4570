"""Pattern formulas against published values and reference libraries."""

import numpy as np
import pytest
from scipy import constants, optimize, special

from jjpattern.physics import patterns as pt
from jjpattern.physics.constants import PHI0_WB

# Roots of tan x = x (OEIS A115365; Abramowitz & Stegun ch. 10, spherical Bessel j1 zeros).
TAN_ROOTS = [4.493409, 7.725252, 10.904122]
# |sin x / x| at those roots: the side-lobe maxima of the uniform pattern.
LOBE_HEIGHTS = [0.217234, 0.128375, 0.091325]
# Zeros of J1 (Abramowitz & Stegun Table 9.5).
J1_ZEROS = [3.831706, 7.015587, 10.173468]


def test_flux_quantum_is_h_over_2e():
    # scipy.constants (CODATA); h and e are exact in the 2019 SI, so Phi0 is exact.
    assert PHI0_WB == pytest.approx(constants.h / (2 * constants.e), rel=1e-15)
    # CODATA 2018 printed value 2.067 833 848... e-15 Wb.
    assert PHI0_WB == pytest.approx(2.067833848e-15, rel=1e-9)


@pytest.mark.parametrize("k", range(3))
def test_rectangular_side_lobe_maxima_sit_at_tan_roots(k):
    res = optimize.minimize_scalar(
        lambda u: -pt.rectangular_pattern(u), bounds=(k + 1 + 1e-9, k + 2 - 1e-9),
        method="bounded", options={"xatol": 1e-12},
    )
    assert np.pi * res.x == pytest.approx(TAN_ROOTS[k], abs=2e-6)
    assert -res.fun == pytest.approx(LOBE_HEIGHTS[k], abs=2e-6)


def test_first_side_lobe_of_sinc_squared_is_minus_13_26_db():
    # Textbook value for the uniform aperture (sinc^2 power pattern): -13.26 dB.
    u = TAN_ROOTS[0] / np.pi
    db = 10 * np.log10(pt.rectangular_pattern(u) ** 2)
    assert db == pytest.approx(-13.26, abs=0.005)


def test_circular_nodes_are_zeros_of_j1():
    assert np.allclose(special.jn_zeros(1, 3), J1_ZEROS, atol=1e-6)
    u_nodes = pt.circular_node_flux(3)
    assert np.allclose(np.pi * u_nodes, J1_ZEROS, atol=1e-6)
    assert np.all(pt.circular_pattern(u_nodes) < 1e-12)
    # Between the nodes the pattern is clearly non-zero.
    assert np.all(pt.circular_pattern(0.5 * (u_nodes[:-1] + u_nodes[1:])) > 0.01)


def test_node_positions_by_geometry():
    assert np.array_equal(pt.node_flux("rectangular", 3), [1.0, 2.0, 3.0])
    assert np.allclose(pt.node_flux("circular", 3), np.array(J1_ZEROS) / np.pi, atol=1e-6)
    with pytest.raises(ValueError):
        pt.node_flux("hexagonal", 2)


@pytest.mark.parametrize("name", sorted(pt.PATTERNS))
def test_every_pattern_peaks_at_offset_scales_and_is_even(name):
    from jjpattern.physics.models import get_model

    f = pt.PATTERNS[name]
    b = np.linspace(-7.3, 7.3, 1001)
    base = f(b, ic0_A=2.5, period_T=1.7, field_offset_T=0.4)
    centre = f(0.4, ic0_A=2.5, period_T=1.7, field_offset_T=0.4)
    if get_model(name).central_peak:
        assert centre == pytest.approx(2.5, rel=1e-12)
    else:  # the 0-pi pattern: a zero at the centre
        assert centre == pytest.approx(0.0, abs=1e-12)
    assert base.max() <= 2.5 + 1e-12
    mirrored = f(0.8 - b, ic0_A=2.5, period_T=1.7, field_offset_T=0.4)
    assert np.allclose(base, mirrored, atol=1e-12)
    floored = f(b, ic0_A=2.5, period_T=1.7, field_offset_T=0.4, floor_A=0.3)
    assert np.allclose(floored, np.sqrt(base**2 + 0.09), rtol=1e-12)


def test_forward_model_reproduces_uniform_rectangle():
    # Dynes & Fulton (1971): uniform current gives |sinc|; the integral is done numerically.
    x = np.linspace(-0.5, 0.5, 2001)
    b = np.linspace(-6.0, 6.0, 397)
    got = pt.profile_pattern(b, x, np.full_like(x, 3.0))
    assert np.max(np.abs(got - pt.rectangular_pattern(b, ic0_A=3.0))) < 1e-6 * 3.0


def test_forward_model_reproduces_circular_junction():
    # A disc's current per unit length across the field is a semicircle chord,
    # sqrt(1 - (2x)^2); its transform is 2 J1(pi u)/(pi u) (Bracewell, Hankel pair).
    x = np.linspace(-0.5, 0.5, 40001)
    j = 4.0 / np.pi * np.sqrt(np.clip(1.0 - 4.0 * x**2, 0.0, None))
    b = np.linspace(-4.0, 4.0, 161)
    got = pt.profile_pattern(b, x, j)
    assert np.max(np.abs(got - pt.circular_pattern(b))) < 1e-6


def test_forward_model_two_narrow_channels_give_cosine():
    # Two narrow channels at +-a: |cos(2 pi a u)| times the channels' own Gaussian
    # envelope exp(-2 pi^2 s^2 u^2) (Bracewell, shift and Gaussian pairs).
    a, s = 0.4, 0.01
    x = np.linspace(-0.5, 0.5, 20001)
    j = (np.exp(-0.5 * ((x - a) / s) ** 2) + np.exp(-0.5 * ((x + a) / s) ** 2))
    j /= s * np.sqrt(2 * np.pi)
    b = np.linspace(-5.0, 5.0, 201)
    expected = 2 * np.abs(np.cos(2 * np.pi * a * b)) * np.exp(-2 * np.pi**2 * s**2 * b**2)
    assert np.max(np.abs(pt.profile_pattern(b, x, j) - expected)) < 1e-6


def test_forward_model_keeps_shape_of_field_argument():
    x = np.linspace(-0.5, 0.5, 101)
    assert isinstance(pt.profile_pattern(0.3, x, np.ones_like(x)), float)
    assert pt.profile_pattern(np.zeros((2, 3)), x, np.ones_like(x)).shape == (2, 3)


def test_bcs_ratio_and_gap_near_tc():
    from jjpattern.physics.junction import BCS_RATIO, bcs_gap_J

    # Weak-coupling BCS: Delta(0) = 1.764 k_B Tc (Bardeen, Cooper & Schrieffer 1957).
    assert BCS_RATIO == pytest.approx(1.764, abs=5e-4)
    tc = 9.2
    assert bcs_gap_J(tc) == pytest.approx(1.764 * constants.k * tc, rel=5e-4)
    # Near Tc, Delta = 3.06 k_B Tc sqrt(1 - T/Tc) (BCS; e.g. Tinkham, Introduction to
    # Superconductivity, 2nd ed., eq. 3.54 with 1.74 * 1.764 = 3.07).
    for t in (0.995, 0.999):
        ratio = bcs_gap_J(tc, t * tc) / (constants.k * tc * np.sqrt(1 - t))
        assert ratio == pytest.approx(3.06, rel=0.01)
    # Far below Tc: 1 - Delta/Delta0 = sqrt(2 pi k T / Delta0) exp(-Delta0 / k T), the
    # low-temperature expansion of the gap equation (from memory; leading order only).
    expected = np.sqrt(2 * np.pi * 0.2 / 1.764) * np.exp(-1.764 / 0.2)
    assert 1 - bcs_gap_J(tc, 0.2 * tc) / bcs_gap_J(tc) == pytest.approx(expected, rel=0.3)
    assert bcs_gap_J(tc, tc) == 0.0


def test_ambegaokar_baratoff():
    from jjpattern.physics.junction import ambegaokar_baratoff_V

    # Phys. Rev. Lett. 10, 486 (1963): IcRn = pi Delta / (2e) tanh(Delta / 2 k_B T).
    gap = 1.4e-3 * constants.e
    assert ambegaokar_baratoff_V(gap) == pytest.approx(np.pi / 2 * 1.4e-3, rel=1e-12)
    t = 4.2
    expected = np.pi / 2 * 1.4e-3 * np.tanh(gap / (2 * constants.k * t))
    assert ambegaokar_baratoff_V(gap, t) == pytest.approx(expected, rel=1e-12)


def test_rsj_voltage():
    from jjpattern.physics.junction import rsj_voltage

    # Overdamped RSJ (Stewart 1968, McCumber 1968): V = Rn sqrt(I^2 - Ic^2) above Ic.
    i = np.array([-3.0, -1.0, 0.0, 0.5, 2.0])
    assert np.allclose(rsj_voltage(i, 1.0, 10.0),
                       [-10 * np.sqrt(8), 0.0, 0.0, 0.0, 10 * np.sqrt(3)])


def test_forward_model_triangle_gives_sinc_squared():
    # Triangle of half-width 1/2 <-> (1/2) sinc^2(u/2) (Bracewell, tables of Fourier pairs).
    x = np.linspace(-0.5, 0.5, 20001)
    b = np.linspace(-6.0, 6.0, 241)
    got = pt.profile_pattern(b, x, 1.0 - 2.0 * np.abs(x))
    assert np.max(np.abs(got - 0.5 * np.sinc(b / 2) ** 2)) < 1e-6


def test_forward_model_gaussian_gives_gaussian():
    # exp(-x^2 / 2 s^2) <-> s sqrt(2 pi) exp(-2 pi^2 s^2 u^2) (Bracewell), with s small
    # enough that the junction's edges cut off nothing measurable.
    s = 0.08
    x = np.linspace(-0.5, 0.5, 20001)
    b = np.linspace(-6.0, 6.0, 241)
    got = pt.profile_pattern(b, x, np.exp(-0.5 * (x / s) ** 2))
    expected = s * np.sqrt(2 * np.pi) * np.exp(-2 * np.pi**2 * s**2 * b**2)
    assert np.max(np.abs(got - expected)) < 1e-6
