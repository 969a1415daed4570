"""The criteria registry, threshold parsing, and the extraction summary (to_dict, CSV table).

Maps follow the overdamped RSJ curve V = Rn sqrt(I^2 - Ic^2) (Stewart 1968,
McCumber 1968, beta_c -> 0), from jjpattern.synthetic.rsj_map.
"""

import json
import subprocess
import sys

import numpy as np
import pytest

from jjpattern.errors import InputError
from jjpattern.extract import registry
from jjpattern.extract.engine import CRITERIA, extract, extraction_table_csv
from jjpattern.extract.registry import (
    REGISTRY,
    Voltage,
    criterion_names,
    parse_threshold,
    resolve,
)
from jjpattern.fmt import csv_number
from jjpattern.io.maps import IVMap
from jjpattern.synthetic import bias_sweep, ideal, rsj_map

RN = 12.0


def _map(rng, *, n_field=61, n_bias=2001, i_max=16e-6, mode="up", noise=0.05e-6):
    field = np.linspace(-3e-3, 3e-3, n_field)
    ic = ideal(field, "rectangular", 10e-6, 1e-3, 0.1e-3)
    bias = bias_sweep(i_max, n_bias, mode)
    v = rsj_map(rng, field, ic, ic, RN, bias, noise, offset_V=2e-6)
    return IVMap("m.h5", None, field, np.broadcast_to(bias, v.shape), v, "voltage"), ic


def test_registry_names_and_auto():
    assert criterion_names() == ("auto", "voltage", "dvdi-peak", "dvdi-threshold",
                                 "resistance")
    assert CRITERIA == criterion_names(auto=False)
    assert all(cls.name == name for name, cls in REGISTRY.items())
    assert resolve("auto", "voltage").name == "voltage"
    assert resolve("auto", "dvdi").name == "dvdi-peak"
    with pytest.raises(InputError, match="holds dV/dI.*choose dvdi-peak or dvdi-threshold"):
        resolve("resistance", "dvdi", "m.h5")


def test_unknown_criterion_lists_every_name():
    ivmap, _ = _map(np.random.default_rng(1), n_field=20, n_bias=201)
    with pytest.raises(InputError) as err:
        extract(ivmap, criterion="volts")
    for name in criterion_names():
        assert name in str(err.value)


def test_registry_module_does_not_load_numpy():
    # The command-line parser takes its --criterion choices from here.
    code = ("import sys, jjpattern.extract.registry as r; r.criterion_names();"
            "print([m for m in ('numpy', 'scipy') if m in sys.modules])")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "[]"


@pytest.mark.parametrize(("text", "criterion", "value"), [
    ("2uV", "voltage", 2e-6), ("2 \u00b5V", "auto", 2e-6), ("0.5mV", "voltage", 5e-4),
    ("5Ohm", "dvdi-threshold", 5.0), ("2kOhm", "dvdi-threshold", 2e3),
    ("0.05", "resistance", 0.05), ("1e-1", "resistance", 0.1)])
def test_parse_threshold_to_si(text, criterion, value):
    # SI prefixes (common practice).
    assert parse_threshold(text, criterion) == pytest.approx(value, rel=1e-12)


@pytest.mark.parametrize(("text", "criterion", "message"), [
    ("5Ohm", "voltage", "choose --criterion dvdi-threshold"),
    ("2", "voltage", "give the unit, e.g. 2uV"),
    ("5", "dvdi-threshold", "give the unit, e.g. 5Ohm"),
    ("0.05Ohm", "resistance", "without a unit"),
    ("1uV", "dvdi-peak", "takes no threshold"),
    ("-2uV", "voltage", "positive"),
    ("0", "resistance", "positive"),
    ("two uV", "voltage", "number with its unit"),
    ("1.2.3uV", "voltage", "is not a number"),
    ("3furlong", "dvdi-threshold", "unknown resistance unit"),
    ("2uV", "volts", "unknown criterion")])
def test_parse_threshold_refuses_with_the_fix(text, criterion, message):
    with pytest.raises(InputError, match=message):
        parse_threshold(text, criterion)
    assert parse_threshold(None, criterion if criterion in REGISTRY else "auto") is None


