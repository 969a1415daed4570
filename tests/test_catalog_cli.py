"""The catalog from the command line: analyze --catalog, history, compare, catalog ...

One real pair of analyses (the demo junction KT14-J03 and a copy with its critical
current scaled to 85 %, as if measured in a later cooldown); the rest uses documents built
by hand (tests/catalog_helpers.py) to stay fast.
"""

import argparse
import json
import sqlite3

import pytest
from catalog_helpers import result

from jjpattern import analyze
from jjpattern.catalog import open_catalog, record_result
from jjpattern.cli import main
from jjpattern.cli_catalog import record_after_run
from jjpattern.demo import demo_files
from jjpattern.result import Result


@pytest.fixture(autouse=True)
def private_home(tmp_path, monkeypatch):
    # Never touch the user's own default catalog.
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "xdg"))
    monkeypatch.delenv("JJPATTERN_CATALOG", raising=False)


def _later_cooldown(source, dest, scale):
    """The same junction in cooldown CD-08 with every critical current scaled."""
    lines = []
    for line in open(source, encoding="utf-8").read().splitlines():
        if line.startswith("# cooldown:"):
            line = "# cooldown: CD-08"
        elif line and not line.startswith("#") and line[0] in "-0123456789":
            b, *ics = line.split(",")
            line = ",".join([b] + [f"{float(v) * scale:.4f}" for v in ics])
        lines.append(line)
    dest.write_text("\n".join(lines) + "\n", encoding="utf-8")


def test_analyze_records_and_history_shows_the_change(tmp_path, capsys):
    cat = str(tmp_path / "lab.sqlite")
    first = demo_files()["kt14_j03.csv"]
    later = tmp_path / "kt14_j03_cd08.csv"
    _later_cooldown(first, later, 0.85)
    assert main(["analyze", first, "--catalog", cat, "--json"]) == 0
    out = capsys.readouterr()
    document = out.out
    assert f"recorded in catalog {cat} as record 1" in out.err
    # The later cooldown through the Python API without diagnostics (they take most of the
    # time and do not touch the numbers compared), recorded as analyze would.
    said = []
    record_after_run(_args(catalog=cat), analyze(later, diagnose__enabled=False),
                     source_path=str(later), echo=said.append)
    assert said[0] == f"recorded in catalog {cat} as record 2"
    assert "DRIFT ic0-changed" in said[1] and "since record 1 (CD-07)" in said[1]

    # The stored document is the one printed by analyze --json.
    assert main(["catalog", "show", "1", "--json", "--catalog", cat]) == 0
    assert capsys.readouterr().out == document
    saved = tmp_path / "result.json"
    saved.write_text(document, encoding="utf-8")
    said = []
    record_after_run(_args(catalog=cat, path=str(saved)), Result.read(saved), echo=said.append)
    assert said == [f"already in catalog {cat} as record 1 (same input, same settings)"]

    assert main(["history", "KT14-J03", "--catalog", cat, "--json"]) == 0
    history = json.loads(capsys.readouterr().out)
    assert [r["cooldown"] for r in history["records"]] == ["CD-07", "CD-08"]
    drift = history["records"][1]["drift"]
    assert {(f["code"], f["branch"]) for f in drift} == {("ic0-changed", "positive"),
                                                         ("ic0-changed", "negative")}
    for f in drift:  # the currents were scaled by 0.85 exactly; the fit sees -15 %
        assert f["evidence"]["relative_change"] == pytest.approx(-0.15, abs=0.01)
    assert history["records"][0]["drift"] == []

    plot, table = tmp_path / "history.png", tmp_path / "history.csv"
    assert main(["history", "KT14-J03", "--catalog", cat, "--csv", str(table),
                 "--plot", str(plot)]) == 0
    assert plot.read_bytes().startswith(b"\x89PNG")
    assert table.read_text(encoding="utf-8").count("ic0-changed") == 2
    assert "figure written" in capsys.readouterr().out

    assert main(["compare", "#1", "#2", "--catalog", cat, "--json"]) == 0
    comparison = json.loads(capsys.readouterr().out)
    (junction,) = comparison["junctions"]
    ic0 = next(n for n in junction["branches"][0]["numbers"] if n["quantity"] == "ic0_A")
    assert ic0["relative_change"] == pytest.approx(-0.15, abs=0.01)
    assert ic0["significance_sigma"] > 20
    assert main(["compare", str(saved), "KT14-J03@CD-08", "--catalog", cat]) == 0
    text = capsys.readouterr().out
    assert "DRIFT ic0-changed" in text
    # Rows in words with their unit, read by the columns A, B and B - A alike.
    ic0_row = next(line.split() for line in text.splitlines() if "Ic0 (µA)" in line)
    assert ic0_row[2:5] == ["47.22", "±", "0.19"] and "ic0_A" not in text


def _args(**kw):
    base = {"catalog": None, "no_catalog": False, "catalog_label": [], "path": "j03.csv"}
    return argparse.Namespace(**{**base, **kw})


def test_default_catalog_after_init_only(tmp_path, capsys):
    default = tmp_path / "xdg" / "jjpattern" / "catalog.sqlite"
    said = []
    assert main(["catalog", "where"]) == 0
    assert "not made" in capsys.readouterr().out
    record_after_run(_args(), result(), echo=said.append)
    assert said == [] and not default.exists()

    assert main(["catalog", "init"]) == 0
    assert str(default) in capsys.readouterr().out and default.exists()
    record_after_run(_args(), result(), echo=said.append)
    assert said == [f"recorded in catalog {default} as record 1"]
    record_after_run(_args(no_catalog=True), result(cooldown="CD-08"), echo=said.append)
    assert len(said) == 1
    assert main(["catalog", "list", "records", "--json"]) == 0
    assert [r["id"] for r in json.loads(capsys.readouterr().out)] == [1]
    assert main(["catalog", "where"]) == 0
    assert "1 record," in capsys.readouterr().out


