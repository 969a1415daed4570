"""Rounded I-V curves: the Ambegaokar-Halperin voltage and its fit, on maps simulated here.

The maps come from an overdamped Langevin simulation of the junction written in
this file (stochastic Heun steps of dphi/dtau = i - sin(phi) + sqrt(2 Gamma) xi,
seeded numpy Generator), the thermal noise at one temperature for every field
row (Gamma = kT/E_J grows as Ic falls). The voltage formula is checked against
its limits: the noise-free RSJ curve sqrt(i^2 - 1) (Stewart 1968, McCumber 1968)
and the zero-bias resistance R0/R = I0(E_J/kT)^-2 (V. Ambegaokar and
B. I. Halperin, Phys. Rev. Lett. 22, 1364 (1969); I0 from scipy.special).
"""

import numpy as np
import pytest
from scipy import constants, special

from jjpattern.extract.engine import extract
from jjpattern.extract.rounding import ah_voltage
from jjpattern.fit.engine import fit_pattern
from jjpattern.io.maps import IVMap

RN = 12.0
IC0 = 10e-6
GAMMA0 = 0.02


def _langevin(rng, i, gamma, t_total=300.0, dt=0.1, burn=20.0):
    """Time-averaged dphi/dtau for each element of ``i`` (and ``gamma``)."""
    phi = rng.uniform(0, 2 * np.pi, i.shape)
    amp = np.sqrt(2 * gamma * dt)
    steps, first = int(t_total / dt), int(burn / dt)
    start = phi
    for k in range(steps):
        kick = amp * rng.standard_normal(i.shape)
        drift = i - np.sin(phi)
        guess = phi + drift * dt + kick
        phi = phi + 0.5 * (drift + i - np.sin(guess)) * dt + kick
        if k == first:
            start = phi.copy()
    return (phi - start) / ((steps - first - 1) * dt)


def test_ah_voltage_limits():
    i = np.array([1.2, 1.5, 2.0, 3.0])
    assert np.allclose(ah_voltage(i, 1e-3), np.sqrt(i**2 - 1), rtol=2e-3)
    # Below Ic only thermally activated slips: exp(-dU/kT), dU(0.9) = 0.060 E_J, e^-60.
    assert np.all(ah_voltage(np.array([0.5, 0.9]), 1e-3) < 1e-20)
    for gamma in (0.2, 0.5):
        slope = ah_voltage(1e-4, gamma) / 1e-4
        assert slope == pytest.approx(special.i0(1 / gamma) ** -2, rel=2e-3)
    assert ah_voltage(20.0, 0.05) == pytest.approx(np.sqrt(20.0**2 - 1), rel=1e-3)


def test_ah_voltage_against_the_langevin_simulation():
    rng = np.random.default_rng(41)
    i = np.linspace(0.8, 1.5, 8)
    v = _langevin(rng, np.tile(i, (12, 1)), 0.05, t_total=250.0)
    mean, err = v.mean(axis=0), v.std(axis=0, ddof=1) / np.sqrt(v.shape[0])
    assert np.all(np.abs(mean - ah_voltage(i, 0.05)) < 4 * err + 2e-3)


def _rounded_map(rng):
    field = np.linspace(-0.45e-3, 0.45e-3, 13)  # the main lobe, at u = 0 in the middle
    ic = IC0 * np.abs(np.sinc(field / 1e-3))
    step = 0.01 * IC0
    quarter = np.arange(0.0, 1.6 * IC0 + step / 2, step)
    volts = _langevin(rng, quarter[None, :] / ic[:, None], GAMMA0 * IC0 / ic[:, None])
    volts *= ic[:, None] * RN
    index = np.arange(quarter.size)
    order = np.concatenate([index, index[-2::-1], index[1:], index[-2::-1]])
    bias = np.concatenate([quarter, quarter[-2::-1], -quarter[1:], -quarter[-2::-1]])
    v = np.sign(bias) * volts[:, order] + 1e-6 + rng.normal(0, 0.05e-6, (ic.size, bias.size))
    return IVMap("rounded", None, field, np.broadcast_to(bias, v.shape), v, "voltage")


def test_rounded_map_is_flagged_and_the_fit_recovers_ic0_and_temperature():
    ivmap = _rounded_map(np.random.default_rng(42))
    ex = extract(ivmap)
    temperature = GAMMA0 * constants.hbar * IC0 / (2 * constants.e * constants.k)
    for branch in ex.branches:
        pd = branch.phase_diffusion
        assert pd["rounded"]
        # The threshold reads Ic about 12 % low ...
        assert pd["ic_peak_extracted_A"] < 0.92 * IC0
        assert pd["shortfall_fraction"] > 0.08
        # ... and the fit of the rounded curves gets the noise-free value back: at the
        # top of the main lobe, and for Ic0 from the pattern fitted to the extraction.
        assert pd["ic_peak_noise_free_A"] == pytest.approx(IC0, rel=0.02)
        ok = branch.status == "ok"
        # Only the main lobe was simulated: the amplitude is fitted, the period is not.
        fit = fit_pattern(ivmap.field_T[ok], branch.ic_A[ok], node_floor="off")
        ic0 = fit.best_params["ic0_A"]
        assert ic0 < 0.92 * IC0
        assert ic0 * pd["ic_noise_free_over_extracted"] == pytest.approx(IC0, rel=0.02)
        assert pd["noise_temperature_K"] == pytest.approx(temperature, rel=0.25)
    flags = [f for f in ex.flags if f.code == "rounded-iv"]
    assert len(flags) == 2 and "phase diffusion" in flags[0].message
    assert ex.to_dict()["branches"][0]["phase_diffusion"]["rounded"] is True


def test_sharp_rsj_map_is_not_rounded():
    rng = np.random.default_rng(43)
    field = np.linspace(-0.45e-3, 0.45e-3, 13)
    ic = IC0 * np.abs(np.sinc(field / 1e-3))
    quarter = np.arange(0.0, 1.6 * IC0, 0.01 * IC0)
    bias = np.concatenate([quarter, quarter[-2::-1], -quarter[1:], -quarter[-2::-1]])
    v = np.sign(bias) * RN * np.sqrt(np.clip(bias**2 - ic[:, None] ** 2, 0, None))
    v = v + rng.normal(0, 0.05e-6, v.shape)
    ex = extract(IVMap("sharp", None, field, np.broadcast_to(bias, v.shape), v, "voltage"))
    for branch in ex.branches:
        pd = branch.phase_diffusion
        assert not pd["rounded"] and abs(pd["foot_sigmas"]) < 4 and abs(pd["knee_sigmas"]) < 4
    assert "rounded-iv" not in {f.code for f in ex.flags}
