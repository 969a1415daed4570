"""Automatic model choice, and no numbers from a model that does not fit.

The patterns are written out here: the 0-pi pattern Ic0 |sin^2(pi u/2) / (pi u/2)| from
the Dynes-Fulton integral of a profile stepped by pi halfway across (its maxima, 0.7246
Ic0 at u = +-0.742, are checked numerically in test_geometry.py); two parallel channels
(I1 + I2) sqrt(cos^2(pi u) + a^2 sin^2(pi u)) (the two-junction interferometer, common
practice); the uniform junction |sinc(u)|. Measured Ic is a magnitude (|Ic + noise|,
folding at the nodes), both polarities, swept down in file order.
"""

import numpy as np
import pytest

from jjpattern.fit.choice import MARGIN
from jjpattern.fit.engine import fit_pattern
from jjpattern.fit.runs import runs_z
from jjpattern.io.sweep import Branch, Sweep
from jjpattern.pipeline import analyze_data
from jjpattern.report.methods import methods_paragraph
from jjpattern.report.summary import choice_sentence, render_summary

PERIOD_T, OFFSET_T, IC0_A = 1.0e-3, 0.12e-3, 72.5e-6 / 0.7246


def zero_pi(u):
    x = 0.5 * np.pi * u
    return np.abs(np.sin(x) * np.sinc(0.5 * u))


def two_channel(u, asymmetry=0.3):
    return np.hypot(np.cos(np.pi * u), asymmetry * np.sin(np.pi * u))


def sweep(rng, shape, half_width, points=700, noise=0.01, period=PERIOD_T, offset=OFFSET_T):
    """Field swept down, both polarities, |Ic + noise| (noise relative to Ic0)."""
    field = np.linspace(half_width, -half_width, points) * period + offset
    ic = IC0_A * shape((field - offset) / period)
    sigma = noise * IC0_A
    return (field, np.abs(ic + rng.normal(0, sigma, ic.size)),
            -np.abs(ic + rng.normal(0, sigma, ic.size)))


def test_zero_pi_pattern_is_recognised_and_reported_in_its_own_terms():
    rng = np.random.default_rng(1)
    field, positive, negative = sweep(rng, zero_pi, 9.3)
    for branch, ic in (("positive", positive), ("negative", negative)):
        fit = fit_pattern(field, ic, branch=branch)
        assert fit.model == "zero-pi"
        assert fit.model_choice["decision"] == "clear"
        assert fit.period_T == pytest.approx(PERIOD_T, rel=0.01)
        # Ic0 is the current without the pi step; the pattern's own maximum is 0.7246 of it.
        assert fit.ic0_A == pytest.approx(IC0_A, rel=0.02)
        assert fit.derived["pattern_max_A"] == pytest.approx(72.5e-6, rel=0.02)
        assert fit.reduced_chisq < 1.5


def test_two_channel_pattern_is_recognised_under_auto():
    rng = np.random.default_rng(2)
    field, positive, negative = sweep(rng, two_channel, 6.4)
    for ic in (positive, negative):
        fit = fit_pattern(field, ic)
        assert fit.model == "two-channel"
        assert fit.period_T == pytest.approx(PERIOD_T, rel=0.01)
        assert fit.asymmetry == pytest.approx(0.3, abs=0.03)
        assert "main-lobe-ambiguous" not in {f.code for f in fit.flags}


def test_uniform_short_junctions_choose_the_rectangle():
    # The in-suite part of the false-choice rate (scripts/bench_fit.py runs 300 cases):
    # 40 uniform junctions at 0.5-3 % noise, 2-12 lobes, 300-1200 points, all rectangular.
    rng = np.random.default_rng(3)
    wrong = []
    for _ in range(40):
        lobes = rng.integers(2, 13)
        points = int(rng.integers(max(300, 30 * lobes), 1201))
        period = 10 ** rng.uniform(-5, -2)
        field, ic, _ = sweep(rng, lambda u: np.abs(np.sinc(u)), lobes + 0.6, points=points,
                             noise=rng.uniform(0.005, 0.03), period=period,
                             offset=rng.uniform(-0.4, 0.4) * period)
        fit = fit_pattern(field, ic)
        if fit.model != "rectangular":
            wrong.append((lobes, points, fit.model, fit.model_choice["candidates"][0]))
        else:
            assert fit.period_T == pytest.approx(period, rel=0.02)
    assert wrong == []


