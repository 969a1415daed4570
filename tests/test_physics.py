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
    f = pt.PATTERNS[name]
    b = np.linspace(-7.3, 7.3, 1001)
    base = f(b, ic0_A=2.5, period_T=1.7, field_offset_T=0.4)
    assert f(0.4, ic0_A=2.5, period_T=1.7, field_offset_T=0.4) == pytest.approx(2.5, rel=1e-12)
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
