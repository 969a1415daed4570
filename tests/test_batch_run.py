"""Batch runs over a manifest: failure isolation, units, chip outputs, resume, Dask, starter.

The sweeps are written here with numpy directly (|Ic0 sinc(u) + noise|, file
order kept, both polarities), independent of the fit code. Periods follow
Phi0 / (d_m L) with Phi0 = h / 2e from scipy.constants (CODATA).
"""

import base64
import json
import os
import signal
import subprocess
import sys
import time
from html.parser import HTMLParser

import numpy as np
import pytest
from scipy.constants import e, h

from jjpattern.batch.runner import Progress, result_stem, run_batch
from jjpattern.batch.worker import input_sha256
from jjpattern.cli import main
from jjpattern.outdir import TEMP_MARK, file_lock
from jjpattern.settings import Settings

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
PHI0 = h / (2 * e)
D_M, JC = 200e-9, 1e6  # magnetic thickness (m), critical current density (A/m^2)
LENGTHS_UM = (4, 6, 8, 12, 16)
WIDTH_UM = 5
BROKEN = "J6<i>"  # a name with markup: the page must show it escaped


def _sweep(rng, length_um, descending):
    period_mT = PHI0 / (D_M * length_um * 1e-6) * 1e3
    ic0_uA = JC * length_um * WIDTH_UM * 1e-12 * 1e6
    b = np.linspace(-4.3, 4.3, 140) * period_mT
    b = b[::-1] if descending else b
    cols = [np.abs(ic0_uA * np.abs(np.sinc((b - 0.01 * period_mT) / period_mT))
                   + rng.normal(0, 0.01 * ic0_uA, b.size)) * sign for sign in (1, -1)]
    rows = "".join(f"{x:.5f},{p:.5f},{n:.5f}\n" for x, p, n in zip(b, *cols, strict=True))
    return "# lab: Kestrel Low-Temperature Lab (fictional)\nB (mT),Ic+ (uA),Ic- (uA)\n" + rows


def make_chip(folder):
    """Five junctions and one broken file; ``resamples`` kept low so that the batch is quick."""
    rng = np.random.default_rng(7)
    os.makedirs(folder, exist_ok=True)
    lines = ["file,junction,chip,cooldown,length (um),width (um),x (mm),y (mm),resamples"]
    for i, length in enumerate(LENGTHS_UM):
        name = f"j{i + 1}.csv"
        with open(os.path.join(folder, name), "w") as handle:
            handle.write(_sweep(rng, length, descending=i % 2 == 1))
        lines.append(f"{name},J{i + 1},T-1,CD-1,{length},{WIDTH_UM},{i},0,20")
    with open(os.path.join(folder, "j6.csv"), "w") as handle:
        handle.write("B (mT),Ic+ (uA),Ic- (uA)\n0.1,2.0,-2.0\nerror: magnet quench\n")
    lines.append(f"j6.csv,{BROKEN},T-1,CD-1,20,{WIDTH_UM},5,0,20")
    path = os.path.join(folder, "manifest.csv")
    with open(path, "w") as handle:
        handle.write("\n".join(lines) + "\n")
    return path


def _read(path):
    with open(path, encoding="utf-8") as handle:
        return handle.read()


@pytest.fixture(scope="module")
def chip(tmp_path_factory):
    folder = tmp_path_factory.mktemp("chip")
    manifest = make_chip(str(folder))
    out = folder / "out"
    # Report settings are not part of the settings hash: PNG only keeps the test quick.
    outcome = run_batch(manifest, out, workers=2, chunk_size=1, reports=True,
                        settings=Settings().replace(report__figure_formats=(".png",)),
                        command=["batch", "manifest.csv", "--out", "out"])
    return {"folder": folder, "manifest": manifest, "out": out, "outcome": outcome,
            "summary": _read(out / "summary.csv")}


def _rows(text):
    import csv
    import io

    return list(csv.DictReader(io.StringIO(text)))