def test_choice_block_names_winner_runner_up_values_and_margin():
    rng = np.random.default_rng(4)
    field, ic, _ = sweep(rng, zero_pi, 9.3, noise=0.02)
    block = fit_pattern(field, ic).model_choice
    assert block["criterion"] == "BIC" and block["margin"] == MARGIN
    names = [c["model"] for c in block["candidates"]]
    assert names[0] == block["chosen"] == "zero-pi"
    assert block["runner_up"] == names[1]
    bic = {c["model"]: c["bic"] for c in block["candidates"]}
    assert block["criterion_difference"] == pytest.approx(bic[names[1]] - bic["zero-pi"])
    for c in block["candidates"]:
        # BIC = chi^2 / sigma^2 + k ln(n), sigma the model-free noise.
        assert c["bic"] == pytest.approx(c["chisq_over_noise"] + c["parameters"]
                                         * np.log(block["points"]))


def test_a_near_tie_reports_the_simpler_model():
    # A uniform junction: a long junction of vanishing length is the same pattern with one
    # more parameter, so it can only come close; the simpler rectangle is reported.
    rng = np.random.default_rng(5)
    field, ic, _ = sweep(rng, lambda u: np.abs(np.sinc(u)), 6.5, noise=0.02)
    block = fit_pattern(field, ic).model_choice
    assert block["chosen"] == "rectangular"
    close = [c for c in block["candidates"] if c["model"] != "rectangular"
             and c["bic"] - block["candidates"][0]["bic"] < MARGIN]
    assert block["decision"] == ("near tie" if close else "clear")


def _lopsided(u):
    # The field scale changes by 60 % across the centre (as from a magnet that is not
    # linear): no model with one period describes both sides.
    return np.abs(np.sinc(np.where(u < 0, u, u / 1.6)))


def test_a_pattern_no_model_fits_gives_nulls_a_flag_and_words(tmp_path):
    rng = np.random.default_rng(6)
    field, positive, negative = sweep(rng, _lopsided, 6.3)
    branches = (Branch("positive", "Ic+", field, positive, 0, 0),
                Branch("negative", "Ic-", field, negative, 0, 0))
    result = analyze_data(Sweep(None, None, branches))
    for fit in result.fits:
        for key in ("period_T", "ic0_A", "field_offset_T", "effective_area_m2",
                    "period_stderr_T", "ic0_stderr_A"):
            assert getattr(fit, key) is None, key
        assert fit.withheld["reason"] == "poor-fit" and fit.reduced_chisq > 4
        # No curve: the trial parameters are kept, but the model gives no values.
        assert np.all(np.isnan(fit.model_A(fit.field_T))) and fit.best_params["period_T"] > 0
    poor = [f for f in result.flags if f.code == "poor-fit"]
    assert len(poor) == 2 and all(f.severity == "error" for f in poor)
    assert result.current_density == {}
    # The document reads back with the nulls and the reason.
    doc = result.to_dict()
    assert doc["fits"][0]["period_T"] is None and doc["fits"][0]["withheld"]["threshold"] == 4
    # In words, in the summary, the methods and the HTML; no curve in the figure.
    summary = render_summary(result)
    assert "numbers withheld" in summary and "misses the data" in summary
    methods = methods_paragraph(result, "")
    assert "no period, field offset or Ic0 is given" in methods
    from matplotlib import pyplot as plt

    from jjpattern.report.plot import pattern_figure

    fig = pattern_figure(result.fits)
    labels = [line.get_label() for line in fig.axes[0].get_lines()]
    plt.close(fig)
    assert not any(label.startswith("fit") for label in labels)
    assert "positive: no model fits, none drawn" in labels
    from jjpattern.report import html

    page = html.headline_table(result.fits) + html._model_notes(result.fits)
    assert page.count("withheld") >= 10 and "not drawn" in page


def test_flag_messages_list_their_real_causes():
    from jjpattern.flags import CATALOGUE

    lifted = CATALOGUE["nodes-lifted"][1]
    assert "self-field" in lifted and "long-inline" in lifted
    assert "--model two-channel" in CATALOGUE["edge-current"][1]
    assert "--model two-channel" in CATALOGUE["main-lobe-ambiguous"][1]
    assert "--model zero-pi" in CATALOGUE["central-minimum"][1]
    long_text = CATALOGUE["long-junction"][1]
    assert "not the period" in long_text and "long-inline" in long_text
    severity, poor = CATALOGUE["poor-fit"]
    assert severity == "error" and "withheld" in poor


def _gaussian_profile(u, width=0.2):
    """|integral of J(x) exp(2 pi i u x) dx| over the junction x in [-1/2, 1/2] for a
    Gaussian J of standard deviation ``width`` (Dynes-Fulton; the integral by the
    trapezoid rule here, independent of the project's reconstruction)."""
    x = np.linspace(-0.5, 0.5, 801)
    j = np.exp(-0.5 * (x / width) ** 2)
    kernel = np.cos(2 * np.pi * np.outer(u, x))  # J even: the sine part vanishes
    return np.abs(np.trapezoid(kernel * j, x, axis=1)) / np.trapezoid(j, x)


