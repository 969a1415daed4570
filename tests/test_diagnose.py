"""Reconstruction round trips and every shape flag on its positive and negative cases.

Patterns of known profiles come from jjpattern.synthetic.profile_case, a plain
trapezoid integral independent of the Simpson rule in the forward model.
"""

import numpy as np
import pytest

from jjpattern.diagnose.reconstruct import _MirrorTransform, node_signs, reconstruct
from jjpattern.diagnose.shape import LONG_RATIO
from jjpattern.io.sweep import Branch, Sweep
from jjpattern.physics import geometry as geo
from jjpattern.pipeline import analyze_data as analyze_sweep
from jjpattern.settings import JunctionSettings, Settings
from jjpattern.synthetic import PROFILES, profile_case


def _analyse(case, junction=None):
    sweep = Sweep(None, None, (Branch("positive", "ic", case.field_T, case.ic_A, 0, 0),))
    return analyze_sweep(sweep, Settings(junction=junction or JunctionSettings()))


def _codes(analysis):
    return {f.code for f in analysis.flags}


def _drawn(rng, profile):
    """A pattern of the families of scripts/bench_flags.py: 3-10 lobes, 500-1500 points,
    1-3 % noise (folded), offset within half a period."""
    return profile_case(rng, profile, lobes=int(rng.integers(3, 11)),
                        n_points=int(rng.integers(500, 1500)),
                        noise_fraction=rng.uniform(0.01, 0.03),
                        offset_fraction=rng.uniform(-0.5, 0.5))


@pytest.mark.parametrize(("profile", "edge"), [("uniform", 0.2), ("edges", 0.43),
                                               ("gaussian", 0.0)])
def test_symmetric_reconstruction_round_trip(profile, edge):
    # Known pairs (Bracewell): uniform <-> |sinc|, Gaussian <-> Gaussian; edges carrying
    # 3x the bulk hold 0.6 / 1.4 = 0.43 of the current in their outer 10 % each side.
    rng = np.random.default_rng(1)
    # 36 points per period; the resolution is set by the 10 lobes, not by the sampling.
    case = profile_case(rng, profile, lobes=10, n_points=801, noise_fraction=0.005,
                        offset_fraction=0.0)
    d = reconstruct(case.field_T, case.ic_A, case.period_T, case.field_offset_T,
                    case.noise_A, rng, method="symmetric", resamples=50)
    x = d["x_over_length"]
    truth = PROFILES[profile](x)
    inside = np.abs(x) < 0.35
    scale = np.trapezoid(np.clip(d["j_over_mean"], 0, None)[np.abs(x) <= 0.5], x[np.abs(x) <= 0.5])
    scale /= np.trapezoid(truth[np.abs(x) <= 0.5], x[np.abs(x) <= 0.5])
    # Away from the edges (resolution 1/22 of L) the profile comes back within 6 %.
    assert np.max(np.abs(d["j_over_mean"][inside] / scale - truth[inside])) < 0.06 * truth.max()
    assert d["edge_fraction"] == pytest.approx(edge, abs=0.05)
    assert abs(d["centre_of_mass_over_length"]) < 0.01
    assert d["resolution_over_length"] == pytest.approx(1 / 22, rel=0.05)
    assert np.all(d["j_low_over_mean"] <= d["j_high_over_mean"])


def test_node_signs_keep_the_sign_at_a_double_zero():
    # A triangle profile gives sinc^2 (Bracewell): its zeros are double and do not flip.
    u = np.linspace(-6, 6, 1201)
    signs = node_signs(u, np.sinc(u / 2) ** 2)
    assert np.all(signs == 1.0)
    flips = node_signs(u, np.abs(np.sinc(u)))
    assert np.array_equal(flips, np.where(np.floor(np.abs(u)) % 2 == 1, -1.0, 1.0)) or (
        np.mean(flips == np.where(np.floor(np.abs(u)) % 2 == 1, -1.0, 1.0)) > 0.97)


