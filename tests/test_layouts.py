"""Files laid out as labs write them: signed columns, sweeps up and down, regional formats.

Every file is written here from a pattern made independently of the code under test:
a rectangular junction with uniform current density, Ic = Ic0 |sin(pi u)/(pi u)| with
u = (B - B0)/period (Rowell, PRL 11, 200 (1963); Barone & Paterno 1982, ch. 4), measured
as a magnitude |Ic + noise| (the noise folds at the nodes), rows in acquisition order.
"""

import json

import numpy as np
import pytest

from jjpattern.cli import main
from jjpattern.errors import InputError
from jjpattern.io import read
from jjpattern.io.layout import run_labels, sweep_runs
from jjpattern.pipeline import analyze_data
from jjpattern.report.methods import methods_paragraph
from jjpattern.report.summary import render_summary
from jjpattern.result import Result
from jjpattern.settings import DiagnoseSettings, ReadSettings, Settings

PERIOD_T = 0.45e-3
TRUTH = {"positive": (15e-6, 0.020e-3), "negative": (14e-6, -0.015e-3)}  # Ic0, B0
SHIFT_T = 0.060e-3  # synthetic hysteresis: B0 of the down sweep minus B0 of the up sweep
NOISE_A = 0.15e-6
FAST = Settings(diagnose=DiagnoseSettings(enabled=False))


def pattern_A(field_T, ic0_A, offset_T):
    # numpy.sinc(u) = sin(pi u) / (pi u)
    return ic0_A * np.abs(np.sinc((field_T - offset_T) / PERIOD_T))


def measured_A(rng, field_T, ic0_A, offset_T):
    return np.abs(pattern_A(field_T, ic0_A, offset_T) + rng.normal(0.0, NOISE_A, field_T.size))


def assert_recovers(fit, ic0_A, offset_T, sigmas=5.0):
    """Period, offset and Ic0 within ``sigmas`` standard errors of the truth (and 1 %)."""
    assert fit.period_T == pytest.approx(PERIOD_T, rel=0.01)
    assert abs(fit.period_T - PERIOD_T) < sigmas * fit.period_stderr_T
    assert abs(fit.field_offset_T - offset_T) < sigmas * fit.field_offset_stderr_T
    assert fit.ic0_A == pytest.approx(ic0_A, rel=0.01)
    assert abs(fit.ic0_A - ic0_A) < sigmas * fit.ic0_stderr_A


def _cells(values, digits=6):
    return [f"{v:.{digits}f}" for v in values]


def one_way_rows(seed=1, n=301):
    """Field (mT) and Ic+/|Ic-| (uA) as text cells, field swept up once."""
    rng = np.random.default_rng(seed)
    field_T = np.linspace(-2e-3, 2e-3, n)
    pos = measured_A(rng, field_T, *TRUTH["positive"])
    neg = measured_A(rng, field_T, *TRUTH["negative"])
    return _cells(field_T * 1e3), _cells(pos * 1e6), _cells(neg * 1e6)


def _write(path, lines):
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


# -- layouts that differ only in how they are written --------------------------------------
def plain_csv(path, b, p, n):
    return _write(path, ["B (mT),Ic+ (uA),Ic- (uA)"]
                  + [f"{x},{y},-{z}" for x, y, z in zip(b, p, n, strict=True)])


def comma_semicolon_units_row(path, b, p, n):
    comma = lambda s: s.replace(".", ",")  # noqa: E731
    return _write(path, ["# junction: KT14-J03", "Field;Critical current +;Critical current -",
                         "mT;uA;uA"]
                  + [f"{comma(x)};{comma(y)};-{comma(z)}" for x, y, z in zip(b, p, n,
                                                                               strict=True)])


def comma_tab_brackets(path, b, p, n):
    comma = lambda s: s.replace(".", ",")  # noqa: E731
    return _write(path, ["B-field\tIsw pos\tIsw neg", "[mT]\t[uA]\t[uA]"]
                  + [f"{comma(x)}\t{comma(y)}\t{comma(z)}" for x, y, z in zip(b, p, n,
                                                                              strict=True)])


def signed_alternating(path, b, p, n):
    lines = ["Field (mT),Ic (uA)"]
    for x, y, z in zip(b, p, n, strict=True):
        lines += [f"{x},{y}", f"{x},-{z}"]
    return _write(path, lines)


def signed_blocks_in_ampere(path, b, p, n):
    # All positive rows, then all negative ones; currents in A, header in words.
    lines = ["magnetic field (mT);critical current (A)"]
    lines += [f"{x};{float(y) * 1e-6!r}" for x, y in zip(b, p, strict=True)]
    lines += [f"{x};{-float(z) * 1e-6!r}" for x, z in zip(b, n, strict=True)]
    return _write(path, lines)


