"""Retrapping over switching at the main lobe, with a generator written here.

An underdamped junction of fixed R and C has beta_c = 2 pi Ic R^2 C / Phi0
proportional to Ic, and for beta_c >> 1 retraps at I_r = (4/pi) Ic / sqrt(beta_c)
(W. C. Stewart, Appl. Phys. Lett. 12, 277 (1968); D. E. McCumber, J. Appl. Phys.
39, 3113 (1968)): I_r = (4/pi) sqrt(Ic Ic0 / beta_c0), capped at Ic (no hysteresis)
near the nodes. The map switches from zero onto the ohmic branch at Ic going
away from zero and drops back at I_r coming back, with voltage noise.
"""

import numpy as np
import pytest

from jjpattern.extract.engine import extract
from jjpattern.extract.hysteresis import main_lobe_rows
from jjpattern.io.maps import IVMap

RN = 10.0
IC0 = 8e-6
BETA_C0 = 10.0
#: |sinc(u)| = 1/2 at u = 0.6034 (half width at half maximum; from the formula).
SINC_HWHM = 0.60335


def _map(rng, field, ic, retrap):
    quarter = np.arange(0.0, 1.4 * IC0, 0.004 * IC0)
    bias = np.concatenate([quarter, quarter[-2::-1], -quarter[1:], -quarter[-2::-1]])
    mag = np.abs(bias)
    outbound = np.concatenate([[True], np.diff(mag) > 0])[None, :]
    resistive = np.where(outbound, mag[None, :] > ic[:, None], mag[None, :] > retrap[:, None])
    v = np.where(resistive, RN * bias[None, :], 0.0) + rng.normal(0, 0.05e-6, resistive.shape)
    return IVMap("underdamped", None, field, np.broadcast_to(bias, v.shape), v, "voltage")


def test_main_lobe_ratio_and_beta_c_estimate():
    rng = np.random.default_rng(31)
    period, offset = 1e-3, 0.12e-3
    field = np.linspace(-4.5e-3, 4.5e-3, 301)
    u = (field - offset) / period
    ic = IC0 * np.abs(np.sinc(u))
    retrap = np.minimum(ic, 4 / np.pi * np.sqrt(ic * IC0 / BETA_C0))
    ex = extract(_map(rng, field, ic, retrap))
    lobe = np.abs(u) < SINC_HWHM
    truth = retrap[lobe] / ic[lobe]
    for branch in ex.branches:
        summary = branch.retrapping
        assert summary["main_lobe_rows"] == pytest.approx(lobe.sum(), abs=2)
        assert summary["retrapping_over_switching_main_lobe"] == pytest.approx(
            np.median(truth), abs=0.02)
        assert summary["retrapping_over_switching_main_lobe_spread"] == pytest.approx(
            np.std(truth, ddof=1), rel=0.3)
        # At the largest Ic the ratio is 4 / (pi sqrt(10)) = 0.403.
        assert summary["beta_c_estimate"] == pytest.approx(BETA_C0, rel=0.05)
        # Over every row the side lobes (beta_c small, ratio near 1) dominate.
        assert branch.retrapping_ratio > 0.6
    block = ex.to_dict()["branches"][0]
    assert block["beta_c_method"].startswith("estimate")
    flag = next(f for f in ex.flags if f.code == "hysteretic")
    assert flag.evidence["retrapping_over_switching_main_lobe"] < 0.5


def test_no_beta_c_without_clear_hysteresis():
    rng = np.random.default_rng(32)
    field = np.linspace(-3e-3, 3e-3, 121)
    ic = IC0 * np.abs(np.sinc(field / 1e-3))
    ex = extract(_map(rng, field, ic, 0.9 * ic))
    summary = ex.branches[0].retrapping
    assert summary["retrapping_over_switching_main_lobe"] == pytest.approx(0.9, abs=0.01)
    assert summary["beta_c_estimate"] is None


def test_main_lobe_rows_walk_in_field_order_past_censored_rows():
    field = np.array([3.0, -2.0, 0.0, 1.0, -1.0, 2.0, -3.0])
    ic = np.array([0.1, 0.2, np.nan, 0.7, 0.9, 0.3, 0.6])
    # In field order: -3 (0.6), -2 (0.2), -1 (0.9), 0 (censored), 1 (0.7), 2 (0.3), 3 (0.1).
    rows = main_lobe_rows(field, ic)
    assert rows.tolist() == [False, False, False, True, True, False, False]