def test_names_verbatim_and_helpful_errors(tmp_path, capsys):
    cat = str(tmp_path / "lab.sqlite")
    hostile = "J'03\"; DROP TABLE records;-- Ω"
    record_result(cat, result(junction=hostile, cooldown="CD-1"))
    record_result(cat, result(junction=hostile, cooldown="CD-2", ic0_A=30e-6))
    record_result(cat, result(junction="KT14-J03", chip="KT-15"))
    record_result(cat, result(junction="KT14-J03", chip="KT-14"))
    assert main(["history", hostile, "--catalog", cat, "--json"]) == 0
    history = json.loads(capsys.readouterr().out)
    assert history["junction"] == hostile and len(history["records"]) == 2
    assert main(["history", hostile, "--catalog", cat, "--json", "--ic0-tolerance", "40%"]) == 0
    assert json.loads(capsys.readouterr().out)["records"][1]["drift"] == []  # -36 % < 40 %
    assert main(["history", hostile, "--catalog", cat, "--ic0-tolerance", "five"]) == 2
    assert "--ic0-tolerance 'five': not a number" in capsys.readouterr().err
    assert main(["history", "KT14-J3", "--catalog", cat]) == 2
    assert "similar names: KT14-J03" in capsys.readouterr().err
    assert main(["history", "KT14-J03", "--catalog", cat]) == 2
    assert "choose one with --chip" in capsys.readouterr().err
    assert main(["history", "KT14-J03", "--chip", "KT-15", "--catalog", cat]) == 0
    assert "on chip KT-15: 1 record" in capsys.readouterr().out
    assert main(["catalog", "list", "junctions", "--catalog", cat, "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert {r["junction"] for r in rows} == {hostile, "KT14-J03"}
    assert next(r for r in rows if r["junction"] == hostile)["latest_drift"] == [
        "ic0-changed"]
    assert main(["catalog", "show", "2", "--catalog", cat]) == 0
    shown = capsys.readouterr().out
    assert f"record 2: junction {hostile}, chip KT-14, cooldown CD-2" in shown
    assert "DRIFT ic0-changed" in shown and "Ic0 changed by -36.17 %" in shown
    assert "flags: none" in shown  # the analysis summary follows
    assert main(["history", "J1", "--catalog", str(tmp_path / "none.sqlite")]) == 2
    assert "no catalog there" in capsys.readouterr().err
    assert not (tmp_path / "none.sqlite").exists()


def test_export_import_and_refusals(tmp_path, capsys):
    cat, other = str(tmp_path / "a.sqlite"), str(tmp_path / "b.sqlite")
    for cooldown in ("CD-1", "CD-2", "CD-3"):
        record_result(cat, result(cooldown=cooldown))
    out = str(tmp_path / "all.jsonl")
    assert main(["catalog", "export", out, "--catalog", cat]) == 0
    assert "3 records written" in capsys.readouterr().out
    assert main(["catalog", "import", out, "--catalog", other]) == 0
    assert "3 records added, 0 already present" in capsys.readouterr().out
    assert main(["catalog", "import", cat, "--catalog", other]) == 0
    assert "0 records added, 3 already present" in capsys.readouterr().out
    with open_catalog(other) as c:
        assert len(c.records()) == 3
    conn = sqlite3.connect(cat)
    conn.execute("PRAGMA user_version = 7")
    conn.commit()
    conn.close()
    assert main(["catalog", "list", "--catalog", cat]) == 2
    assert "newer jjpattern" in capsys.readouterr().err
    assert main(["compare", "nothing-here", "#1"]) == 2
    assert "no such file or folder" in capsys.readouterr().err
    assert not (tmp_path / "xdg").exists()  # nothing went to the default location


def test_history_of_an_unrecorded_junction_names_the_catalog_and_what_it_holds(tmp_path,
                                                                                capsys):
    # The README's order: a result recorded in lab.sqlite, then a default catalog made.
    cat = str(tmp_path / "lab.sqlite")
    record_result(cat, result(junction="KT14-J05"))
    assert main(["catalog", "init"]) == 0
    capsys.readouterr()
    assert main(["history", "KT14-J03"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "holds 0 records, none of junction 'KT14-J03'" in err
    assert "`jjpattern catalog list junctions`" in err and "--catalog PATH" in err
    assert main(["history", "KT14-J03", "--catalog", cat]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"jjpattern: {cat} holds 1 record, none of junction 'KT14-J03'; "
                          "similar names: KT14-J05;")


def test_compare_text_says_withheld_in_words():
    from jjpattern.catalog.compare import compare_sides
    from jjpattern.catalog.text import compare_text

    def doc(**numbers):
        fits = [{"branch": "positive", "model": "rectangular", **numbers}]
        return {"J1": {"fits": fits}}

    withheld = doc(ic0_A=None, period_T=None)
    measured = doc(ic0_A=47e-6, ic0_stderr_A=0.2e-6, period_T=0.731e-3,
                   period_stderr_T=1e-6)
    text = compare_text(compare_sides(withheld, withheld))
    assert "positive branch (rectangular): numbers withheld in both" in text
    assert "relative" not in text  # no empty table
    rows = compare_text(compare_sides(measured, withheld)).splitlines()
    assert rows[-2].split() == ["Ic0", "(µA)", "47.00", "±", "0.20", "withheld", "-", "-",
                                "-"]
    assert rows[-1].split() == ["period", "(mT)", "0.7310", "±", "0.0010", "withheld", "-",
                                "-", "-"]