def whitespace_comma(path, b, p, n):
    comma = lambda s: s.replace(".", ",")  # noqa: E731
    return _write(path, ["B Ic+ Ic-", "mT uA uA"]
                  + [f"{comma(x)}   {comma(y)}   {comma(z)}" for x, y, z in zip(b, p, n,
                                                                              strict=True)])


LAYOUTS = [comma_semicolon_units_row, comma_tab_brackets, signed_alternating,
           signed_blocks_in_ampere, whitespace_comma]


@pytest.fixture(scope="module")
def plain(tmp_path_factory):
    rows = one_way_rows()
    path = plain_csv(tmp_path_factory.mktemp("plain") / "plain.csv", *rows)
    sweep = read(path)
    return rows, sweep, analyze_data(sweep, FAST)


def test_plain_csv_recovers_the_truth(plain):
    _, sweep, result = plain
    assert [f.branch for f in result.fits] == ["positive", "negative"]
    assert [f.segment for f in result.fits] == ["", ""]
    for fit in result.fits:
        assert_recovers(fit, *TRUTH[fit.branch])
    assert "layout" not in sweep.summary() and result.field_hysteresis is None


@pytest.mark.parametrize("layout", LAYOUTS, ids=lambda f: f.__name__)
def test_layouts_give_the_fits_of_the_plain_csv(tmp_path, plain, layout):
    rows, sweep0, result0 = plain
    sweep = read(layout(tmp_path / "f.txt", *rows))
    assert [b.name for b in sweep.branches] == ["positive", "negative"]
    for b, b0 in zip(sweep.branches, sweep0.branches, strict=True):
        np.testing.assert_allclose(b.field_T, b0.field_T, rtol=1e-12, atol=0)
        np.testing.assert_allclose(b.ic_A, b0.ic_A, rtol=1e-12, atol=0)
        assert b.segment == ""
    result = analyze_data(sweep, FAST)
    for fit, fit0 in zip(result.fits, result0.fits, strict=True):
        assert fit.branch == fit0.branch
        for key in ("period_T", "field_offset_T", "ic0_A", "period_stderr_T"):
            assert getattr(fit, key) == pytest.approx(getattr(fit0, key), rel=1e-7)


def test_layout_notes_say_what_was_read(tmp_path, plain):
    rows = plain[0]
    notes = read(comma_semicolon_units_row(tmp_path / "a.csv", *rows)).summary()["layout"]
    assert notes == {"units_row_line": 3, "decimal": ","}
    notes = read(signed_alternating(tmp_path / "b.csv", *rows)).summary()["layout"]
    assert notes["signed_columns"] == [{"column": "Ic (uA)", "positive_rows": 301,
                                        "negative_rows": 301, "zero_rows_set_aside": 0,
                                        "nonfinite_rows_set_aside": 0}]


def test_signed_column_shuffled_with_zero_and_missing_rows(tmp_path):
    # Rows in random order (a script that shuffles the fields), two rows reading zero
    # (the junction never switched) and one missing value: set aside and counted.
    rng = np.random.default_rng(7)
    field_T = np.linspace(-2e-3, 2e-3, 241)
    pos = measured_A(rng, field_T, *TRUTH["positive"])
    neg = -measured_A(rng, field_T, *TRUTH["negative"])
    field = np.r_[field_T, field_T, 0.3e-3, -0.7e-3, 0.1e-3]
    ic = np.r_[pos, neg, 0.0, 0.0, np.nan]
    order = rng.permutation(field.size)
    path = _write(tmp_path / "s.csv", ["B (T),Ic (A)"] + [
        f"{float(b)!r},{float(i)!r}" for b, i in zip(field[order], ic[order], strict=True)])
    sweep = read(path)
    assert [b.label for b in sweep.branches] == ["positive", "negative"]
    assert [b.points_used for b in sweep.branches] == [241, 241]
    signed = sweep.layout["signed_columns"][0]
    assert (signed["zero_rows_set_aside"], signed["nonfinite_rows_set_aside"]) == (2, 1)
    result = analyze_data(sweep, FAST)
    for fit in result.fits:
        assert_recovers(fit, *TRUTH[fit.branch])


