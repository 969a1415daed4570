"""One pipeline, one settings object, one result document: round trips and agreement."""

import json
import os

import numpy as np
import pytest

from jjpattern import analyze
from jjpattern.cli import main
from jjpattern.demo import demo_files, run_demo
from jjpattern.errors import InputError
from jjpattern.result import Result
from jjpattern.settings import FitSettings, JunctionSettings, Settings, keyword_settings


def test_settings_round_trip_and_hash():
    s = Settings(fit=FitSettings(loss="cauchy"), junction=JunctionSettings(
        length_m=12e-6, electrode_m=(300e-9, 250e-9)))
    again = Settings.from_dict(json.loads(json.dumps(s.to_dict())))
    assert again == s and again.hash() == s.hash()
    assert s.hash() != Settings().hash()
    # Report settings do not change the analysis, so they stay out of the hash.
    assert Settings().replace(report__dpi=100).hash() == Settings().hash()
    assert keyword_settings(loss="huber", length_m=1e-5).fit.loss == "huber"
    with pytest.raises(InputError, match="unknown key 'losss'"):
        Settings.from_dict({"fit": {"losss": "x"}})
    with pytest.raises(InputError, match="unknown setting"):
        keyword_settings(nonsense=1)


@pytest.fixture(scope="module")
def map_result():
    return analyze(demo_files()["kt14_j07_map.h5"], tc_K=9.2)


def test_result_json_round_trips_exactly(map_result):
    text = map_result.to_json()
    again = Result.from_json(text)
    assert again.to_json() == text
    assert again == map_result  # as the README shows
    assert not again != map_result
    assert again.settings == map_result.settings
    pos = again.fit("positive")
    np.testing.assert_array_equal(pos.field_T, map_result.fit("positive").field_T)
    # The curve is drawn again from the recorded parameters alone.
    np.testing.assert_allclose(pos.model_A(pos.field_T),
                               map_result.fit("positive").model_A(pos.field_T), rtol=1e-12)
    assert [f.code for f in again.flags] == [f.code for f in map_result.flags]
    # The raw map is not in the document, the per-row currents are.
    assert len(again.extraction["field_T"]) == again.extraction["map_shape"][0]
    assert len(text) < 400_000


def test_report_from_saved_result_without_the_input(tmp_path, map_result):
    first = tmp_path / "first"
    assert main(["report", demo_files()["kt14_j07_map.h5"], "--out", str(first),
                 "--tc-K", "9.2"]) == 0
    saved = tmp_path / "saved.json"
    saved.write_text((first / "result.json").read_text())
    # No input file anywhere: the report is rebuilt from the document alone.
    again = tmp_path / "again"
    assert main(["report", str(saved), "--out", str(again)]) == 0
    a = json.loads((first / "result.json").read_text())
    b = json.loads((again / "result.json").read_text())
    a.pop("generated_utc"), b.pop("generated_utc")
    assert a == b
    page = (again / "report.html").read_text()
    assert "rebuilt from a saved result" in page
    assert (again / "methods.txt").read_text() == (first / "methods.txt").read_text()
    assert (again / "extraction.csv").read_text() == (first / "extraction.csv").read_text()
    assert not (again / "map.png").exists() and (again / "pattern.png").exists()


def test_report_of_a_file_that_is_no_result(tmp_path, capsys):
    bad = tmp_path / "x.json"
    bad.write_text('{"a": 1}')
    assert main(["report", str(bad), "--out", str(tmp_path / "o")]) == 2
    assert "not a jjpattern result document" in capsys.readouterr().err


def _comparable(doc):
    doc = dict(doc)
    for key in ("generated_utc", "provenance"):
        doc.pop(key)
    doc["input"] = {k: v for k, v in doc["input"].items() if k != "path"}
    return doc


def test_demo_result_equals_analyze_json(tmp_path, capsys):
    run_demo(str(tmp_path / "d"), echo=lambda *_: None, chip=False)
    for name, extra in (("kt14_j03.csv", ["--loss", "cauchy"]),
                        ("kt14_j05.h5", [])):
        assert main(["analyze", demo_files()[name], "--json", *extra]) == 0
        printed = json.loads(capsys.readouterr().out)
        stem = os.path.splitext(name)[0]
        demo_doc = json.loads((tmp_path / "d" / f"{stem}.json").read_text())
        assert _comparable(demo_doc) == _comparable(printed)
