"""Chip statistics on synthetic chips generated here, independently of the code under test.

Each junction's Ic0 and period are drawn from chosen d_m, Jc and linewidth offset
delta with realistic scatter: Jc varies by 2 % between junctions (log-normal), and
each fitted number carries its own relative error of 0.3-1 %, applied as noise.
Measured Ic0 and periods are magnitudes, as the fits report them.
"""

import json
import math

import numpy as np
import pandas as pd
import pytest
from scipy.constants import physical_constants

from jjpattern.batch.chipstats import chip_summaries, chip_summary, junction_trends

# Flux quantum h/2e from scipy.constants (CODATA), not from the package.
PHI0 = physical_constants["mag. flux quantum"][0]
# Nb/AlOx/Nb: d' = d + 2 lambda tanh(t / 2 lambda) (Weihnacht 1969), d = 2 nm,
# lambda = 90 nm, t = 150 nm: typical numbers, from memory.
DM = 2e-9 + 2 * 90e-9 * math.tanh(150e-9 / (2 * 90e-9))
JC = 1.0e7  # 1 kA/cm^2
DELTA = 0.25e-6
LENGTHS = np.array([2, 3, 4, 6, 8, 12, 16, 20]) * 1e-6
WIDTHS = np.array([2, 4, 8]) * 1e-6


def make_chip(rng, reps=3, delta=DELTA, jc_cv=0.02, lengths=LENGTHS, widths=WIDTHS,
              chip="KT-14"):
    length = np.tile(np.repeat(lengths, widths.size), reps)
    width = np.tile(widths, lengths.size * reps)
    n = length.size
    ic_true = JC * np.exp(rng.normal(0, jc_cv, n)) * (length - delta) * (width - delta)
    period_true = PHI0 / (DM * (length - delta))
    ic_err = rng.uniform(0.003, 0.01, n) * ic_true
    p_err = rng.uniform(0.003, 0.01, n) * period_true
    return pd.DataFrame({
        "junction": [f"J{i + 1:03d}" for i in range(n)], "chip": chip, "status": "ok",
        "ic0_A": np.abs(ic_true + rng.normal(0, ic_err)), "ic0_stderr_A": ic_err,
        "period_T": np.abs(period_true + rng.normal(0, p_err)), "period_stderr_T": p_err,
        "length_m": length, "width_m": width, "area_m2": length * width,
        "flags": [[] for _ in range(n)],
    })


def test_recovers_magnetic_thickness_jc_and_linewidth_offset():
    for seed in range(5):
        s = chip_summary(make_chip(np.random.default_rng(seed)))
        dm, jc, delta = (s["magnetic_thickness_m"], s["critical_current_density_A_per_m2"],
                         s["dimension_offset_m"])
        assert dm == pytest.approx(DM, rel=0.02)
        assert jc == pytest.approx(JC, rel=0.03)
        assert delta == pytest.approx(DELTA, abs=0.05e-6)
        assert abs(dm - DM) < 4 * s["magnetic_thickness_stderr_m"]
        assert abs(jc - JC) < 4 * s["critical_current_density_stderr_A_per_m2"]
        assert abs(delta - DELTA) < 4 * s["dimension_offset_stderr_m"]
        assert 1.3 < s["critical_current_density_spread_percent"] < 2.8  # drawn with 2 %
        assert s["length_basis"] == "L - delta" and s["outliers"] == []
        # The free-intercept line against the drawn length finds the offset from periods.
        assert s["length_offset_from_period_m"] == pytest.approx(DELTA, abs=0.05e-6)
        assert 0.3 < s["magnetic_thickness_reduced_chisq"] < 3


def test_standard_errors_are_calibrated():
    pulls = []
    for seed in range(60):
        s = chip_summary(make_chip(np.random.default_rng(100 + seed), reps=1))
        pulls.append([(s["magnetic_thickness_m"] - DM) / s["magnetic_thickness_stderr_m"],
                      (s["critical_current_density_A_per_m2"] - JC)
                      / s["critical_current_density_stderr_A_per_m2"],
                      (s["dimension_offset_m"] - DELTA) / s["dimension_offset_stderr_m"]])
    pulls = np.array(pulls)
    # 60 chips: the spread of a unit normal is known to about 10 %.
    assert np.all(np.abs(pulls.mean(axis=0)) < 0.4), pulls.mean(axis=0)
    assert np.all((pulls.std(axis=0) > 0.7) & (pulls.std(axis=0) < 1.35)), pulls.std(axis=0)