def test_noise_below_zero_at_the_nodes_is_not_a_second_branch(tmp_path):
    # A lock-in style Ic column, not folded: a few small negative values near the nodes.
    rng = np.random.default_rng(8)
    field_T = np.linspace(-2e-3, 2e-3, 301)
    ic = pattern_A(field_T, *TRUTH["positive"]) + rng.normal(0, NOISE_A, field_T.size)
    assert 2 <= (ic < 0).sum() < 10
    path = _write(tmp_path / "s.csv", ["B (T),Ic (A)"] + [
        f"{float(b)!r},{float(i)!r}" for b, i in zip(field_T, ic, strict=True)])
    sweep = read(path)
    assert [b.label for b in sweep.branches] == ["positive"] and not sweep.layout


# -- sweeps up and down ----------------------------------------------------------------------
def up_down_file(path, rng, shift_T, jitter_T=5e-6, n=301):
    """Up then down, a noisy field readback, and a 4-row approach from above at the start."""
    up = np.linspace(-2e-3, 2e-3, n)
    approach = np.array([-1.2e-3, -1.5e-3, -1.8e-3, -2.05e-3])
    field = np.r_[approach, up, up[::-1]]
    field = field + rng.normal(0, jitter_T, field.size)
    down = np.r_[np.zeros(approach.size + n, dtype=bool), np.ones(n, dtype=bool)]
    lines = ["# junction: KT14-J05", "B (mT)\tIc+ (uA)\tIc- (uA)"]
    for b, is_down in zip(field, down, strict=True):
        extra = shift_T if is_down else 0.0
        p = measured_A(rng, np.array([b]), TRUTH["positive"][0], TRUTH["positive"][1] + extra)
        m = measured_A(rng, np.array([b]), TRUTH["negative"][0], TRUTH["negative"][1] + extra)
        lines.append(f"{b * 1e3:.6f}\t{p[0] * 1e6:.6f}\t{-m[0] * 1e6:.6f}")
    return _write(path, lines)


def test_up_and_down_are_fitted_apart_and_their_shift_measured(tmp_path):
    sweep = read(up_down_file(tmp_path / "ud.tsv", np.random.default_rng(11), SHIFT_T))
    assert [b.label for b in sweep.branches] == ["positive up", "positive down",
                                                 "negative up", "negative down"]
    assert sweep.layout["points_in_short_reversals"] == 2 * 3  # the approach, less its turn
    # The top row is measured twice (end of the way up, start of the way down); the
    # readback jitter decides which run keeps the higher reading of it.
    used = [b.points_used for b in sweep.branches]
    assert used[0] + used[1] == 603 and used[2:] == used[:2] and set(used) <= {301, 302}
    result = analyze_data(sweep, FAST)
    assert [(f.branch, f.segment) for f in result.fits] == [
        ("positive up", "up"), ("positive down", "down"),
        ("negative up", "up"), ("negative down", "down")]
    for fit in result.fits:
        polarity = fit.branch.split()[0]
        ic0, offset = TRUTH[polarity]
        assert_recovers(fit, ic0, offset + (SHIFT_T if fit.segment == "down" else 0.0))
    pairs = result.field_hysteresis["pairs"]
    assert [(p["branch"], p["first"], p["second"]) for p in pairs] == [
        ("positive", "up", "down"), ("negative", "up", "down")]
    for pair in pairs:
        assert abs(pair["offset_shift_T"] - SHIFT_T) < 5 * pair["offset_shift_stderr_T"]
        assert pair["offset_shift_periods"] == pytest.approx(SHIFT_T / PERIOD_T, rel=0.05)
        assert abs(pair["period_ratio"] - 1) < 5 * pair["period_ratio_stderr"]
        assert abs(pair["ic0_ratio"] - 1) < 5 * pair["ic0_ratio_stderr"]
    flagged = [(f.code, f.branch) for f in result.flags if f.code == "field-hysteresis"]
    assert flagged == [("field-hysteresis", "positive down"),
                       ("field-hysteresis", "negative down")]
    doc = json.loads(result.to_json())
    assert doc["fits"][1]["segment"] == "down" and doc["field_hysteresis"]["pairs"]
    text = render_summary(result)
    assert "positive branch, down sweep, rectangular model" in text
    assert "The field was swept both ways (up, down)" in text
    assert "positive branch, down sweep against up sweep: offset shift 6" in text
    methods = methods_paragraph(result, "")
    assert "each sweep was fitted separately, and 6 points" in methods
    assert "the down sweep differs from that of the up sweep by 6" in methods
    again = type(result).from_json(result.to_json())
    assert again.to_json() == result.to_json() and again.fits[1].segment == "down"


