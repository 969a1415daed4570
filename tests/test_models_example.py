"""Worked example: a new pattern model in one file (tests/example_model.py), one line to
register it, and a fit of data made without it.

The data come from the Dynes-Fulton integral of the profile done numerically with
scipy.integrate.quad (Dynes & Fulton, Phys. Rev. B 3, 3015 (1971)), not from the
model's closed form; measured Ic is a magnitude, so the noise folds at the nodes.
"""

import example_model
import numpy as np
import pytest
from scipy import integrate, optimize

from jjpattern.errors import InputError
from jjpattern.fit.engine import fit_pattern
from jjpattern.physics.models import get_model, model_names, registered
from jjpattern.physics.models.check import check_model

PERIOD_T, OFFSET_T, IC0_A = 0.8e-3, 0.15e-3, 4e-6


def profile(x):
    """Current density over x / L in [-1/2, 1/2]."""
    return np.cos(np.pi * x)


def dynes_fulton(u):
    """|integral J(x) exp(2 pi i u x) dx| / integral J dx, by adaptive quadrature.

    The profile is even, so the sine part vanishes and the cosine-weighted QAWO
    rule of QUADPACK does the oscillatory integral over half the junction.
    """
    norm = 2 * integrate.quad(profile, 0.0, 0.5)[0]
    out = [2 * integrate.quad(profile, 0.0, 0.5, weight="cos", wvar=2 * np.pi * ui)[0]
           for ui in np.atleast_1d(u)]
    return np.abs(np.asarray(out)) / norm


def measured_sweep(rng, noise_fraction=0.02, points=700, lobes=7):
    """A down sweep (file order kept) of both polarities, Ic read as a magnitude."""
    field = np.linspace(lobes * PERIOD_T, -lobes * PERIOD_T, points) + OFFSET_T
    ic = IC0_A * dynes_fulton((field - OFFSET_T) / PERIOD_T)
    noise = noise_fraction * IC0_A
    positive = np.abs(ic + rng.normal(0.0, noise, field.size))
    negative = -np.abs(ic + rng.normal(0.0, noise, field.size))
    return field, positive, negative


def test_closed_form_matches_the_numerical_integral():
    # Bracewell's rect <-> sinc pair with the shift theorem against QUADPACK.
    u = np.linspace(-9.0, 9.0, 721)
    assert np.max(np.abs(example_model.formula(u) - dynes_fulton(u))) < 1e-9
    # Nodes at u = k + 1/2 (k >= 1): cos(pi u) vanishes there, 1 - 4 u^2 does not.
    assert np.max(dynes_fulton(example_model.node_flux(5))) < 1e-9


def test_first_side_lobe_is_minus_23_db():
    # Cosine-tapered line source: first side lobe -23 dB (antenna-theory tables of
    # aperture distributions, e.g. Balanis, Antenna Theory; from memory).
    res = optimize.minimize_scalar(lambda u: -example_model.formula(u), bounds=(1.5, 2.5),
                                   method="bounded", options={"xatol": 1e-10})
    assert 20 * np.log10(-res.fun) == pytest.approx(-23.0, abs=0.05)


def test_example_passes_the_model_self_check():
    assert check_model(example_model.MODEL) == []


def test_registered_model_is_fitted_by_name_and_gone_afterwards():
    rng = np.random.default_rng(31)
    field, positive, negative = measured_sweep(rng)
    with registered(example_model.MODEL):
        assert model_names()[-1] == "cosine-profile"
        fits = [fit_pattern(field, positive, geometry="cosine-profile"),
                fit_pattern(field, negative, geometry="cosine-profile", branch="negative")]
        uniform = fit_pattern(field, positive, geometry="rectangular")
    for fit in fits:
        assert fit.model == "cosine-profile" and fit.flags == []
        assert fit.period_T == pytest.approx(PERIOD_T, rel=0.01)
        assert fit.period_T == pytest.approx(PERIOD_T, abs=4 * fit.period_stderr_T)
        assert fit.field_offset_T == pytest.approx(OFFSET_T, abs=4 * fit.field_offset_stderr_T)
        assert fit.ic0_A == pytest.approx(IC0_A, abs=4 * fit.ic0_stderr_A)
        assert fit.nodes_observed == 12
        assert 0.8 < fit.reduced_chisq < 1.5
    # The uniform-junction model cannot describe these data: the model is what matters.
    assert uniform.reduced_chisq > 5 * fits[0].reduced_chisq
    with pytest.raises(InputError, match="unknown geometry 'cosine-profile'; use one of "
                                         "rectangular, circular, two-channel, zero-pi"):
        get_model("cosine-profile")
    with pytest.raises(InputError, match="unknown geometry"):
        fit_pattern(field, positive, geometry="cosine-profile")


def test_period_errors_of_the_new_model_are_calibrated():
    # Over noise realisations the period's pull (estimate - truth) / stderr has mean ~0
    # and standard deviation ~1 (1.09 over 200 realisations; at 3 % noise, where the
    # folded noise fills the low side lobes, it grows to 1.2).
    rng = np.random.default_rng(32)
    pulls = []
    with registered(example_model.MODEL):
        for _ in range(60):
            field, positive, _ = measured_sweep(rng, noise_fraction=0.01, points=400, lobes=5)
            fit = fit_pattern(field, positive, geometry="cosine-profile", node_floor="off")
            pulls.append((fit.period_T - PERIOD_T) / fit.period_stderr_T)
    pulls = np.asarray(pulls)
    assert abs(pulls.mean()) < 0.4
    assert 0.8 < pulls.std(ddof=1) < 1.35
