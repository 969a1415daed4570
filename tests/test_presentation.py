"""What a reader sees: the report's visible text, one rounding everywhere, flag scopes,
the geometry table, figures, and the Python calls a notebook uses."""

import json
import math
import pathlib
import re
import warnings
from html.parser import HTMLParser

import numpy as np
import pytest
from scipy import constants

import jjpattern
from jjpattern.cli import main
from jjpattern.demo import demo_files
from jjpattern.fmt import csv_number, evidence_item, measure, plural, shown_path
from jjpattern.result import Result

SCOPE = re.compile(r"^\((info|warning|error), (positive|negative|both) branch(es)?"
                   r"(, (up|down) sweep( \d+)?)?\)$")
NUMBER = re.compile(r"(?<![\w.])[-+]?\d+(?:\.\d+)?(?:[eE][-+]?\d+)?(?![\w.])")


class _Visible(HTMLParser):
    """Visible text, flag headings, and whether each table sits in a scrolling box."""

    def __init__(self):
        super().__init__()
        self.text, self.headings, self.tables = [], [], []
        self._stack, self._style, self._span = [], 0, None

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        # The settings document in <pre> is machine-readable JSON kept exact so that the
        # run can be repeated (byte limits such as 268435456 included): not prose.
        if tag in ("style", "pre"):
            self._style += 1
        if tag == "table":
            self.tables.append(any(t == ("div", "table-wrap") for t in self._stack[-1:]))
        if tag == "span" and self._stack and "flag" in self._stack[-1][1].split():
            self._span = []
        if tag not in ("img", "meta", "br", "link"):
            self._stack.append((tag, attrs.get("class") or ""))

    def handle_endtag(self, tag):
        if tag in ("style", "pre"):
            self._style -= 1
        if tag == "span" and self._span is not None:
            self.headings.append("".join(self._span))
            self._span = None
        if self._stack and self._stack[-1][0] == tag:
            self._stack.pop()

    def handle_data(self, data):
        if not self._style:
            self.text.append(data)
            if self._span is not None:
                self._span.append(data)


def _visible(page: str) -> _Visible:
    parser = _Visible()
    parser.feed(page)
    parser.close()
    parser.joined = " ".join(parser.text)
    return parser


def _significant(token: str) -> int:
    mantissa = re.split("[eE]", token.lstrip("+-"))[0].replace(".", "").lstrip("0")
    return len(mantissa)


@pytest.fixture(scope="module")
def short_report(tmp_path_factory):
    """A report whose geometry cannot give a London depth: the length is made 1 µm, so the
    12 µm junction's period needs a magnetic thickness no film of 300 nm allows."""
    out = tmp_path_factory.mktemp("short") / "r"
    assert main(["report", demo_files()["kt14_j03.csv"], "--out", str(out), "--model",
                 "rectangular", "--length-um", "1"]) == 0
    return out


@pytest.mark.parametrize("which", ["map", "short"])
def test_visible_text_is_clean(which, map_report_dir, short_report):
    folder = map_report_dir if which == "map" else short_report
    page = _visible((folder / "report.html").read_text(encoding="utf-8"))
    assert not re.search(r"\bNone\b", page.joined)
    assert not re.search(r"\bnan\b|\binf\b", page.joined)
    long = [t for t in NUMBER.findall(page.joined) if _significant(t) > 6]
    assert long == []
    assert "( branch" not in page.joined and ",  branch" not in page.joined
    assert page.headings and all(SCOPE.match(h) for h in page.headings), page.headings
    assert not re.search(r"\b1 (lobes|points|nodes)\b", page.joined)
    # Tables scroll inside their box instead of widening the page; the page prints on A4.
    assert page.tables and all(page.tables)
    css = (folder / "report.html").read_text(encoding="utf-8").split("</style>")[0]
    assert re.search(r"\.table-wrap \{[^}]*max-width: 100%;[^}]*overflow-x: auto;", css)
    assert "size: A4" in css and "@media print" in css