def test_planted_outliers_are_caught_with_reasons_and_do_not_pull_the_trend():
    table = make_chip(np.random.default_rng(7))
    planted = {"J005": ("ic0_A", 2.5), "J020": ("ic0_A", 0.3), "J033": ("ic0_A", 1.3),
               "J041": ("period_T", 1.25), "J060": ("period_T", 0.85)}
    for junction, (column, factor) in planted.items():
        table.loc[table["junction"] == junction, column] *= factor
    table.at[4, "flags"] = ["poor-fit"]
    s = chip_summary(table)
    assert s["outlier_junctions"] == sorted(planted)
    by_id = {e["junction"]: e for e in s["outliers"]}
    for junction, (column, factor) in planted.items():
        entry = by_id[junction]
        assert entry["quantity"] == column.split("_")[0]
        assert entry["ratio_to_trend"] == pytest.approx(factor, rel=0.08)
        assert abs(entry["deviation_robust_sigma"]) > 5
    assert "above" in by_id["J033"]["reason"] and "below" in by_id["J020"]["reason"]
    assert "short" in by_id["J005"]["reason"] and "poor-fit" in by_id["J005"]["reason"]
    assert "open barrier" in by_id["J020"]["reason"]
    assert "longer" in by_id["J041"]["reason"] and "shorter" in by_id["J060"]["reason"]
    assert s["magnetic_thickness_m"] == pytest.approx(DM, rel=0.02)
    assert s["critical_current_density_A_per_m2"] == pytest.approx(JC, rel=0.03)
    assert s["dimension_offset_m"] == pytest.approx(DELTA, abs=0.05e-6)
    # A length typed in nm instead of um: smaller than the offset, no trend to compare with.
    table.loc[table["junction"] == "J070", "length_m"] = 0.2e-6
    s = chip_summary(table)
    assert s["outlier_junctions"] == sorted([*planted, "J070"])
    size = [e for e in s["outliers"] if e["junction"] == "J070"]
    assert {e["quantity"] for e in size} == {"ic0", "period"}
    assert all("not larger than the fitted linewidth offset" in e["reason"]
               and e["ratio_to_trend"] is None for e in size)
    trends = junction_trends(table, s).set_index("junction")
    assert trends.loc["J020", "outlier_ic0"] and not trends.loc["J021", "outlier_ic0"]
    assert trends.loc["J041", "period_deviation_robust_sigma"] > 5
    entry = next(e for e in s["outliers"] if e["junction"] == "J005")
    assert trends.loc["J005", "expected_ic0_A"] == pytest.approx(entry["expected_ic0_A"])


def test_false_alarm_rate_on_clean_chips_is_below_one_percent():
    flagged = total = 0
    for seed in range(200):
        rng = np.random.default_rng(seed)
        # Small chips (12 junctions) make the MAD noisier, the harder case.
        table = make_chip(rng, reps=1, lengths=LENGTHS[rng.permutation(8)[:4]])
        flagged += len(chip_summary(table)["outliers"])
        total += len(table)
    assert flagged / total < 0.01, f"{flagged} false alarms in {total} junctions"


def test_honest_nulls_with_reasons():
    rng = np.random.default_rng(3)
    two = chip_summary(make_chip(rng).iloc[:2])
    assert two["magnetic_thickness_m"] is None and two["critical_current_density_A_per_m2"] \
        is None and two["dimension_offset_m"] is None
    assert "fewer than 3" in two["reasons"]["magnetic_thickness"]
    assert "not tested" in two["reasons"]["outliers"]

    same = chip_summary(make_chip(rng, lengths=np.array([10e-6]), widths=np.array([5e-6]),
                                  reps=12))
    assert same["dimension_offset_m"] is None
    assert "do not vary enough" in same["reasons"]["dimension_offset"]
    # Without an offset the drawn area is used: Jc reads low by (L-d)(W-d)/(LW).
    assert same["critical_current_density_A_per_m2"] == pytest.approx(
        JC * (10 - 0.25) * (5 - 0.25) / 50, rel=0.03)
    # One length still gives d_m through the origin, but the 1/L scaling is untested.
    assert same["magnetic_thickness_m"] == pytest.approx(DM * 9.75 / 10, rel=0.02)
    assert same["length_offset_from_period_m"] is None
    assert "1/L" in same["reasons"]["length_offset_from_period"]

    no_length = make_chip(rng).drop(columns=["length_m", "width_m"])
    s = chip_summary(no_length)
    assert s["magnetic_thickness_m"] is None and s["dimension_offset_m"] is None
    assert s["critical_current_density_A_per_m2"] is not None


def test_counts_flags_and_failures():
    table = make_chip(np.random.default_rng(4), reps=1)
    table.loc[:2, "status"] = "failed"
    table.loc[:2, ["ic0_A", "period_T"]] = np.nan
    table.at[5, "flags"] = ["poor-fit", "nodes-lifted"]
    table.at[6, "flags"] = [{"code": "poor-fit", "branch": "positive"},
                            {"code": "poor-fit", "branch": "negative"}]
    table["flags"] = table["flags"].astype(object)
    table.at[7, "flags"] = "edge-current;poor-fit"
    s = chip_summary(table)
    assert (s["junctions_total"], s["junctions_analysed"], s["junctions_failed"]) == (24, 21, 3)
    assert s["status_counts"] == {"failed": 3, "ok": 21}
    # Junctions carrying each code, a code counted once per junction.
    assert s["flag_counts"] == {"edge-current": 1, "nodes-lifted": 1, "poor-fit": 3}
    assert s["junctions_with_ic0"] == 21


def test_json_ready_every_number_keyed_with_its_unit():
    table = make_chip(np.random.default_rng(5))
    table["field_offset_T"] = np.random.default_rng(5).normal(3e-6, 0.5e-6, len(table))
    table.loc[len(table) - 1, "ic0_A"] *= 3
    s = chip_summary(table)
    json.dumps(s, allow_nan=False)
    units = ("_m", "_T", "_A", "_A_per_m2", "_percent", "_chisq", "_ln", "_sigma")
    counts = ("junctions", "junctions_total", "junctions_analysed", "junctions_failed",
              "junctions_with_ic0", "junctions_with_period")
    for key, value in s.items():
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            assert key.endswith(units) or key.endswith(counts), key
    for entry in s["outliers"]:
        assert {"observed_ic0_A", "expected_ic0_A", "ratio_to_trend", "reason"} <= set(entry)
    assert s["field_offset_median_T"] == pytest.approx(3e-6, abs=0.3e-6)
    assert "1.4826" in s["methods_text"] and "Birge" in s["methods_text"]


def test_chips_are_summarised_separately():
    rng = np.random.default_rng(6)
    table = pd.concat([make_chip(rng, chip="KT-14"), make_chip(rng, reps=1, chip="KT-15")])
    out = chip_summaries(table)
    assert list(out) == ["KT-14", "KT-15"]
    assert out["KT-15"]["junctions_total"] == 24 and out["KT-14"]["chip"] == "KT-14"
