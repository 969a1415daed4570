"""Extraction of Ic from raw maps, on synthetic RSJ maps (jjpattern.synthetic.rsj_map).

The maps follow the overdamped resistively-shunted-junction curve
V = Rn sqrt(I^2 - Ic^2) (Stewart 1968, McCumber 1968, beta_c -> 0) or, for the
hysteretic case, switching at Ic and retrapping at a stated fraction of Ic.
"""

import os

import h5py
import numpy as np
import pytest

from jjpattern.cli import main
from jjpattern.errors import InputError
from jjpattern.extract.engine import extract
from jjpattern.io import load, load_map
from jjpattern.io.maps import IVMap
from jjpattern.pipeline import analyze_data as analyze_map
from jjpattern.settings import ReadSettings
from jjpattern.synthetic import bias_sweep, ideal, rsj_map

RN = 12.0


def _map(rng, *, mode="up", n_field=201, n_bias=2001, i_max=16e-6, noise=0.05e-6,
         retrap=None, ic_pos=10e-6, ic_neg=9.6e-6):
    field = np.linspace(-3e-3, 3e-3, n_field)
    icp = ideal(field, "rectangular", ic_pos, 1e-3, 0.1e-3)
    icn = ideal(field, "rectangular", ic_neg, 1e-3, 0.13e-3)
    bias = bias_sweep(i_max, n_bias, mode)
    v = rsj_map(rng, field, icp, icn, RN, bias, noise, offset_V=2e-6, retrap_fraction=retrap)
    ivmap = IVMap("synthetic", None, field, np.broadcast_to(bias, v.shape), v, "voltage")
    return ivmap, icp, icn, bias


@pytest.mark.parametrize("mode", ["up", "out-and-back"])
def test_voltage_criterion_recovers_rsj_ic(mode):
    rng = np.random.default_rng(1)
    ivmap, icp, icn, bias = _map(rng, mode=mode)
    result = extract(ivmap)
    step = np.median(np.abs(np.diff(bias)))
    for branch, truth in zip(result.branches, (icp, icn), strict=True):
        clear = truth > 200 * step  # at least 200 bias steps, so one step is <= 0.5 %
        assert np.all(branch.status[clear] == "ok")
        rel = np.abs(branch.ic_A[clear] / truth[clear] - 1)
        assert rel.max() < 0.005, branch.name
    assert result.offset_V == pytest.approx(2e-6, abs=0.02e-6)
    assert result.rn_ohm == pytest.approx(RN, rel=0.01)
    assert result.threshold["chosen"].startswith("5 x")


def test_fit_after_extraction_recovers_period_and_ic0():
    rng = np.random.default_rng(2)
    ivmap, *_ = _map(rng, mode="out-and-back", n_bias=2401)
    analysis = analyze_map(ivmap)
    pos = next(f for f in analysis.fits if f.branch == "positive")
    assert pos.period_T == pytest.approx(1e-3, rel=0.005)
    assert pos.ic0_A == pytest.approx(10e-6, rel=0.02)
    assert pos.field_offset_T == pytest.approx(0.1e-3, abs=0.01e-3)
    # The threshold reads sqrt(Ic^2 + (V_th/Rn)^2): the fitted floor is V_th / Rn.
    expected_floor = (analysis.extraction["threshold"]["value"]
                      / analysis.extraction["normal_resistance_ohm"])
    assert pos.node_floor_A == pytest.approx(expected_floor, rel=0.2)


def test_hysteretic_map_separates_switching_and_retrapping():
    rng = np.random.default_rng(3)
    ivmap, icp, _, _ = _map(rng, mode="out-and-back", retrap=0.35)
    result = extract(ivmap)
    for branch in result.branches:
        assert branch.source == "switching"
        assert branch.retrapping_ratio == pytest.approx(0.35, abs=0.01)
    clear = icp > 4e-6
    assert np.allclose(result.branches[0].ic_A[clear], icp[clear], rtol=0.01)
    codes = [f.code for f in result.flags]
    assert codes.count("hysteretic") == 2
    sweep = result.to_sweep()
    assert sweep.branch("positive").ic_A.max() == pytest.approx(10e-6, rel=0.01)