def test_given_thresholds_read_the_rsj_curve_where_expected():
    rng = np.random.default_rng(2)
    ivmap, ic = _map(rng)
    clear = ic > 3e-6
    # |V| = Rn sqrt(I^2 - Ic^2) reaches V_th at I = sqrt(Ic^2 + (V_th/Rn)^2).
    ex = extract(ivmap, criterion="voltage", threshold=20e-6)
    assert ex.threshold == {"value": 20e-6, "unit": "V", "chosen": "given"}
    expect = np.sqrt(ic**2 + (20e-6 / RN) ** 2)
    assert np.max(np.abs(ex.branches[0].ic_A[clear] / expect[clear] - 1)) < 0.003
    # V/I = Rn sqrt(1 - Ic^2/I^2) reaches f Rn at I = Ic / sqrt(1 - f^2).
    ex = extract(ivmap, criterion="resistance", threshold=0.2)
    assert ex.threshold["fraction_of_rn"] == 0.2 and ex.threshold["chosen"] == "given"
    expect = ic / np.sqrt(1 - 0.2**2)
    assert np.max(np.abs(ex.branches[0].ic_A[clear] / expect[clear] - 1)) < 0.003


@pytest.mark.parametrize(("criterion", "threshold", "message"), [
    ("dvdi-peak", 1.0, "takes no threshold"), ("voltage", -1e-6, "positive"),
    ("voltage", float("nan"), "positive"), ("resistance", 0.0, "e.g. 0.05")])
def test_bad_threshold_in_the_api(criterion, threshold, message):
    ivmap, _ = _map(np.random.default_rng(3), n_field=20, n_bias=201)
    with pytest.raises(InputError, match=message):
        extract(ivmap, criterion=criterion, threshold=threshold)


def test_a_new_criterion_is_one_class_and_one_line(monkeypatch):
    class Fixed20uV(Voltage):
        """|V - V0| above 20 uV, always."""

        name = "voltage-20uV"
        auto_for = ()
        threshold_unit = None

        def level(self, data, threshold):
            return 20e-6, {"value": 20e-6, "unit": "V", "chosen": "fixed"}

    monkeypatch.setitem(registry.REGISTRY, Fixed20uV.name, Fixed20uV)
    assert "voltage-20uV" in criterion_names()
    ivmap, ic = _map(np.random.default_rng(4), n_field=31)
    new = extract(ivmap, criterion="voltage-20uV")
    given = extract(ivmap, criterion="voltage", threshold=20e-6)
    assert new.criterion == "voltage-20uV"
    assert np.array_equal(new.branches[0].ic_A, given.branches[0].ic_A, equal_nan=True)
    assert resolve("auto", "voltage").name == "voltage"


def _table_as_before(ex):
    # The table as Extraction.table_csv wrote it before the dict existed.
    cols, data = ["field_T"], [ex.field_T]
    for b in ex.branches:
        short = "pos" if b.name == "positive" else "neg"
        cols += [f"ic_{short}_A", f"status_{short}", f"iretrap_{short}_A"]
        data += [b.ic_A, b.status, b.retrap_A]
    lines = [",".join(cols)]
    for i in range(ex.field_T.size):
        lines.append(",".join(c[i] if isinstance(c[i], str) else csv_number(c[i])
                              for c in data))
    return "\n".join(lines) + "\n"


def test_to_dict_is_json_ready_and_gives_the_table():
    rng = np.random.default_rng(5)
    # A narrow window censors the tall rows; "up" has no sweep back on the positive side
    # (no retrapping, NaN) and only a sweep back on the negative one (return-sweep).
    ivmap, ic = _map(rng, n_field=41, n_bias=801, i_max=7e-6)
    ex = extract(ivmap)
    block = ex.to_dict()
    assert list(block)[:13] == ["criterion", "threshold", "signal", "layout", "map_shape",
                                "amplifier_offset_V", "zero_branch_noise_V",
                                "normal_resistance_ohm", "rows_skipped", "field_T",
                                "branches", "methods_text", "methods_references"]
    text = json.dumps(block, allow_nan=False)
    assert len(text) < ivmap.signal.size  # the raw map (41 x 801 numbers) is not in it
    assert block["amplifier_offset_V"] == pytest.approx(2e-6, abs=0.05e-6)
    pos = block["branches"][0]
    assert list(pos)[:7] == ["branch", "source", "status_counts", "retrapping_over_switching",
                             "ic_A", "status", "retrap_A"]
    ok = ex.branches[0].status == "ok"
    assert 0 < ok.sum() < ok.size
    assert [v is None for v in pos["ic_A"]] == (~ok).tolist()
    # Each kept row carries an uncertainty; censored rows none.
    assert [v is None for v in pos["ic_uncertainty_A"]] == (~ok).tolist()
    assert np.array_equal(np.array(pos["ic_A"], dtype=float), ex.branches[0].ic_A,
                          equal_nan=True)
    assert pos["status_counts"]["above-max"] == int((ic > 7.1e-6).sum())
    assert block["branches"][1]["source"] == "return-sweep"
    table = ex.table_csv()
    assert table == _table_as_before(ex)
    assert extraction_table_csv(json.loads(text)) == table
    assert table.count("\n") == ex.field_T.size + 1