def test_no_hysteresis_put_in_none_flagged(tmp_path):
    sweep = read(up_down_file(tmp_path / "ud.tsv", np.random.default_rng(12), 0.0))
    result = analyze_data(sweep, FAST)
    assert not [f for f in result.flags if f.code == "field-hysteresis"]
    for pair in result.field_hysteresis["pairs"]:
        assert abs(pair["offset_shift_T"]) < 5 * pair["offset_shift_stderr_T"]


def test_old_documents_without_segments_read_back():
    doc = json.loads(Result.from_json(json.dumps({
        "schema_version": 1, "input": {"path": "x.csv"}, "settings": {},
        "fits": [{"branch": "positive", "model": "rectangular", "period_T": 1e-3}]})).to_json())
    assert doc["fits"][0]["segment"] == "" and "field_hysteresis" not in doc


# The field sequences below are made by hand; the expected runs are read off them.
STEP = 0.01
UP = np.arange(-1.0, 1.0 + STEP / 2, STEP)


@pytest.mark.parametrize(("name", "field", "runs", "aside"), [
    ("one way", UP, [(0, UP.size, 1)], 0),
    ("held steps", np.repeat(UP, 3), [(0, 3 * UP.size, 1)], 0),
    ("up down up", np.r_[UP, UP[::-1], UP], [(0, 201, 1), (201, 402, -1), (402, 603, 1)], 0),
    ("reset, two passes", np.r_[UP, UP], [(0, 201, 1), (201, 402, 1)], 0),
    ("overshoot of 4 rows, then down", np.r_[UP, [1.01, 1.02, 1.0, 0.99], UP[::-1]],
     [(0, 203, 1), (203, 406, -1)], 0),
    ("5-row glitch back inside one pass", np.r_[UP[:100], UP[99] - STEP * np.arange(1, 6),
                                                UP[100:]], [(0, 206, 1)], 4),
    ("one point again at the end", np.r_[UP, 0.0], [(0, 202, 1)], 0),
    ("shuffled", np.random.default_rng(3).permutation(UP), [(0, UP.size, 0)], 0),
    ("fast zigzag", np.tile(np.r_[np.linspace(0, 1, 5), np.linspace(1, 0, 5)], 20),
     [(0, 200, 0)], 0),
])
def test_sweep_runs(name, field, runs, aside):
    got, set_aside = sweep_runs(field)
    assert [(r.start, r.stop, r.direction) for r in got] == runs, name
    assert int(set_aside.sum()) == aside


def test_readback_jitter_larger_than_the_step_makes_no_turn():
    rng = np.random.default_rng(5)
    for _ in range(20):
        field = np.r_[UP, UP[::-1]] + rng.normal(0, 2 * STEP, 2 * UP.size)
        runs, aside = sweep_runs(field)
        assert [r.direction for r in runs] == [1, -1] and not aside.any()
        assert abs(runs[1].start - UP.size) <= 12  # the turn, within the jitter


def test_run_labels():
    assert run_labels([1]) == ["up"] and run_labels([1, -1]) == ["up", "down"]
    assert run_labels([1, -1, 1]) == ["up 1", "down", "up 2"]