@pytest.mark.parametrize("n_in", [201, 200])
def test_mirror_transform_is_the_direct_fourier_sum(n_in):
    # The transform by even and odd halves against the defining sum (common practice),
    # with and without a point at x = 0.
    rng = np.random.default_rng(10)
    x = np.linspace(-0.5, 0.5, n_in)
    grid = np.linspace(-7.3, 9.1, 333)
    du = grid[1] - grid[0]
    j = rng.uniform(0, 1, (3, n_in))
    t = _MirrorTransform(grid, x, du)
    re, im = t.forward(j)
    direct = j @ np.exp(2j * np.pi * np.outer(x, grid)) * (x[1] - x[0])
    assert np.allclose(re + 1j * im, direct, rtol=0, atol=1e-12 * np.abs(direct).max())
    back = np.real((re + 1j * im) @ np.exp(-2j * np.pi * np.outer(grid, x)) * du)
    assert np.allclose(t.inverse(re, im), back, rtol=0, atol=1e-12 * np.abs(back).max())


def test_support_reconstruction_sees_an_asymmetric_profile():
    rng = np.random.default_rng(2)
    x = np.linspace(-0.5, 0.5, 2001)  # the step at x = 0.1 falls on a grid point
    step = np.where(x < 0.1, 1.0, 0.3)
    field = np.linspace(-8e-3, 8e-3, 1201)
    u = field / 1e-3
    ic = np.abs(np.trapezoid(step[None, :] * np.exp(2j * np.pi * np.outer(u, x)), x, axis=1))
    ic = ic + rng.normal(0, 0.005 * ic.max(), ic.size)
    sym = reconstruct(field, ic, 1e-3, 0.0, 0.005 * ic.max(), rng, method="symmetric",
                      resamples=10)
    sup = reconstruct(field, ic, 1e-3, 0.0, 0.005 * ic.max(), rng, method="support",
                      resamples=4)
    # The symmetric method cannot move the centre of mass; retrieval does (either way,
    # because of the mirror ambiguity). The true centre sits at -0.13 L.
    assert abs(sym["centre_of_mass_over_length"]) < 1e-6
    assert abs(sup["centre_of_mass_over_length"]) > 0.05
    assert "mirror" in sup["assumption"]


def test_uniform_patterns_raise_no_shape_flags():
    rng = np.random.default_rng(3)
    for _ in range(12):
        case = _drawn(rng, "uniform")
        assert _codes(_analyse(case)) == set()


@pytest.mark.parametrize(("profile", "code"), [("edges", "edge-current"),
                                               ("gaussian", "center-current"),
                                               ("gradient", "nodes-lifted"),
                                               ("zero-pi", "central-minimum")])
def test_clear_cases_raise_their_flag(profile, code):
    rng = np.random.default_rng(4)
    for _ in range(5):
        case = _drawn(rng, profile)
        flags = _analyse(case).flags
        hit = [f for f in flags if f.code == code]
        assert hit, (profile, [f.code for f in flags])
        assert hit[0].message and hit[0].evidence