def test_a_model_that_only_bends_towards_the_data_is_set_aside():
    # A Gaussian current profile is no long junction, though a long overlap junction at
    # large L / lambda_J comes within a reduced chi-square of 1.8 at 3 % noise; its
    # residuals keep one sign over long stretches (runs test), so it is set aside, no
    # other model fits, and the reference rectangle is reported with its numbers withheld.
    rng = np.random.default_rng(8)
    field, positive, _ = sweep(rng, lambda u: _gaussian_profile(u, 0.15), 4.4, points=900,
                               noise=0.03)
    fit = fit_pattern(field, positive)
    block = fit.model_choice
    assert block["decision"] == "none fits" and fit.model == "rectangular"
    assert fit.period_T is None and fit.withheld["reason"] == "poor-fit"
    aside = {a["model"]: a for a in block["set_aside"]}
    assert aside["long-overlap"]["reduced_chisq"] < 2.0
    assert aside["long-overlap"]["residual_runs_z"] < -4.0
    assert "runs test" in aside["long-overlap"]["reason"]
    for c in block["candidates"]:
        assert c["reduced_chisq"] == pytest.approx(
            c["chisq_over_noise"] / (block["points"] - c["parameters"]), rel=1e-9)
    words = choice_sentence(block)
    assert "no model describes the data" in words and "set aside" in words
    assert "long-overlap (residual sign runs z = " in words


def test_runs_test_against_its_exact_small_sample_values():
    # Wald and Wolfowitz (1940): for n1 = n2 = 10 the number of runs has mean 11 and
    # variance 2 n1 n2 (2 n1 n2 - n) / (n^2 (n - 1)) = 200 * 180 / (400 * 19) = 4.7368.
    signs = np.array([1.0] * 5 + [-1.0] * 5 + [1.0] * 5 + [-1.0] * 5)  # 4 runs
    assert runs_z(signs) == pytest.approx((4 - 11) / np.sqrt(4.7368421), rel=1e-6)
    alternating = np.tile([1.0, -1.0], 10)  # 20 runs
    assert runs_z(alternating) == pytest.approx((20 - 11) / np.sqrt(4.7368421), rel=1e-6)
    assert runs_z(np.ones(30)) == 0.0  # one sign only: no test


def test_rivals_start_from_the_reference_fit_when_it_describes_the_data():
    rng = np.random.default_rng(9)
    field, positive, _ = sweep(rng, lambda u: np.abs(np.sinc(u)), 5.4, noise=0.02)
    block = fit_pattern(field, positive).model_choice
    assert block["rival_starts"].startswith("from the rectangular fit")
    # A 0-pi pattern: its own model fits from the rectangle's start (no scans needed).
    field, positive, _ = sweep(rng, zero_pi, 9.3)
    fit = fit_pattern(field, positive)
    assert fit.model == "zero-pi" and fit.period_T == pytest.approx(PERIOD_T, rel=0.01)


def _disc(u):
    """A uniform disc: |2 J1(pi u) / (pi u)| (the Airy pattern; scipy.special.j1)."""
    from scipy.special import j1

    v = np.pi * np.where(u == 0, 1e-12, u)
    return np.abs(2 * j1(v) / v)


def test_a_periodic_pattern_is_found_where_the_rectangle_also_fits_loosely():
    # Two channels at 6 % noise: the rectangle, its main lobe placed far outside, reaches a
    # reduced chi-square near 1.1, yet the periodic model is far better (BIC); it must be
    # started from its own scan, not from the rectangle's (whose lobes sit half a period off).
    rng = np.random.default_rng(12)
    field, positive, _ = sweep(rng, two_channel, 5.0, points=2000, noise=0.06)
    fit = fit_pattern(field, positive)
    assert fit.model == "two-channel" and fit.model_choice["decision"] == "clear"
    assert fit.period_T == pytest.approx(PERIOD_T, rel=0.01)


def test_runs_test_does_not_reject_a_small_mismatch_for_having_many_points():
    # A disc with a tenth of a rectangle mixed in, 10,000 points at 2 % noise: the disc's
    # residual runs are significant (z about -8) but not material (about 0.9 of the
    # expected runs), so it is chosen, not set aside.
    rng = np.random.default_rng(3)
    field, positive, _ = sweep(rng, lambda u: 0.9 * _disc(u) + 0.1 * np.abs(np.sinc(1.1 * u)),
                               5.0, points=10000, noise=0.02)
    fit = fit_pattern(field, positive)
    assert fit.model == "circular" and fit.model_choice["set_aside"] == []
    entry = next(c for c in fit.model_choice["candidates"] if c["model"] == "circular")
    assert entry["residual_runs_z"] < -4 and entry["residual_runs_ratio"] > 0.85