def test_a_broken_file_becomes_a_failed_row_and_the_rest_are_analysed(chip):
    outcome = chip["outcome"]
    assert (outcome.total, outcome.analysed, outcome.failed, outcome.skipped) == (6, 5, 1, 0)
    rows = _rows(chip["summary"])
    failed = [r for r in rows if r["status"] == "failed"]
    assert [r["junction"] for r in failed] == [BROKEN]
    assert "j6.csv: line 3" in failed[0]["error"]
    assert failed[0]["input_sha256"] == input_sha256(chip["folder"] / "j6.csv")
    ok = [r for r in rows if r["status"] == "ok"]
    assert [(r["junction"], r["branch"]) for r in ok] == [
        (f"J{i}", b) for i in range(1, 6) for b in ("positive", "negative")]
    for r in ok:
        truth = PHI0 / (D_M * float(r["length_m"]))
        assert abs(float(r["period_T"]) - truth) < 5 * float(r["period_stderr_T"])
        assert float(r["length_m"]) * 1e6 in LENGTHS_UM and r["error"] == ""
    # Each junction's document is in results/ under the name the row gives.
    doc = json.loads(_read(chip["out"] / ok[0]["result_file"]))
    assert doc["input"]["sha256"] == ok[0]["input_sha256"]
    assert doc["settings_sha256"] == ok[0]["settings_sha256"]
    assert doc["input"]["manifest"]["junction"] == "J1"


#: Column names without a unit: counts, ratios, text. Everything else must end in its unit.
UNITLESS = {"chip", "junction", "cooldown", "branch", "status", "error", "flags", "model",
            "file", "manifest_row", "result_file", "x_grid", "y_grid", "reduced_chisq",
            "lobes_observed", "nodes_observed", "points_used", "points_downweighted", "loss",
            "uncertainty", "asymmetry", "asymmetry_stderr", "input_sha256", "settings_sha256",
            "length_over_josephson_depth", "length_over_josephson_depth_stderr",
            "london_depth_assumption", "icrn_over_ab", "segment"}
UNITS = ("_m", "_m2", "_T", "_A", "_A_m2", "_V", "_ohm", "_J", "_K")


def test_summary_columns_carry_units(chip):
    header = chip["summary"].splitlines()[0].split(",")
    assert header[:5] == ["chip", "junction", "cooldown", "branch", "status"]
    assert {"x_m", "y_m", "length_m", "width_m", "period_T", "period_stderr_T", "ic0_A",
            "ic0_stderr_A", "magnetic_thickness_m", "magnetic_thickness_stderr_m"} <= set(header)
    assert [c for c in header if c not in UNITLESS and not c.endswith(UNITS)] == []
    row = _rows(chip["summary"])[0]
    assert float(row["x_m"]) == 0.0 and float(_rows(chip["summary"])[2]["x_m"]) == 1e-3
    assert "generated" not in chip["summary"] and "T0" not in chip["summary"]


