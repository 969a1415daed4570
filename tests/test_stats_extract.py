"""Extraction read on the shape the criterion crosses, and per-row uncertainties.

The maps are written here: the overdamped resistively shunted junction,
V = Rn sqrt(I^2 - Ic^2) above Ic and zero below (W. C. Stewart, Appl. Phys. Lett.
12, 277 (1968); D. E. McCumber, J. Appl. Phys. 39, 3113 (1968)), or a hysteretic
junction jumping from zero onto the ohmic branch at Ic. Bias steps of 2.5 %, 1 %
and 0.25 % of Ic0, as in the measurements that showed the half-step bias.
"""

import lmfit
import numpy as np
import pytest

from jjpattern.extract.engine import extract
from jjpattern.fit.engine import fit_pattern
from jjpattern.io.maps import IVMap

RN = 12.0
IC0 = 10e-6
STEPS = (0.025, 0.01, 0.0025)


def _out_and_back(i_max, step):
    quarter = np.arange(0.0, i_max + step / 2, step)
    return np.concatenate([quarter, quarter[-2::-1], -quarter[1:], -quarter[-2::-1]])


def _rsj(ic, bias, rng=None, noise=0.0, offset=1e-6):
    b, i = bias[None, :], ic[:, None]
    v = np.sign(b) * RN * np.sqrt(np.clip(b**2 - i**2, 0.0, None)) + offset
    return v if rng is None else v + rng.normal(0.0, noise, v.shape)


def _ivmap(field, bias, v):
    return IVMap("rsj", None, field, np.broadcast_to(bias, v.shape), v, "voltage")


def _pattern(rng, n_field=141):
    ic0 = IC0 * (1 + rng.uniform(-0.05, 0.05))
    offset = rng.uniform(-0.2, 0.2) * 1e-3
    field = np.linspace(-3.5e-3, 3.5e-3, n_field)
    return field, ic0 * np.abs(np.sinc((field - offset) / 1e-3)), ic0, offset


@pytest.mark.parametrize("step", STEPS)
def test_noise_free_rsj_reads_the_documented_current_exactly(step):
    # |V| = Rn sqrt(I^2 - Ic^2) reaches V_th at sqrt(Ic^2 + (V_th/Rn)^2) (from the formula);
    # linear interpolation across the step read 0.4-0.65 of a step below it.
    rng = np.random.default_rng(1)
    field, ic, _, _ = _pattern(rng, n_field=61)
    bias = _out_and_back(1.5 * IC0, step * IC0)
    threshold = 0.3e-6
    ex = extract(_ivmap(field, bias, _rsj(ic, bias)), threshold=threshold)
    expect = np.sqrt(ic**2 + (threshold / RN) ** 2)
    for branch in ex.branches:
        ok = branch.status == "ok"
        assert ok.sum() >= 55
        assert np.max(np.abs(branch.ic_A[ok] - expect[ok])) < 1e-6 * step * IC0
        # Retrapping on the same (overdamped) curve reads the same.
        assert np.allclose(branch.retrap_A[ok], expect[ok], rtol=0, atol=1e-6 * step * IC0)


def test_hysteretic_jump_reads_the_middle_of_the_step():
    # No point lies inside a jump: the middle of the step, uniform spread step / sqrt(12).
    rng = np.random.default_rng(2)
    field, ic, _, _ = _pattern(rng, n_field=81)
    step = 0.02 * IC0
    bias = _out_and_back(1.5 * IC0, step)
    resistive = np.abs(bias)[None, :] > ic[:, None]
    v = np.where(resistive, RN * bias[None, :], 0.0) + rng.normal(0, 0.05e-6, resistive.shape)
    ex = extract(_ivmap(field, bias, v))
    pos = ex.branches[0]
    ok = (pos.status == "ok") & (ic > 10 * step)
    error = (pos.ic_A[ok] - ic[ok]) / step
    assert np.all(np.abs(error) <= 0.5 + 1e-9)
    assert abs(error.mean()) < 0.1  # linear interpolation across the jump: -0.5
    assert np.allclose(pos.ic_uncertainty_A[ok], step / np.sqrt(12), rtol=1e-9)


def _floored(field_T, ic0_A, period_T, offset_T, floor_A):
    return np.hypot(ic0_A * np.sinc((field_T - offset_T) / period_T), floor_A)


@pytest.mark.parametrize("step", STEPS)
def test_pulls_of_ic0_from_rsj_maps(step):
    rng = np.random.default_rng(int(step * 1e4))
    plain, weighted, redchi = [], [], []
    for _ in range(7):
        field, ic, ic0, offset = _pattern(rng)
        bias = _out_and_back(1.5 * IC0, step * IC0)
        ex = extract(_ivmap(field, bias, _rsj(ic, bias, rng, 0.05e-6)))
        branch = ex.branches[0]
        ok = branch.status == "ok"
        # The fit as the pipeline runs it (equal weights, errors from the residuals).
        fit = fit_pattern(field[ok], branch.ic_A[ok])
        plain.append((fit.ic0_A - ic0) / fit.ic0_stderr_A)
        # Weighted by the extraction's own per-row uncertainty, errors not rescaled:
        # unit pulls and a reduced chi-square near 1 say the uncertainties are right.
        res = lmfit.Model(_floored).fit(
            branch.ic_A[ok] / 1e-6, field_T=field[ok] / 1e-3, ic0_A=10.0, period_T=1.0,
            offset_T=offset / 1e-3 + 0.01, floor_A=0.02,
            weights=1e-6 / branch.ic_uncertainty_A[ok], scale_covar=False)
        weighted.append((res.params["ic0_A"].value * 1e-6 - ic0)
                        / (res.params["ic0_A"].stderr * 1e-6))
        redchi.append(res.redchi)
    plain, weighted = np.asarray(plain), np.asarray(weighted)
    # Linear interpolation gave pulls of -8 to -9 here.
    assert abs(plain.mean()) < 1.0 and np.max(np.abs(plain)) < 3.0
    assert abs(weighted.mean()) < 1.0 and 0.4 < weighted.std(ddof=1) < 1.7
    assert 0.6 < np.median(redchi) < 1.4