def test_upward_raster_of_hysteretic_junction_does_not_fit_retrapping_as_ic():
    rng = np.random.default_rng(4)
    # An out-and-back sweep on the positive side only, then a plain -Imax -> 0 sweep.
    quarter = np.linspace(0, 16e-6, 501)
    bias = np.concatenate([quarter, quarter[-2::-1], -quarter[::-1]])
    field = np.linspace(-3e-3, 3e-3, 101)
    ic = ideal(field, "rectangular", 10e-6, 1e-3, 0.0)
    v = rsj_map(rng, field, ic, ic, RN, bias, 0.05e-6, retrap_fraction=0.4)
    result = extract(IVMap("up", None, field, np.broadcast_to(bias, v.shape), v, "voltage"))
    neg = result.branches[1]
    assert neg.source == "return-sweep"
    assert [b.name for b in result.to_sweep().branches] == ["positive"]
    flag = next(f for f in result.flags if f.code == "return-sweep-branch")
    assert flag.evidence["fitted"] is False


def test_rows_beyond_the_bias_window_are_censored():
    rng = np.random.default_rng(5)
    ivmap, icp, _, _ = _map(rng, i_max=6e-6)
    result = extract(ivmap)
    pos = result.branches[0]
    above = icp > 6.1e-6
    assert above.sum() > 10
    assert np.all(pos.status[above] == "above-max")
    assert np.all(np.isnan(pos.ic_A[above]))
    flag = next(f for f in result.flags if f.code == "censored-rows" and f.branch == "positive")
    assert flag.evidence["above-max"] == int(above.sum())
    assert result.to_sweep().branch("positive").points_dropped >= above.sum()


def test_nan_rows_are_skipped_and_counted():
    rng = np.random.default_rng(6)
    ivmap, *_ = _map(rng)
    signal = ivmap.signal.copy()
    signal[10:15, :] = np.nan  # an aborted block of sweeps
    signal[20, :300] = np.nan  # a short gap in one row is kept
    damaged = IVMap("d", None, ivmap.field_T, ivmap.bias_A, signal, "voltage")
    result = extract(damaged)
    assert result.rows_skipped == 5
    assert result.field_T.size == ivmap.field_T.size - 5


def test_measured_dvdi_peak_gives_ic():
    # dV/dI of the RSJ curve, Rn |I| / sqrt(I^2 - Ic^2) above Ic (derivative of the
    # Stewart-McCumber formula), zero below, as a lock-in would record it.
    rng = np.random.default_rng(7)
    field = np.linspace(-3e-3, 3e-3, 121)
    ic = ideal(field, "rectangular", 10e-6, 1e-3, 0.0)
    bias = bias_sweep(16e-6, 2001, "out-and-back")
    with np.errstate(all="ignore"):
        excess = bias[None, :] ** 2 - ic[:, None] ** 2
        dvdi = np.where(excess > 0, RN * np.abs(bias) / np.sqrt(np.abs(excess)), 0.0)
    dvdi = np.minimum(dvdi, 50 * RN) + rng.normal(0, 0.05, dvdi.shape)
    result = extract(IVMap("r", None, field, np.broadcast_to(bias, dvdi.shape), dvdi, "dvdi"))
    assert result.criterion == "dvdi-peak"
    clear = ic > 3e-6
    rel = np.abs(result.branches[0].ic_A[clear] / ic[clear] - 1)
    # The peak sits on the first point above Ic: within one bias step (64 nA).
    assert np.max(np.abs(result.branches[0].ic_A[clear] - ic[clear])) < 0.07e-6
    assert np.median(rel) < 0.005


@pytest.mark.parametrize("criterion", ["resistance", "dvdi-threshold", "dvdi-peak"])
def test_other_criteria_on_voltage_maps(criterion):
    rng = np.random.default_rng(8)
    ivmap, icp, _, _ = _map(rng, mode="out-and-back", noise=0.02e-6)
    result = extract(ivmap, criterion=criterion)
    clear = icp > 4e-6
    rel = np.abs(result.branches[0].ic_A[clear] / icp[clear] - 1)
    # V/I = 0.05 Rn is reached at Ic / sqrt(1 - 0.05^2): 0.13 % above Ic. The
    # derivative criteria smooth over 7 points (3 bias steps either side).
    limit = {"resistance": 0.005, "dvdi-threshold": 0.03, "dvdi-peak": 0.02}[criterion]
    assert np.median(rel) < limit
    assert result.threshold["unit"] == "ohm"


def test_dvdi_map_refuses_voltage_criterion():
    field = np.linspace(-1, 1, 20)
    bias = np.linspace(-1, 1, 50)
    sig = np.ones((20, 50))
    with pytest.raises(InputError, match="holds dV/dI"):
        extract(IVMap("m", None, field, np.broadcast_to(bias, sig.shape), sig, "dvdi"),
                criterion="voltage")