def test_withheld_fit_of_lifted_nodes_still_raises_nodes_lifted():
    # At 0.5 % noise the sinc with a floor misses a 40 % gradient (reduced chi-square about
    # 13), so its numbers are withheld; the shape flags read it at its trial numbers, and
    # the node floor must be among them (the floor once stayed behind, and 3 % of the
    # gradient cases lost nodes-lifted).
    for seed in (0, 1):
        case = profile_case(np.random.default_rng(seed), "gradient", lobes=6, n_points=1400,
                            noise_fraction=0.005, offset_fraction=0.2)
        analysis = _analyse(case)
        fit = analysis.fits[0]
        assert fit.withheld["reason"] == "poor-fit" and fit.reduced_chisq > 8
        assert fit.period_T is None and fit.node_floor_A is None
        lifted = [f for f in analysis.flags if f.code == "nodes-lifted"]
        assert lifted, _codes(analysis)
        # The profile's nodes: |F(u)| of 1 + 0.4 (2 x) at u = n is 0.4/(pi n) (a plain
        # integral, from memory), so the first node floor is 0.127 of the centre; the fit
        # reads an average floor over the nodes in the window, between the far and near ones.
        assert 0.4 / (np.pi * 6) < lifted[0].evidence["floor_over_ic_max"] < 0.4 / np.pi
        # Edges carrying 3x the bulk miss the sinc as badly (its floor fills nodes that are
        # only displaced, to u = 0.79 here); their data reach zero, so no nodes-lifted.
        edges = _analyse(profile_case(np.random.default_rng(seed), "edges", lobes=6,
                                      n_points=1400, noise_fraction=0.005,
                                      offset_fraction=0.2))
        assert edges.fits[0].withheld["reason"] == "poor-fit"
        assert _codes(edges) == {"poor-fit", "edge-current"}