# -- ambiguity, options ----------------------------------------------------------------------
def test_comma_as_separator_and_decimal_is_refused_then_settled(tmp_path, capsys, plain):
    b, p, _ = plain[0]
    path = _write(tmp_path / "c.csv", ["B (mT),Ic (uA)"] + [
        f"{x.replace('.', ',')},{y.replace('.', ',')}" for x, y in zip(b, p, strict=True)])
    assert main(["analyze", str(path)]) == 2
    err = capsys.readouterr().err
    assert "line 2" in err and "--decimal ," in err and len(err.strip().splitlines()) == 1
    assert main(["analyze", str(path), "--decimal", ",", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["settings"]["read"]["decimal"] == ","
    fit0 = plain[2].fits[0]
    assert doc["fits"][0]["period_T"] == pytest.approx(fit0.period_T, rel=1e-7)
    assert doc["fits"][0]["ic0_A"] == pytest.approx(fit0.ic0_A, rel=1e-7)


def test_decimal_comma_and_point_in_one_file_is_refused(tmp_path, capsys):
    rows = [f"{x:.3f};{abs(np.sinc(x)) * 10:.4f}" for x in np.linspace(-3, 3, 41)]
    rows[20] = rows[20].replace(".", ",")
    path = _write(tmp_path / "m.csv", ["B (mT);Ic (uA)"] + rows)
    assert main(["analyze", str(path)]) == 2
    err = capsys.readouterr().err
    assert "line 22" in err and "line 2 " in err and "--decimal" in err
    with pytest.raises(InputError, match="line 22, column 'B \\(mT\\)'"):
        read(path, ReadSettings(decimal="."))


def test_field_range_and_exclusions_from_the_command_line(tmp_path, capsys):
    rng = np.random.default_rng(21)
    field_T = np.linspace(-2e-3, 2e-3, 201)
    ic = measured_A(rng, field_T, *TRUTH["positive"])
    glitch = (field_T > 0.40e-3) & (field_T < 0.45e-3)
    ic[glitch] *= 0.6  # premature switching, left out by hand
    path = _write(tmp_path / "g.csv", ["B (mT),Ic (uA)"] + [
        f"{b * 1e3:.6f},{i * 1e6:.6f}" for b, i in zip(field_T, ic, strict=True)])
    assert main(["analyze", str(path), "--field-range", "-1.5mT:1500uT", "--exclude",
                 "0.40:0.45mT", "--exclude=-0.01:0.01mT", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    read_settings = doc["settings"]["read"]
    assert read_settings["field_range_T"] == pytest.approx([-1.5e-3, 1.5e-3], rel=1e-12)
    assert read_settings["exclude_T"] == [pytest.approx([0.40e-3, 0.45e-3], rel=1e-12),
                                          pytest.approx([-1e-5, 1e-5], rel=1e-12)]
    window = doc["input"]["layout"]["field_window"]
    inside = (np.abs(field_T) <= 1.5e-3 + 1e-12)
    assert window["points_outside_range"] == int((~inside).sum())
    assert window["points_excluded"] == int(glitch.sum()) + 1
    fitted = np.array(doc["fits"][0]["points"]["field_T"])
    assert fitted.min() >= -1.5e-3 - 1e-12 and not np.any((fitted > 0.4e-3) & (fitted < 0.45e-3))
    assert doc["fits"][0]["ic0_A"] == pytest.approx(TRUTH["positive"][0], rel=0.01)
    methods = methods_paragraph(Result.from_dict(doc), "")
    assert "between -1.5 mT and 1.5 mT were analysed" in methods
    assert "were excluded by hand" in methods
    settings = Settings.from_dict(doc["settings"])
    assert Settings.from_dict(settings.to_dict()) == settings
    assert settings.read.exclude_T[0] == pytest.approx((0.40e-3, 0.45e-3), rel=1e-12)


@pytest.mark.parametrize(("options", "message"), [
    (["--field-range", "-2:2"], "--field-range '-2:2': give the field unit"),
    (["--field-range", "2:-2mT"], "low end must be below"),
    (["--exclude", "1mT:"], "give both ends"),
    (["--field-range", "a:b"], "not a number"),
])
def test_bad_field_intervals(tmp_path, capsys, options, message):
    path = _write(tmp_path / "s.csv", ["B (mT),Ic (uA)", "0,1"])
    assert main(["analyze", str(path), *options]) == 2
    assert message in capsys.readouterr().err


def test_window_that_leaves_too_little(tmp_path):
    path = _write(tmp_path / "s.csv", ["B (mT),Ic (uA)"] + [
        f"{x},{abs(np.sinc(x)) * 10}" for x in np.linspace(-3, 3, 61)])
    with pytest.raises(InputError, match="only 6 usable points inside the field window"):
        read(path, ReadSettings(field_range_T=(0.0, 0.5e-3)))


def test_decimal_comma_given_refuses_a_decimal_point(tmp_path):
    rows = [f"{x:.3f};{abs(np.sinc(x)) * 10:.4f}".replace(".", ",")
            for x in np.linspace(-3, 3, 41)]
    rows[5] = rows[5].replace(",", ".")
    path = _write(tmp_path / "m.csv", ["B (mT);Ic (uA)"] + rows)
    with pytest.raises(InputError, match="line 7, column 'B \\(mT\\)': '-2.250' is not a number"):
        read(path, ReadSettings(decimal=","))


@pytest.mark.parametrize(("text", "expected"), [
    ("-2:2mT", (-2e-3, 2e-3)),
    ("-2mT:500uT", (-2e-3, 5e-4)),
    (":1G", (None, 1e-4)),  # 1 G = 1e-4 T (SI brochure, table of CGS units)
    ("0.5mT:", (5e-4, None)),
    (" -1.5 : 1.5 mT ", (-1.5e-3, 1.5e-3)),
])
def test_field_interval_parsing(text, expected):
    from jjpattern.io.units import parse_field_interval

    got = parse_field_interval(text, "--field-range")
    for g, e in zip(got, expected, strict=True):
        assert g == (None if e is None else pytest.approx(e, rel=1e-12))