def _write_h5(path, field_mT, bias_uA, v_uV, **kw):
    with h5py.File(path, "w") as f:
        f.create_dataset("field", data=field_mT).attrs["units"] = kw.get("field_unit", "mT")
        f.create_dataset("bias", data=bias_uA).attrs["units"] = "uA"
        f.create_dataset("voltage", data=v_uV).attrs["units"] = "uV"


def test_hdf5_layouts_and_long_text_agree(tmp_path):
    rng = np.random.default_rng(9)
    ivmap, *_ = _map(rng, n_field=41, n_bias=801)
    bias = ivmap.bias_A[0]
    _write_h5(tmp_path / "a.h5", ivmap.field_T * 1e3, bias * 1e6, ivmap.signal * 1e6)
    _write_h5(tmp_path / "b.h5", ivmap.field_T * 1e3, bias * 1e6, ivmap.signal.T * 1e6)
    f2 = np.repeat(ivmap.field_T, bias.size)
    b2 = np.tile(bias, ivmap.field_T.size)
    order = np.lexsort((f2, np.arange(f2.size) % bias.size))  # bias-major row order
    rows = [f"{f * 1e3:.12g},{b * 1e6:.12g},{v * 1e6:.12g}"
            for f, b, v in zip(f2[order], b2[order], ivmap.signal.ravel()[order], strict=True)]
    (tmp_path / "c.csv").write_text("B (mT),I (uA),V (uV)\n" + "\n".join(rows) + "\n")
    results = [extract(load_map(tmp_path / n)) for n in ("a.h5", "b.h5", "c.csv")]
    ref = results[0].branches[0].ic_A
    for other in results[1:]:
        assert np.allclose(other.branches[0].ic_A, ref, rtol=1e-9, equal_nan=True)
    assert "transposed" in load_map(tmp_path / "b.h5").layout


def test_folder_of_iv_files_with_field_from_metadata_or_name(tmp_path):
    rng = np.random.default_rng(10)
    ivmap, icp, _, _ = _map(rng, n_field=31, n_bias=1001)
    bias = ivmap.bias_A[0]
    for name_field in (False, True):
        folder = tmp_path / f"iv{int(name_field)}"
        folder.mkdir()
        for i, b in enumerate(ivmap.field_T):
            head = "" if name_field else f"# field: {b * 1e3:.12g} mT\n"
            body = "\n".join(f"{x * 1e6:.12g}\t{v * 1e6:.12g}" for x, v in
                             zip(bias, ivmap.signal[i], strict=True))
            (folder / f"iv_{i:03d}_B{b * 1e3:+.4f}mT.txt").write_text(
                head + "I (uA)\tV (uV)\n" + body + "\n")
        opts = ReadSettings(field_from_name=r"B(?P<field>[-+0-9.]+)mT",
                          field_unit="mT") if name_field else None
        got = extract(load_map(folder, opts))
        assert np.allclose(got.field_T, ivmap.field_T, atol=1e-9)
        clear = icp > 3e-6
        assert np.allclose(got.branches[0].ic_A[clear], icp[clear], rtol=0.01)


def test_coil_constant_converts_a_magnet_current(tmp_path):
    b = np.linspace(-3, 3, 61)
    path = tmp_path / "coil.csv"
    path.write_text("I_coil (mA),Ic (uA)\n" + "\n".join(
        f"{x},{10 * abs(np.sinc(x))}" for x in b))
    sweep = load(path, coil_T_per_A=2.5e-3 / 1.0)
    assert sweep.branches[0].field_T[-1] == pytest.approx(3e-3 * 2.5e-3)
    with pytest.raises(InputError, match="--coil-constant"):
        load(path)


def test_extract_command_writes_a_table_that_analyze_reads(tmp_path, capsys):
    rng = np.random.default_rng(11)
    ivmap, *_ = _map(rng, n_field=81, n_bias=1201)
    _write_h5(tmp_path / "m.h5", ivmap.field_T * 1e3, ivmap.bias_A[0] * 1e6,
              ivmap.signal * 1e6)
    out = tmp_path / "table.csv"
    assert main(["extract", str(tmp_path / "m.h5"), "--out", str(out),
                 "--plot", str(tmp_path / "map.png")]) == 0
    assert out.read_text().splitlines()[0].startswith("field_T,ic_pos_A,status_pos")
    assert (tmp_path / "map.png").read_bytes().startswith(b"\x89PNG")
    assert main(["analyze", str(out), "--json"]) == 0
    assert '"period_T"' in capsys.readouterr().out
    # No temporary left behind, whatever the writer names them.
    assert sorted(os.listdir(tmp_path)) == ["m.h5", "map.png", "table.csv"]