def _bench_flags():
    """scripts/bench_flags.py as a module (loaded by its path: scripts/ is no package)."""
    import importlib.util
    from pathlib import Path

    path = Path(__file__).resolve().parents[1] / "scripts" / "bench_flags.py"
    spec = importlib.util.spec_from_file_location("bench_flags", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_flag_benchmark_fits_as_the_pipeline_does():
    # The benchmark must raise what the pipeline raises (it once fitted another model than
    # the pipeline's). Gaussian profiles are the telling case: a long overlap junction
    # bends towards them (set aside by the runs test), no model fits, the rectangle is
    # reported withheld and center-current stays. Seed 5 draws three such patterns first.
    bench = _bench_flags()
    rng = np.random.default_rng(5)
    for _ in range(3):
        case = _drawn(rng, "gaussian")
        codes = bench.flags_of(case, [])
        assert "center-current" in codes
        assert codes == _codes(_analyse(case))


def test_field_asymmetry_and_branch_asymmetry():
    rng = np.random.default_rng(5)
    case = profile_case(rng, "uniform", lobes=5, n_points=900, noise_fraction=0.01,
                        offset_fraction=0.0)
    # A field-dependent tilt (as from self-field): Ic(B0 + b) no longer equals Ic(B0 - b).
    tilted = case.ic_A * (1 + 0.15 * case.field_T / case.field_T.max())
    branches = (Branch("positive", "a", case.field_T, tilted, 0, 0),
                Branch("negative", "b", case.field_T, case.ic_A * 0.95, 0, 0))
    analysis = analyze_sweep(Sweep(None, None, branches))
    codes = [(f.code, f.branch) for f in analysis.flags]
    assert ("field-asymmetry", "positive") in codes
    assert ("field-asymmetry", "negative") not in codes
    assert ("branch-asymmetry", None) in codes


def test_period_drift_from_a_nonlinear_field_axis():
    rng = np.random.default_rng(6)
    case = profile_case(rng, "uniform", lobes=8, n_points=1200, noise_fraction=0.01)
    # The magnet's field grows 8 % faster than recorded on the positive side.
    recorded = np.where(case.field_T > 0, case.field_T / 1.08, case.field_T)
    analysis = _analyse(type(case)(recorded, case.ic_A, *list(case.__dict__.values())[2:]))
    assert "period-drift" in _codes(analysis)
    assert "period-drift" not in _codes(_analyse(case))


def test_no_period_drift_on_exact_patterns():
    # Exact |sinc| (Fraunhofer, common practice) without noise: both halves fit the same
    # period to 1e-15 of it, and the standard errors of rounding residuals made that
    # 37-41 "sigmas". The difference must also be material (over 0.5 % of the period).
    from jjpattern.diagnose.run import _half_periods
    from jjpattern.diagnose.shape import DRIFT_FRACTION, drift_flag
    from jjpattern.fit.engine import fit_pattern

    for n, lobes, offset in ((1360, 10, 0.4182), (632, 4, -0.2739), (1282, 7, 0.0401)):
        field = np.linspace(-(lobes + 1) * 1e-3, (lobes + 1) * 1e-3, n) + offset * 1e-3
        ic = 1e-6 * np.abs(np.sinc((field - offset * 1e-3) / 1e-3))
        fit = fit_pattern(field, ic)
        halves = _half_periods(fit)
        assert abs(halves[0][0] - halves[1][0]) < 1e-12 * fit.period_T
        assert drift_flag(fit, halves) == []
    # Beyond the fraction and the standard errors it is raised, with both in evidence.
    flag, = drift_flag(fit, [(1e-3, 1e-6), (1e-3 * (1 + 2 * DRIFT_FRACTION), 1e-6)])
    assert flag.evidence["relative_difference"] == pytest.approx(2 * DRIFT_FRACTION, rel=0.01)
    assert flag.evidence["difference_sigmas"] == pytest.approx(1e-5 / np.hypot(1e-6, 1e-6),
                                                               abs=0.01)


def test_long_junction_from_geometry_and_jc():
    rng = np.random.default_rng(7)
    case = profile_case(rng, "uniform", lobes=4, n_points=600, noise_fraction=0.01)
    ds = geo.current_thickness_m(2e-9, 90e-9, 200e-9)
    lam_j = geo.josephson_depth_m(1e8, ds)  # 10 kA/cm^2
    for length, expect in ((0.5 * lam_j, False), (3 * lam_j, True)):
        inputs = JunctionSettings(length_m=length, width_m=length, barrier_m=2e-9,
                                  electrode_m=(200e-9,), london_m=(90e-9,), jc_A_m2=1e8)
        analysis = _analyse(case, junction=inputs)
        assert ("long-junction" in _codes(analysis)) is expect
        assert analysis.geometry["length_over_josephson_depth"] == pytest.approx(
            length / lam_j, rel=1e-9)
        assert bool(analysis.geometry["length_over_josephson_depth"] > LONG_RATIO) is expect


def test_equal_branches_raise_no_branch_asymmetry():
    rng = np.random.default_rng(8)
    case = profile_case(rng, "uniform", lobes=5, n_points=900, noise_fraction=0.01)
    other = profile_case(rng, "uniform", lobes=5, n_points=900, noise_fraction=0.01)
    branches = (Branch("positive", "a", case.field_T, case.ic_A, 0, 0),
                Branch("negative", "b", other.field_T, other.ic_A, 0, 0))
    assert "branch-asymmetry" not in _codes(analyze_sweep(Sweep(None, None, branches)))


def test_geometry_numbers_carry_the_period_error():
    rng = np.random.default_rng(9)
    case = profile_case(rng, "uniform", lobes=5, n_points=800, noise_fraction=0.02)
    inputs = JunctionSettings(length_m=10e-6, width_m=10e-6, barrier_m=2e-9,
                              electrode_m=(300e-9,))
    analysis = _analyse(case, junction=inputs)
    fit, geom = analysis.fits[0], analysis.geometry
    # d' = Phi0 / (P L): its relative error is the period's.
    assert geom["magnetic_thickness_m"] == pytest.approx(
        geo.PHI0_WB / (fit.period_T * 10e-6), rel=1e-12)
    assert geom["magnetic_thickness_stderr_m"] / geom["magnetic_thickness_m"] == pytest.approx(
        fit.period_stderr_T / fit.period_T, rel=1e-3)
    assert geom["london_depth_from_period_stderr_m"] > 0
    # Jc = Ic0 / (L W) carries Ic0's relative error.
    assert geom["jc_from_ic0_stderr_A_m2"] / geom["jc_from_ic0_A_m2"] == pytest.approx(
        fit.ic0_stderr_A / fit.ic0_A, rel=1e-3)