def test_demo_input_is_shown_by_its_file_name(map_report_dir):
    page = _visible((map_report_dir / "report.html").read_text(encoding="utf-8")).joined
    # The provenance keeps the command as typed (it must reproduce the run); the rest of
    # the page names the packaged demo file alone.
    page = page.split("Provenance")[0]
    assert "kt14_j07_map.h5" in page
    assert "site-packages" not in page and jjpattern.__file__.rsplit("/", 2)[0] not in page


def test_summary_html_and_methods_round_alike(map_report_dir, capsys):
    doc = json.loads((map_report_dir / "result.json").read_text())
    result = Result.from_dict(doc)
    from jjpattern.report.summary import render_summary

    summary = render_summary(result)
    page = _visible((map_report_dir / "report.html").read_text(encoding="utf-8")).joined
    methods = (map_report_dir / "methods.txt").read_text()
    for fit in result.fits:
        period = measure(fit.period_T, fit.period_stderr_T, (("mT", 1e-3),), ("mT", 1e-3))
        ic0 = measure(fit.ic0_A, fit.ic0_stderr_A, (("µA", 1e-6),), ("µA", 1e-6))
        for text in (summary, page, methods):
            assert period in text and ic0 in text
        # The error to two significant digits, the value to the same decimal.
        value, error = period.removesuffix(" mT").split(" ± ")
        assert len(error.replace(".", "").lstrip("0")) == 2
        assert len(value.split(".")[1]) == len(error.split(".")[1])
        assert abs(float(value) * 1e-3 - fit.period_T) <= 0.5 * 10 ** -len(
            value.split(".")[1]) * 1e-3
    from jjpattern.report.summary import edge_fraction_text

    for d in result.current_density.values():
        edge = edge_fraction_text(d)
        assert "± 0.000 " not in edge + " "
        for text in (summary, page, methods):
            assert edge in text
    assert "current density of the positive and negative branches was reconstructed" in methods


def test_evidence_reads_as_name_value_unit(map_report_dir):
    page = _visible((map_report_dir / "report.html").read_text(encoding="utf-8")).joined
    assert "ic0 positive = 21.5 µA" in page
    assert re.search(r"field offset difference = [0-9.]+ standard errors", page)
    assert "e-05" not in page and "e-06" not in page


def test_geometry_table_names_units_and_reasons(short_report):
    page = _visible((short_report / "report.html").read_text(encoding="utf-8")).joined
    page = page.split("Geometry and materials")[1].split("Methods")[0]
    assert "length_m" not in page and "t1_m" not in page
    assert "junction length L (across the field)" in page and "1 µm" in page
    assert "London depth λ from the period — no London depth fits" in page
    doc = json.loads((short_report / "result.json").read_text())
    flags = [f for f in doc["flags"] if f["code"] == "period-unlike-geometry"]
    assert len(flags) == 1 and flags[0]["branch"] == "positive"
    # Independent check: the thickest the films allow is d + t1/2 + t2/2 = 301.8 nm
    # (lambda much longer than the films, Weihnacht's formula), so the shortest period a
    # 1 µm junction can have is Phi0 / (1 µm x 301.8 nm), Phi0 = h / 2e (scipy.constants).
    phi0 = constants.h / (2 * constants.e)
    shortest = phi0 / (1e-6 * 301.8e-9)
    assert flags[0]["evidence"]["expected_period_min_T"] == pytest.approx(shortest, rel=1e-9)
    period = doc["fits"][0]["period_T"]
    assert flags[0]["evidence"]["period_over_expected"] == pytest.approx(period / shortest,
                                                                         rel=1e-9)