def test_analyze_on_a_map_reports_extraction_and_icrn(tmp_path, capsys):
    import json

    rng = np.random.default_rng(12)
    ivmap, *_ = _map(rng, n_field=121, n_bias=1601)
    _write_h5(tmp_path / "m.h5", ivmap.field_T * 1e3, ivmap.bias_A[0] * 1e6,
              ivmap.signal * 1e6)
    assert main(["analyze", str(tmp_path / "m.h5"), "--json", "--gap-meV", "1.4",
                 "--temperature-K", "0"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["extraction"]["criterion"] == "voltage"
    icrn = doc["icrn"]
    assert icrn["rn_ohm"] == pytest.approx(RN, rel=0.01)
    # Ambegaokar-Baratoff at T = 0: pi * Delta / (2e) = pi/2 * 1.4 mV.
    assert icrn["ambegaokar_baratoff_V"] == pytest.approx(np.pi / 2 * 1.4e-3, rel=1e-9)
    assert icrn["icrn_over_ab"] == pytest.approx(icrn["icrn_V"] / icrn["ambegaokar_baratoff_V"])


@pytest.mark.parametrize(("shape_bias", "message"), [((7,), "bias points per row"),
                                                     ((3, 5), "must match")])
def test_mismatched_map_shapes_exit_2(tmp_path, capsys, shape_bias, message):
    with h5py.File(tmp_path / "bad.h5", "w") as f:
        f.create_dataset("field", data=np.arange(12.0)).attrs["units"] = "mT"
        f.create_dataset("bias", data=np.zeros(shape_bias)).attrs["units"] = "uA"
        f.create_dataset("voltage", data=np.zeros((12, 9))).attrs["units"] = "uV"
    assert main(["analyze", str(tmp_path / "bad.h5")]) == 2
    assert message in capsys.readouterr().err


from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402
from hypothesis.extra.numpy import arrays  # noqa: E402


@settings(max_examples=60, deadline=None)
@given(signal=arrays(np.float64, st.tuples(st.integers(1, 30), st.integers(1, 40)),
                     elements=st.floats(-1e-3, 1e-3) | st.just(np.nan)),
       kind=st.sampled_from(["voltage", "dvdi"]),
       criterion=st.sampled_from(["auto", "voltage", "dvdi-peak", "dvdi-threshold",
                                  "resistance"]))
def test_any_map_extracts_or_gives_input_error(signal, kind, criterion):
    # Property: whatever the numbers, extraction answers or explains; it never crashes.
    n_field, n_bias = signal.shape
    bias = np.linspace(-1e-5, 1e-5, n_bias)
    ivmap = IVMap("fuzz", None, np.linspace(-1e-3, 1e-3, n_field),
                  np.broadcast_to(bias, signal.shape), signal, kind)
    try:
        result = extract(ivmap, criterion=criterion)
    except InputError:
        return
    for branch in result.branches:
        ok = branch.status == "ok"
        assert np.all(np.isfinite(branch.ic_A[ok]))
        assert np.all(np.isnan(branch.ic_A[~ok]))


@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(rows=st.lists(st.tuples(st.sampled_from([0.0, 0.5, 1.0]),
                               st.floats(-10, 10, width=32),
                               st.floats(-10, 10, width=32) | st.just(np.nan)), max_size=80))
def test_any_long_table_loads_or_gives_input_error(tmp_path, rows):
    path = tmp_path / "long.csv"
    path.write_text("B (mT),I (uA),V (uV)\n" + "".join(f"{a},{b},{c}\n" for a, b, c in rows))
    try:
        extract(load_map(path))
    except InputError:
        pass


def test_one_bias_point_has_no_derivative():
    # Found by the property test above: a single bias column crashed np.gradient.
    signal = np.zeros((10, 1))
    ivmap = IVMap("one", None, np.linspace(-1e-3, 1e-3, 10),
                  np.broadcast_to(np.array([-1e-5]), signal.shape), signal, "voltage")
    result = extract(ivmap, criterion="dvdi-peak")
    for branch in result.branches:
        assert not np.any(branch.status == "ok")
    with pytest.raises(InputError, match="field rows gave a critical current"):
        result.to_sweep()
