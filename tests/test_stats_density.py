"""The current density's numbers against a uniform junction through the same reconstruction.

Data: uniform rectangular patterns from jjpattern.synthetic.profile_case (a plain
trapezoid Fourier integral of J(x) = 1), and the pattern of a uniform disc,
|2 J1(pi u) / (pi u)| with J1 from scipy.special (Airy; common practice), whose
current projected on x is J(x) proportional to sqrt(1/4 - x^2): an exactly
uniform disc keeps 0.104 of its current in the outer 10 % each side (from the
area of a circular segment).
"""

import numpy as np
import pytest
from scipy import special

from jjpattern.diagnose.reconstruct import reconstruct
from jjpattern.io.sweep import Branch, Sweep
from jjpattern.pipeline import analyze_data
from jjpattern.report.html import density_section
from jjpattern.report.plot import density_figure
from jjpattern.report.summary import render_summary
from jjpattern.synthetic import profile_case


def _segment_fraction(a=0.5, edge=0.4):
    def primitive(x):
        return 0.5 * (x * np.sqrt(a**2 - x**2) + a**2 * np.arcsin(x / a))
    return 2 * (primitive(a) - primitive(edge)) / (np.pi * a**2 / 2)


@pytest.mark.parametrize("lobes", [3, 10])
def test_uniform_rectangle_reads_its_own_reference(lobes):
    rng = np.random.default_rng(51)
    case = profile_case(rng, "uniform", lobes=lobes, n_points=900, noise_fraction=0.005,
                        offset_fraction=0.1)
    d = reconstruct(case.field_T, case.ic_A, case.period_T, case.field_offset_T,
                    case.noise_A, rng, resamples=40)
    ref = d["uniform_reference"]
    assert ref["model"] == "rectangular"
    # Truncation and the window round the edges: a uniform junction does not read 0.2 ...
    assert ref["edge_fraction"] < 0.195
    # ... and the measured uniform junction reads what the reference says.
    assert d["edge_fraction"] == pytest.approx(ref["edge_fraction"],
                                               abs=max(0.01, 3 * d["edge_fraction_stderr"]))
    assert d["j_uniform_over_mean"].shape == d["j_over_mean"].shape


def test_reference_depends_on_the_window():
    rng = np.random.default_rng(52)
    refs = []
    for lobes in (3, 10):
        case = profile_case(rng, "uniform", lobes=lobes, n_points=900, noise_fraction=0.005)
        refs.append(reconstruct(case.field_T, case.ic_A, case.period_T, case.field_offset_T,
                                case.noise_A, rng, resamples=10)["uniform_reference"])
    # Fewer lobes, coarser resolution, more of the edge current smeared inwards.
    assert refs[0]["edge_fraction"] < refs[1]["edge_fraction"] - 0.01


def test_uniform_disc_against_its_own_reference_and_the_segment_area():
    rng = np.random.default_rng(53)
    field = np.linspace(-8e-3, 8e-3, 1200)
    u = np.where(field == 0, 1e-12, field / 1e-3)
    ic = np.abs(2 * special.j1(np.pi * u) / (np.pi * u))
    ic = np.abs(ic + rng.normal(0, 0.003, ic.size))
    d = reconstruct(field, ic, 1e-3, 0.0, 0.003, rng, resamples=20, model="circular")
    ref = d["uniform_reference"]
    assert _segment_fraction() == pytest.approx(0.104, abs=5e-4)
    assert ref["edge_fraction"] == pytest.approx(_segment_fraction(), abs=0.03)
    assert d["edge_fraction"] == pytest.approx(ref["edge_fraction"], abs=0.01)


def test_report_cites_the_reference_and_draws_inside_the_junction():
    rng = np.random.default_rng(54)
    case = profile_case(rng, "uniform", lobes=5, n_points=700, noise_fraction=0.01)
    result = analyze_data(Sweep(None, None, (
        Branch("positive", "ic", case.field_T, case.ic_A, 0, 0),)))
    d = result.current_density["positive"]
    ref = d["uniform_reference"]["edge_fraction"]
    text = render_summary(result)
    assert f"{ref:.3f} for a uniform junction through the same reconstruction" in text
    assert "0.2 for" not in text
    _, _, html = density_section(result.current_density, b"", {"all": []})
    assert f"(uniform junction: {ref:.3f})" in html
    fig = density_figure(result.current_density)
    for line in fig.axes[0].get_lines():
        x = np.asarray(line.get_xdata(), dtype=float)
        if x.size > 2:  # the profiles, not the edge markers
            assert np.all(np.abs(x) <= 0.5)


def test_numbers_of_an_exact_top_hat():
    # J = 1 on |x| <= 1/2: a tenth of the current in each outer 10 % (from the definition);
    # the grid points on the edges count once each side.
    from jjpattern.diagnose.reconstruct import profile_numbers

    x = np.linspace(-0.75, 0.75, 301)
    numbers = profile_numbers(x, np.where(np.abs(x) <= 0.5, 1.0, 0.0))
    assert numbers["edge_fraction_left"] == pytest.approx(0.1, abs=1e-12)
    assert numbers["edge_fraction_right"] == pytest.approx(0.1, abs=1e-12)
    assert numbers["nonuniformity"] == pytest.approx(0.0, abs=1e-12)


def test_diagnose_reads_a_fitted_disc_against_a_uniform_disc():
    # Through the fit: a circular fit's density is read against a uniform disc (0.104 in
    # each outer 10 %, the circular segment), not against a rectangle (about 0.19).
    from jjpattern.diagnose.run import diagnose
    from jjpattern.fit.engine import fit_pattern

    rng = np.random.default_rng(55)
    field = np.linspace(-8e-3, 8e-3, 1200) + 0.1e-3
    u = (field - 0.1e-3) / 1e-3
    ic = 1e-6 * np.abs(2 * special.j1(np.pi * u) / (np.pi * u))
    ic = np.abs(ic + rng.normal(0, 0.003e-6, ic.size))
    fit = fit_pattern(field, ic, geometry="circular")
    d = diagnose([fit])["current_density"]["positive"]
    ref = d["uniform_reference"]
    assert ref["model"] == "circular"
    assert ref["edge_fraction"] == pytest.approx(_segment_fraction(), abs=0.03)
    assert d["edge_fraction"] == pytest.approx(ref["edge_fraction"], abs=0.01)