def test_period_check_passes_a_consistent_geometry_and_catches_a_wrong_length():
    from jjpattern.diagnose.geometry_check import period_geometry_flags

    phi0 = constants.h / (2 * constants.e)
    # A 12 µm Nb junction with lambda = 90 nm and 300 nm films: d' = 1.8 + 2 x 90 tanh(300/180)
    # nm = 168.8 nm (Weihnacht's formula, evaluated here by hand).
    d_mag = 1.8e-9 + 2 * 90e-9 * math.tanh(300 / 180)
    inputs = {"length_m": 12e-6, "barrier_m": 1.8e-9, "t1_m": 300e-9, "lambda1_m": 90e-9}
    expected = phi0 / (12e-6 * d_mag)
    for ratio, flagged in ((1.0, False), (0.7, False), (1.4, False), (0.15, True), (2.0, True)):
        block = {"inputs": inputs, "branch": "positive",
                 "magnetic_thickness_m": phi0 / (12e-6 * expected * ratio),
                 "expected_period_T": expected}
        found = period_geometry_flags(block)
        assert bool(found) is flagged, ratio
        if found:
            assert found[0].evidence["period_over_expected"] == pytest.approx(ratio, rel=1e-9)


def test_numbers_for_people_and_for_files():
    assert measure(7.3090e-4, 3.5e-7, (("mT", 1e-3),)) == "0.73090 ± 0.00035 mT"
    assert measure(-1e-9, 2e-6, (("mT", 1e-3),)) == "0.0000 ± 0.0020 mT"  # no "-0.0000"
    assert measure(None, None) == "not determined"
    assert evidence_item("f_scale_A", 1.2799638028452413e-06) == "f scale = 1.28 µA"
    assert evidence_item("t1_m", 3e-7) == "t1 = 300 nm"
    assert plural(1, "lobe") == "1 lobe" and plural(2, "branch", "branches") == "2 branches"
    # Unit conversion noise is dropped; every other float keeps its shortest round trip.
    assert csv_number(-1.475 * 1e-3) == "-0.001475"
    rng = np.random.default_rng(3)
    for value in rng.normal(0, 1e-6, 200):
        # Within 5e-15 of the value, and exact whenever 15 digits say it all.
        assert abs(float(csv_number(value)) - value) <= 5e-15 * abs(value)
        short = float(f"{value:.12g}")
        assert csv_number(short) == repr(short)
    for mt in np.round(rng.uniform(-5, 5, 200), 4):
        assert csv_number(mt * 1e-3) == repr(float(f"{mt:.4f}e-3"))
    assert csv_number(float("nan")) == "" and csv_number(None) == ""
    assert shown_path(demo_files()["kt14_j03.csv"]) == "kt14_j03.csv"


def test_csv_files_carry_no_conversion_noise(short_report):
    # The sweep's fields are written in mT with a few decimals: in tesla they stay short.
    # (The demo map's HDF5 holds binary float noise of its own, so it is not used here.)
    for name in ("fit.csv",):
        lines = (short_report / name).read_text().splitlines()
        column = lines[0].split(",").index("field_T")
        fields = [line.split(",")[column] for line in lines[1:]]
        assert fields and max(_significant(f) for f in fields) <= 6, name


def test_old_documents_with_j_still_read(map_report_dir):
    doc = json.loads((map_report_dir / "result.json").read_text())
    new = doc["current_density"]["positive"]
    x = np.asarray(new["x_over_length"])
    inside = np.abs(x) <= 0.5
    assert np.trapezoid(np.asarray(new["j_over_mean"])[inside], x[inside]) == pytest.approx(1)
    old = {k: v for k, v in new.items() if "over_mean" not in k}
    for key in ("j", "j_low", "j_high", "j_uniform"):
        old[key] = [37.0 * v for v in new[f"{key}_over_mean"]]
    doc["current_density"]["positive"] = old
    doc["schema_version"] = 1
    back = Result.from_dict(doc).current_density["positive"]
    assert "j" not in back
    np.testing.assert_allclose(back["j_over_mean"], new["j_over_mean"], rtol=1e-12)
    np.testing.assert_allclose(back["j_high_over_mean"], new["j_high_over_mean"], rtol=1e-12)