@pytest.mark.parametrize(("kind", "criterion", "threshold", "sentence", "refs"), [
    ("voltage", "voltage", 2.5e-7,
     "as the first bias current, on sweeps away from zero bias, at which |V - V0| exceeded "
     "0.25 \u00b5V (given), read on the square-root onset of the resistively shunted "
     "junction (V^2 linear in I^2 through the first three points above the level), or the "
     "middle of the bias step where the voltage jumps; the amplifier offset V0 was "
     "estimated in each field row as the median voltage near zero bias and removed. Each "
     "critical current carries the bias step / sqrt(12) where the step is not resolved, and "
     "otherwise the voltage noise propagated through that line [rsj].", ["rsj"]),
    ("voltage", "resistance", 0.1,
     "as the first bias current at which V/I exceeded 0.1 Rn, with Rn from a linear fit of "
     "the high-bias part of each I-V curve, read on the onset of the resistively shunted "
     "junction ((V/I)^2 linear in 1/I^2 through the first three points above the level).",
     []),
    ("voltage", "dvdi-threshold", 6.0,
     "as the first bias current at which dV/dI exceeded 6 ohm. dV/dI was computed with a "
     "7-point quadratic Savitzky-Golay derivative [sg].", ["sg"]),
    ("dvdi", "dvdi-peak", None,
     "as the bias current of the largest dV/dI, refined by a parabola through 3 points.", [])])
def test_methods_text_states_the_criterion_and_level(kind, criterion, threshold, sentence,
                                                     refs):
    ivmap, _ = _map(np.random.default_rng(6), n_field=41, n_bias=801)
    if kind == "dvdi":
        dvdi = np.gradient(ivmap.signal, axis=1) / np.gradient(ivmap.bias_A[0])
        ivmap = IVMap("d", None, ivmap.field_T, ivmap.bias_A, dvdi, "dvdi")
    block = extract(ivmap, criterion=criterion, threshold=threshold).to_dict()
    what = "voltage" if kind == "voltage" else "dV/dI"
    assert block["methods_text"] == (f"Critical currents were extracted from a 41 x 801 "
                                     f"{what} map {sentence}")
    assert list(block["methods_references"]) == refs
    if refs:
        assert ("Savitzky" if refs == ["sg"] else "McCumber") in block["methods_references"][
            refs[0]]


def test_only_criteria_that_use_rn_need_it():
    # dV/dI of the RSJ curve, Rn |I| / sqrt(I^2 - Ic^2) above Ic (derivative of the
    # Stewart-McCumber formula), zero below; the high-bias part (where Rn is read) is lost.
    rng = np.random.default_rng(7)
    field = np.linspace(-3e-3, 3e-3, 41)
    ic = ideal(field, "rectangular", 10e-6, 1e-3, 0.0)
    bias = bias_sweep(16e-6, 1601, "out-and-back")
    with np.errstate(all="ignore"):
        excess = bias[None, :] ** 2 - ic[:, None] ** 2
        dvdi = np.where(excess > 0, RN * np.abs(bias) / np.sqrt(np.abs(excess)), 0.0)
    dvdi = np.minimum(dvdi, 50 * RN) + rng.normal(0, 0.05, dvdi.shape)
    dvdi[:, np.abs(bias) > 0.7 * 16e-6] = np.nan
    ivmap = IVMap("r.h5", None, field, np.broadcast_to(bias, dvdi.shape), dvdi, "dvdi")
    ex = extract(ivmap)
    assert ex.criterion == "dvdi-peak" and ex.rn_ohm is None
    clear = (ic > 3e-6) & (ic < 0.65 * 16e-6)
    # The peak sits on the first point above Ic, and the parabola may move it by up to
    # one step: within two bias steps (80 nA).
    assert np.max(np.abs(ex.branches[0].ic_A[clear] - ic[clear])) < 0.08e-6
    with pytest.raises(InputError, match="Rn could not be fitted"):
        extract(ivmap, criterion="dvdi-threshold")
    given = extract(ivmap, criterion="dvdi-threshold", threshold=3 * RN)
    assert np.max(np.abs(given.branches[0].ic_A[clear] - ic[clear])) < 0.08e-6
