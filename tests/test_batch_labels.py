"""Batch rows take chip and cooldown from the files when the manifest leaves them out, and a
branch whose numbers the analysis withheld is not reported as "ok" (bundled demo chip,
invented data)."""

import csv
import io
import json
import os
import shutil

import pytest

from jjpattern.batch.runner import run_batch
from jjpattern.cli import main
from jjpattern.demo import chip_manifest

CHIP = os.path.dirname(chip_manifest())


def _rows(path):
    return list(csv.DictReader(io.StringIO(path.read_text(encoding="utf-8"))))


@pytest.fixture(scope="module")
def batch(tmp_path_factory):
    folder = tmp_path_factory.mktemp("labels")
    # B03's fit misses its data (the demo's poor-fit junction); A01 is a clean one.
    for name in ("kt14_a01.csv", "kt14_b03.csv"):
        shutil.copy(os.path.join(CHIP, name), folder / name)
    manifest = folder / "manifest.csv"
    manifest.write_text("file,junction,length (um),width (um)\n"
                        "kt14_a01.csv,A01,4,4\nkt14_b03.csv,B03,4,12\n")
    run_batch(str(manifest), folder / "out", workers=1, progress=False)
    return folder


def test_chip_and_cooldown_come_from_the_file_when_the_manifest_has_none(batch):
    rows = _rows(batch / "out" / "summary.csv")
    assert {(r["chip"], r["cooldown"]) for r in rows} == {("KT-14", "CD-08")}


def test_a_branch_with_withheld_numbers_has_status_withheld(batch):
    rows = {(r["junction"], r["branch"]): r for r in _rows(batch / "out" / "summary.csv")}
    for branch in ("positive", "negative"):
        b03, a01 = rows["B03", branch], rows["A01", branch]
        assert b03["status"] == "withheld" and "poor-fit" in b03["flags"].split(";")
        assert b03["period_T"] == "" and b03["error"] == ""
        assert a01["status"] == "ok" and float(a01["period_T"]) > 0
    chip = json.loads((batch / "out" / "chips" / "KT-14" / "chip_summary.json").read_text())
    assert (chip["junctions_analysed"], chip["junctions_failed"]) == (2, 0)
    assert chip["status_counts"] == {"ok": 1, "withheld": 1}


def test_a_starter_manifest_takes_junction_chip_and_cooldown_from_the_files(tmp_path,
                                                                          capsys):
    for name in ("kt14_a01.csv", "kt14_a02.csv"):
        shutil.copy(os.path.join(CHIP, name), tmp_path / name)
    (tmp_path / "plain.csv").write_text("B (mT),Ic (uA)\n0.1,2.0\n0.2,1.9\n")
    assert main(["batch", str(tmp_path)]) == 0
    assert "any chip or cooldown the files' metadata did not give" in capsys.readouterr().out
    rows = _rows(tmp_path / "manifest.csv")
    assert [(r["file"], r["junction"], r["chip"], r["cooldown"]) for r in rows] == [
        ("kt14_a01.csv", "KT14-A01", "KT-14", "CD-08"),
        ("kt14_a02.csv", "KT14-A02", "KT-14", "CD-08"),
        ("plain.csv", "plain", "", "")]