def test_figures_keep_series_apart_and_user_text_plain(map_report_dir):
    from jjpattern.io import load_map
    from jjpattern.notebook import pattern_figure
    from jjpattern.report.plot import map_figure

    result = Result.read(map_report_dir / "result.json")
    fig = map_figure(load_map(demo_files()["kt14_j07_map.h5"]), result.extraction)
    ax = fig.axes[0]
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert len(labels) == len(set(labels)) == 4
    styles = {(line.get_marker(), line.get_color()) for line in ax.get_lines()
              if line.get_label() in labels}
    assert len(styles) == 4
    fig = pattern_figure(result.fits, "KT$14$ costs $5")
    assert fig._suptitle.get_text() == "KT$14$ costs $5"
    assert fig._suptitle.get_parse_math() is False
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert len(labels) == len(set(labels))
    from matplotlib import pyplot as plt

    plt.close("all")


def test_notebook_display_and_names(map_report_dir):
    result = Result.read(map_report_dir / "result.json")
    page = result._repr_html_()
    parser = _visible(page)
    assert "headline" in page and "data:image/png;base64," in page
    assert all(SCOPE.match(h) for h in parser.headings) and parser.headings
    assert parser._stack == []  # every opened element closed
    assert repr(result).startswith("Result('KT14-J07', fits=[positive: rectangular")
    assert re.fullmatch(r"FitResult\('positive', rectangular, period 0\.\d+ ± 0\.\d+ mT, "
                        r"Ic0 \d+\.\d+ ± 0\.\d+ µA, points=161\)", repr(result.fits[0]))
    from matplotlib.figure import Figure

    assert isinstance(result.plot(), Figure)
    documented = {"analyze", "analyze_arrays", "load", "load_map", "extract", "fit_pattern",
                  "Result", "Settings", "InputError", "__version__"}
    assert documented <= set(dir(jjpattern)) and documented <= set(jjpattern.__all__)
    readme = (pathlib.Path(jjpattern.__file__).parents[1] / "README.md").read_text("utf-8")
    notebook = readme.split("## In a notebook")[1].split("\n## ")[0]
    assert set(re.findall(r"jjpattern\.(\w+)\(", notebook)) <= set(jjpattern.__all__)


def test_sweep_repr_and_python_advice():
    sweep = jjpattern.load(demo_files()["kt14_j03.csv"])
    assert repr(sweep) == "Sweep(branches=2, points=1202, field 'B (mT)' -5..5 mT)"
    with pytest.raises(jjpattern.InputError) as err:
        jjpattern.load(demo_files()["kt14_j07_map.h5"])
    assert "jjpattern.load_map" in str(err.value) and "--" not in str(err.value)


def test_arrays_in_mT_and_uA():
    # |sinc| with a 0.7 mT period, measured as magnitudes with noise folding at the nodes.
    rng = np.random.default_rng(8)
    b_mT = np.linspace(-3, 3, 241)
    ic_uA = np.abs(10 * np.sinc((b_mT - 0.05) / 0.7) + rng.normal(0, 0.05, b_mT.size))
    with pytest.warns(UserWarning, match="field_unit='mT'"):
        jjpattern.fit_pattern(b_mT, ic_uA * 1e-6, geometry="rectangular")
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # units given: nothing to warn about
        fit = jjpattern.fit_pattern(b_mT, ic_uA, field_unit="mT", current_unit="uA",
                                    geometry="rectangular")
    assert fit.period_T == pytest.approx(0.7e-3, rel=0.01)
    assert fit.ic0_A == pytest.approx(10e-6, rel=0.02)


def test_stages_are_announced_to_a_progress_callback():
    from jjpattern.cli import _terminal_progress
    from jjpattern.pipeline import analyze_input

    said = []
    analyze_input(demo_files()["kt14_j11.tsv"], model="rectangular", progress=said.append)
    assert said == ["reading the input", "fitting and diagnosing the pattern"]
    assert _terminal_progress() is None  # standard error is not a terminal under pytest
