"""Chip figures: what they show, their units, and byte-identical reruns."""

import numpy as np
import pandas as pd
import pytest
from scipy.constants import physical_constants

from jjpattern.batch.chipstats import chip_summary
from jjpattern.batch.figures import (
    chip_map_figure,
    flag_figure,
    ic0_figure,
    period_figure,
    save_figure,
)

PHI0 = physical_constants["mag. flux quantum"][0]  # scipy.constants (CODATA)


@pytest.fixture(scope="module")
def chip():
    """24 junctions on a 6 x 4 grid of a chip (invented), one Ic0 and one period outlier."""
    rng = np.random.default_rng(11)
    length = np.repeat([3e-6, 5e-6, 8e-6, 12e-6, 16e-6, 20e-6], 4)
    width = np.tile([2e-6, 3e-6, 5e-6, 8e-6], 6)
    ic0 = 1e7 * np.exp(rng.normal(0, 0.02, 24)) * (length - 2e-7) * (width - 2e-7)
    period = PHI0 / (120e-9 * (length - 2e-7)) * (1 + rng.normal(0, 0.004, 24))
    ic0[3] *= 2.0
    period[10] *= 1.3
    table = pd.DataFrame({
        "junction": [f"KT14-J{i:02d}" for i in range(24)], "chip": "KT-14", "status": "ok",
        "ic0_A": ic0, "ic0_stderr_A": 0.005 * ic0, "period_T": period,
        "period_stderr_T": 0.004 * period, "length_m": length, "width_m": width,
        "x": np.tile(np.arange(6), 4) * 1e-3, "y": np.repeat(np.arange(4), 6) * 1e-3,
        "field_offset_T": rng.normal(4e-6, 1e-6, 24), "flags": [[] for _ in range(24)]})
    table.at[5, "flags"] = ["poor-fit"]
    table.loc[7, ["status", "ic0_A", "period_T"]] = ["failed", np.nan, np.nan]
    return table, chip_summary(table)


def test_period_and_ic0_figures_show_fit_outliers_and_units(chip):
    table, summary = chip
    assert summary["outlier_junctions"] == ["KT14-J03", "KT14-J10"]
    fig = period_figure(table, summary, "KT-14")
    ax = fig.axes[0]
    assert ax.get_xlabel() == "1 / length across the field (1/µm)"
    assert ax.get_ylabel() == "period (mT)"
    labels = [line.get_label() for line in ax.get_lines()]
    assert "outliers" in labels
    assert any(label.startswith("Φ0 / (d_m (L − δ))") for label in labels)
    assert [t.get_text() for t in ax.texts] == ["KT14-J10"]
    fig = ic0_figure(table, summary)
    ax = fig.axes[0]
    # Median Ic0 about 0.3 mA: shown in mA, the unit in which it reads at least 0.1.
    assert ax.get_ylabel() == "Ic0 (mA)" and ax.get_xlabel() == "area (L − δ)(W − δ) (µm²)"
    assert [t.get_text() for t in ax.texts] == ["KT14-J03"]
    assert ax.get_xscale() == "log"  # the areas span more than a decade


def test_map_has_jc_and_offset_panels_and_needs_positions(chip):
    table, summary = chip
    fig = chip_map_figure(table, summary, xy_unit="m")
    titles = [ax.get_title() for ax in fig.axes]
    assert "Jc (kA/cm²)" in titles and "field offset (µT)" in titles
    assert fig.axes[0].get_xlabel() == "x (mm)"
    assert chip_map_figure(table.drop(columns=["x", "y"]), summary) is None


def test_flag_figure_counts(chip):
    table, summary = chip
    fig = flag_figure(summary)
    ax = fig.axes[0]
    names = [t.get_text() for t in ax.get_yticklabels()]
    assert names == ["poor-fit", "outlier: Ic0", "outlier: period", "failed"]
    assert sorted(p.get_width() for p in ax.patches) == [1, 1, 1, 1]
    assert ax.get_xlabel() == "junctions (of 24)"


def test_reruns_give_identical_files(chip, tmp_path):
    table, summary = chip
    first = [str(tmp_path / "a.png"), str(tmp_path / "a.svg")]
    second = [str(tmp_path / "b.png"), str(tmp_path / "b.svg")]
    save_figure(flag_figure(summary), *first)
    save_figure(flag_figure(summary), *second)
    for a, b in zip(first, second, strict=True):
        assert open(a, "rb").read() == open(b, "rb").read()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.png", "a.svg", "b.png", "b.svg"]