class _Page(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.images, self.links = [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        attrs = dict(attrs)
        if tag == "img":
            self.images.append(attrs["src"])
        if tag == "a":
            self.links.append(attrs["href"])


def test_chip_outputs_and_a_self_contained_chip_report(chip):
    out = chip["out"]
    summary = json.loads(_read(out / "chips" / "T-1" / "chip_summary.json"))
    assert summary["junctions_analysed"] == 5 and summary["junctions_failed"] == 1
    # d_m from the five periods: the generator's 200 nm within 3 standard errors.
    assert abs(summary["magnetic_thickness_m"] - D_M) < 3 * summary["magnetic_thickness_stderr_m"]
    text = _read(out / "chip_report.html")
    page = _Page()
    page.feed(text)
    assert "script" not in page.tags and "link" not in page.tags
    assert "http://" not in text and "https://" not in text
    assert len(page.images) == 4  # period, Ic0, chip map, flag counts
    for src in page.images:
        assert base64.b64decode(src.split(",", 1)[1])[:4] == b"\x89PNG"
    assert "J6&lt;i&gt;" in text and "J6<i>" not in text
    # Every analysed junction links to its report, which exists; the failed one does not.
    assert len(set(page.links)) == 5
    for link in page.links:
        assert (out / link).is_file()
    for word in ("Methods", "Provenance", "Junctions to look at first", "Bevington"):
        assert word in text
    assert summary["methods_text"] in text.replace("&#x27;", "'")


def test_resume_after_sigkill(chip, tmp_path):
    out = tmp_path / "out"
    env = {**os.environ, "PYTHONPATH": ROOT}
    command = [sys.executable, "-m", "jjpattern.cli", "batch", chip["manifest"], "--out",
               str(out), "--workers", "1", "--chunk-size", "1", "--quiet"]
    proc = subprocess.Popen(command, env=env, start_new_session=True,
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    results = out / "results"
    deadline = time.monotonic() + 120
    try:
        while time.monotonic() < deadline and proc.poll() is None:
            if results.is_dir() and any(n.endswith(".json") for n in os.listdir(results)):
                break
            time.sleep(0.02)
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)  # the batch and its worker, as kill -9 would
        proc.wait()
    saved = sorted(n for n in os.listdir(results) if n.endswith(".json"))
    assert saved, "the batch wrote no result before it was killed"
    for name in saved:  # nothing half-written under a final name
        json.loads(_read(results / name))
    assert not (out / "summary.csv").exists() or proc.returncode == 0
    again = run_batch(chip["manifest"], out, workers=1)
    # Exactly the junctions saved before the kill are skipped; the others are analysed now.
    assert again.skipped == len(saved) < 5
    assert again.analysed == 5 and again.failed == 1
    assert not [n for n in os.listdir(results) if ".tmp" in n or TEMP_MARK in n]
    assert _read(out / "summary.csv") == chip["summary"]


def test_dask_cluster_gives_the_same_chip_numbers(chip, tmp_path):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  dashboard_address=None) as cluster:
        outcome = run_batch(chip["manifest"], tmp_path / "dask",
                            scheduler=cluster.scheduler_address)
    assert (outcome.analysed, outcome.failed) == (5, 1)
    local = json.loads(_read(chip["out"] / "chips" / "T-1" / "chip_summary.json"))
    remote = json.loads(_read(tmp_path / "dask" / "chips" / "T-1" / "chip_summary.json"))
    for key in ("magnetic_thickness_m", "critical_current_density_A_per_m2",
                "field_offset_median_T"):
        assert remote[key] == pytest.approx(local[key], rel=1e-9)
    assert remote["outlier_junctions"] == local["outlier_junctions"]
    assert [(r["junction"], r["status"], r["flags"]) for r in _rows(
        _read(tmp_path / "dask" / "summary.csv"))] == [
        (r["junction"], r["status"], r["flags"]) for r in _rows(chip["summary"])]


def test_cli_batch_strict_and_manifest_errors(chip, tmp_path, capsys):
    # A rerun into the same folder: the five analysed junctions are skipped, the broken
    # file is tried again and fails again.
    assert main(["batch", chip["manifest"], "--out", str(chip["out"]), "--workers", "1",
                 "--strict", "--reports"]) == 3
    last = capsys.readouterr().out.strip().splitlines()[-1]
    assert last.startswith("6 junctions: 5 analysed (5 already done), ") and "1 failed" in last
    assert _read(chip["out"] / "summary.csv") == chip["summary"]
    out = tmp_path / "x"
    assert main(["batch", chip["manifest"]]) == 2
    assert "--out DIR" in capsys.readouterr().err
    # One batch per output folder at a time (an flock, which the kernel drops when its
    # holder dies, so a killed batch leaves no stale lock).
    busy = tmp_path / "busy"
    busy.mkdir()
    with file_lock(busy / ".jjpattern-batch.lock", "held by the test", timeout_s=0):
        assert main(["batch", chip["manifest"], "--out", str(busy)]) == 2
        assert "another batch" in capsys.readouterr().err
    bad = tmp_path / "bad.csv"
    bad.write_text("file,junction,length (um)\nj1.csv,J1,ten\n")
    (tmp_path / "j1.csv").write_text(_read(chip["folder"] / "j1.csv"))
    assert main(["batch", str(bad), "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "row 2" in err and "'length (um)'" in err


def _iv_file(path, field_mT):
    bias = np.linspace(-30, 30, 61)
    volt = np.where(np.abs(bias) > 12, 8.5 * bias, 0.0)
    path.write_text(f"# field: {field_mT} mT\nI (uA),V (uV)\n"
                    + "".join(f"{i:.3f},{v:.3f}\n" for i, v in zip(bias, volt, strict=True)))


def test_starter_manifest_lists_what_can_be_read(tmp_path, capsys):
    import h5py

    data = tmp_path / "cooldown"
    (data / "ivs_j3").mkdir(parents=True)
    rng = np.random.default_rng(1)
    (data / "j10.csv").write_text(_sweep(rng, 6, False))
    (data / "j2.tsv").write_text("field_mT\tIsw_uA\n0.1\t2.0\n0.2\t1.9\n")
    with h5py.File(data / "j4.h5", "w") as f:
        f.create_dataset("field", data=np.linspace(-1, 1, 50)).attrs["units"] = "mT"
        f.create_dataset("ic", data=np.ones(50)).attrs["units"] = "uA"
    for k, field in enumerate((-0.5, 0.0, 0.5)):
        _iv_file(data / "ivs_j3" / f"iv_{k}.csv", field)
    (data / "notes.txt").write_text("Cooled down on Monday.\nAll fine.\n")
    (data / "photo.png").write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(100))
    assert main(["batch", str(data)]) == 0
    out = capsys.readouterr().out
    assert "fill in the sizes" in out
    rows = _rows(_read(data / "manifest.csv"))
    assert [r["file"] for r in rows] == ["ivs_j3", "j2.tsv", "j4.h5", "j10.csv"]
    assert rows[0]["length (um)"] == ""
    assert main(["batch", str(data)]) == 2  # never overwrites a manifest
    assert "already there" in capsys.readouterr().err


def test_input_hash_is_the_readers(tmp_path, chip):
    from jjpattern.io import load, load_map

    assert input_sha256(chip["folder"] / "j1.csv") == load(chip["folder"] / "j1.csv").sha256
    folder = tmp_path / "ivs"
    folder.mkdir()
    for k, field in enumerate((-0.5, 0.0, 0.5)):
        _iv_file(folder / f"iv_{k}.csv", field)
    assert input_sha256(folder) == load_map(str(folder)).sha256


def test_a_worker_that_dies_fails_only_its_junction():
    from concurrent.futures import Future
    from concurrent.futures.process import BrokenProcessPool

    from jjpattern.batch import runner

    class Pool:
        """Runs chunks at once; the job 'crash' breaks the pool as a dying worker does, and
        every chunk still in a broken pool is lost."""

        broken = False

        def submit(self, fn, jobs):
            future = Future()
            if self.broken or any(j["key"] == "crash" for j in jobs):
                self.broken = True
                future.set_exception(BrokenProcessPool("a worker died"))
            else:
                future.set_result([{"key": j["key"], "status": "ok"} for j in jobs])
            return future

    fresh = []

    def new_pool():
        fresh.append(Pool())
        return fresh[-1], lambda: None

    jobs = [{"key": k, "order": i} for i, k in enumerate(("a", "b", "crash", "c", "d"))]
    seen = {}
    runner._run(Pool(), [jobs[:2], jobs[2:4], jobs[4:]], lambda i: seen.update({i["key"]: i}),
                new_pool)
    assert {k: v["status"] for k, v in seen.items()} == {
        "a": "ok", "b": "ok", "crash": "failed", "c": "ok", "d": "ok"}
    assert "worker process died" in seen["crash"]["error"]
    assert len(fresh) == 2  # one pool for the lost junctions, one more after the crash


def test_result_names_and_progress_bar():
    assert result_stem("KT-14", "J3", "CD-07").startswith("KT-14_J3_CD-07_")
    # Names that differ only in characters a file name cannot hold stay apart.
    assert result_stem("c", "J/1", None) != result_stem("c", "J:1", None)
    assert result_stem("c", "J/1", None).startswith("c_J-1_")

    class Tty:
        text = ""

        def isatty(self):
            return True

        def write(self, s):
            self.text += s

        def flush(self):
            pass

    tty = Tty()
    bar = Progress(4, stream=tty)
    bar.update()
    bar.update(failed=1)
    bar.close()
    assert "2/4 junctions, 1 failed" in tty.text and tty.text.endswith("\n")
    quiet = Progress(4, stream=tty, enabled=False)
    before = tty.text
    quiet.update()
    assert tty.text == before


def test_batch_records_its_results_in_a_catalog_from_one_process(chip, tmp_path, capsys):
    from jjpattern.catalog import open_catalog

    catalog = tmp_path / "lab.sqlite"
    argv = ["batch", chip["manifest"], "--out", str(chip["out"]), "--workers", "1",
            "--reports", "--catalog", str(catalog)]
    assert main(argv) == 0
    assert "5 new records, 0 already there" in capsys.readouterr().out
    assert main(argv) == 0  # the same results again: one record each, not two
    assert "0 new records, 5 already there" in capsys.readouterr().out
    with open_catalog(str(catalog)) as store:
        rows = store.records(chip="T-1")
    assert sorted(r.junction for r in rows) == [f"J{i}" for i in range(1, 6)]
    assert {r.cooldown for r in rows} == {"CD-1"}
