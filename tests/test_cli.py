"""The command line end to end on the bundled demo sweeps (invented data)."""

import json
import os
import subprocess
import sys

import pytest

from jjpattern.cli import main
from jjpattern.demo import demo_files
from jjpattern.outdir import TEMP_MARK

FIT_KEYS = {
    "branch", "model", "period_T", "period_stderr_T", "field_offset_T", "field_offset_stderr_T",
    "ic0_A", "ic0_stderr_A", "effective_area_m2", "effective_area_stderr_m2", "reduced_chisq",
    "lobes_observed",
}


@pytest.fixture(scope="module")
def demo():
    return demo_files()


def test_analyze_json_is_one_document_with_the_contract(demo, capsys):
    assert main(["analyze", demo["kt14_j03.csv"], "--json", "--loss", "cauchy"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert set(doc) == {"schema_version", "input", "fits", "flags", "tool", "settings",
                        "settings_sha256", "method", "generated_utc", "current_density",
                        "geometry", "provenance"}
    # The demo file's metadata gives the geometry: d' = Phi0 / (period * L), L = 12 um.
    geometry = doc["geometry"]
    fit = doc["fits"][0]
    assert geometry["magnetic_thickness_m"] == pytest.approx(
        2.067833848e-15 / (fit["period_T"] * 12e-6), rel=1e-6)
    assert doc["tool"]["name"] == "jjpattern"
    assert doc["input"]["metadata"]["junction"] == "KT14-J03"
    assert len(doc["input"]["sha256"]) == 64
    assert [f["branch"] for f in doc["fits"]] == ["positive", "negative"]
    for fit in doc["fits"]:
        assert FIT_KEYS <= set(fit)
        # The demo generator used 0.731 mT; allow 4 standard errors.
        assert abs(fit["period_T"] - 0.731e-3) < 4 * fit["period_stderr_T"]
    assert doc["settings"]["fit"]["loss"] == "cauchy"
    assert doc["settings"]["read"]["ic_cols"] == []
    assert doc["provenance"]["command"].startswith("jjpattern analyze ")


def test_summary_reads_like_a_physicist_wrote_it(demo, capsys):
    assert main(["analyze", demo["kt14_j05.h5"], "--geometry", "circular"]) == 0
    out = capsys.readouterr().out
    assert "circular model" in out
    assert "period" in out and "± " in out and " mT" in out
    assert "flags: none" in out


def test_flags_reach_the_json(demo, capsys):
    assert main(["analyze", demo["kt14_j11.tsv"], "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    flag = doc["flags"][0]
    assert flag["code"] == "main-lobe-outside" and flag["branch"] == "positive"
    assert set(flag) == {"code", "severity", "branch", "message", "evidence"}


@pytest.mark.parametrize(("suffix", "magic"), [(".png", b"\x89PNG"), (".pdf", b"%PDF"),
                                               (".svg", b"<?xml")])
def test_plot_formats(demo, tmp_path, capsys, suffix, magic):
    path = tmp_path / f"fig{suffix}"
    assert main(["analyze", demo["kt14_j03.csv"], "--plot", str(path)]) == 0
    assert path.read_bytes().startswith(magic)
    assert not [p for p in os.listdir(tmp_path) if ".tmp" in p or TEMP_MARK in p]


def test_demo_writes_results_and_says_where(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path / "d")]) == 0
    out = capsys.readouterr().out
    files = sorted(n for n in os.listdir(tmp_path / "d") if not n.startswith("."))
    expected = [f"kt14_j{n}.{s}" for n in ("03", "05", "11", "07_map") for s in ("json", "png")]
    assert files == sorted(expected + ["kt14_j07_map_extraction.png", "report_kt14_j07",
                                       "chip_kt14"])
    assert str(tmp_path / "d" / "report_kt14_j07" / "report.html") in out
    assert out.rstrip().endswith(str(tmp_path / "d" / "chip_kt14" / "chip_report.html"))
    # The demo chip's batch finds what scripts/make_demo_data.py put in: d_m = 236 nm,
    # Jc = 3.3e5 A/m^2, a 0.3 um linewidth offset, A06 broken, D05 with half the Ic0.
    chip = json.loads((tmp_path / "d" / "chip_kt14" / "chips" / "KT-14" /
                       "chip_summary.json").read_text())
    for key, stderr, truth in (
            ("magnetic_thickness_m", "magnetic_thickness_stderr_m", 236e-9),
            ("critical_current_density_A_per_m2", "critical_current_density_stderr_A_per_m2",
             3.3e5),
            ("dimension_offset_m", "dimension_offset_stderr_m", 0.3e-6)):
        assert abs(chip[key] - truth) < 3 * chip[stderr]
    assert (chip["junctions_analysed"], chip["junctions_failed"]) == (23, 1)
    assert "D05" in chip["outlier_junctions"]
    assert chip["flag_counts"]["long-junction"] == 1 and chip["flag_counts"]["edge-current"] == 1
    assert str(tmp_path / "d") in out
    doc = json.loads((tmp_path / "d" / "kt14_j05.json").read_text())
    assert doc["fits"][0]["model"] == "circular"
    raw = json.loads((tmp_path / "d" / "kt14_j07_map.json").read_text())
    # The demo map was made with a retrapping current of 0.42 Ic and Rn = 8.5 ohm.
    for branch in raw["extraction"]["branches"]:
        assert abs(branch["retrapping_over_switching"] - 0.42) < 0.02
    assert abs(raw["extraction"]["normal_resistance_ohm"] - 8.5) < 0.1


def test_help_imports_no_heavy_module():
    # --help must start fast: the parser module may not pull in numpy's stack.
    code = ("import sys, jjpattern.cli; jjpattern.cli.build_parser().format_help();"
            "print(sorted(m for m in ('numpy', 'scipy', 'matplotlib', 'pandas', 'h5py', 'lmfit')"
            " if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_console_script_exit_codes(tmp_path):
    done = subprocess.run([sys.executable, "-m", "jjpattern.cli", "analyze",
                           str(tmp_path / "missing.csv")], capture_output=True, text=True)
    assert done.returncode == 2
    assert "file not found" in done.stderr and "Traceback" not in done.stderr
