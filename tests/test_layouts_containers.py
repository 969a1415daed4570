"""Containers as labs write them: MATLAB .mat (v5 and v7.3), netCDF, nested HDF5, data
passed straight to the API, and files that are none of these.

The pattern is the one of tests/test_layouts.py (Rowell 1963: Ic0 |sin(pi u)/(pi u)|,
measured as |Ic + noise|); each container holds the same numbers as a plain CSV, whose
reading is the reference.
"""

import sqlite3
import sys
import zipfile

import h5py
import numpy as np
import pytest
import scipy.io

import jjpattern
from jjpattern.cli import main
from jjpattern.errors import InputError
from jjpattern.io import IVMap, read, read_object
from jjpattern.settings import DiagnoseSettings, ReadSettings, Settings

xr = pytest.importorskip("xarray")  # the optional extra "netcdf" (in the test extra too)

PERIOD_T = 0.45e-3
TRUTH = {"positive": (15e-6, 0.020e-3), "negative": (14e-6, -0.015e-3)}
FAST = Settings(diagnose=DiagnoseSettings(enabled=False))


def _pattern(rng, field_T, ic0_A, offset_T):
    clean = ic0_A * np.abs(np.sinc((field_T - offset_T) / PERIOD_T))
    return np.abs(clean + rng.normal(0.0, 0.15e-6, field_T.size))


@pytest.fixture(scope="module")
def data(tmp_path_factory):
    """Field (mT), Ic+ and |Ic-| (uA), rounded as a file would hold them, and the CSV read."""
    rng = np.random.default_rng(31)
    field_T = np.linspace(-2e-3, 2e-3, 241)
    b = np.round(field_T * 1e3, 6)
    p = np.round(_pattern(rng, field_T, *TRUTH["positive"]) * 1e6, 6)
    n = np.round(_pattern(rng, field_T, *TRUTH["negative"]) * 1e6, 6)
    path = tmp_path_factory.mktemp("csv") / "plain.csv"
    path.write_text("B (mT),Ic+ (uA),Ic- (uA)\n" + "".join(
        f"{x!r},{y!r},{-z!r}\n" for x, y, z in zip(b.tolist(), p.tolist(), n.tolist(),
                                                   strict=True)))
    return b, p, n, read(path)


def same_branches(sweep, reference):
    assert [x.label for x in sweep.branches] == [x.label for x in reference.branches]
    for x, y in zip(sweep.branches, reference.branches, strict=True):
        np.testing.assert_allclose(x.field_T, y.field_T, rtol=1e-12, atol=0)
        np.testing.assert_allclose(x.ic_A, y.ic_A, rtol=1e-12, atol=0)


# -- MATLAB ------------------------------------------------------------------------------------
def test_mat_v5_vectors_struct_and_metadata(tmp_path, data):
    b, p, n, ref = data
    path = tmp_path / "scan.mat"
    scipy.io.savemat(path, {"B_mT": b[None, :], "Ic_pos_uA": p[None, :],
                            "Ic_neg_uA": -n[:, None],  # one row vector, one column vector
                            "junction": "KT14-J03", "temperature_K": 0.3,
                            "info": {"chip": "KT-14", "cooldown": "CD-07"}})
    sweep = read(path)
    same_branches(sweep, ref)
    assert sweep.metadata == {"junction": "KT14-J03", "temperature_K": "0.3",
                              "info.chip": "KT-14", "info.cooldown": "CD-07"}
    assert sweep.layout == {"container": "MATLAB v5"}


def test_mat_v5_struct_found_and_named(tmp_path, data):
    b, p, n, ref = data
    path = tmp_path / "scan.mat"
    scipy.io.savemat(path, {"scan": {"B_mT": b, "Isw_uA": p}, "notes": "cooldown 7"})
    sweep = read(path)
    assert sweep.layout["group"] == "scan"
    np.testing.assert_allclose(sweep.branches[0].ic_A, ref.branches[0].ic_A, rtol=1e-12)
    scipy.io.savemat(path, {"a": {"B_mT": b, "Ic_uA": p}, "b": {"B_mT": b, "Ic_uA": n}})
    with pytest.raises(InputError, match=r"several groups .* \('a', 'b'\).*--field-col a\.B_mT"):
        read(path)
    got = read(path, ReadSettings(field_col="b/B_mT", ic_cols=("b.Ic_uA",)))
    np.testing.assert_allclose(got.branches[0].ic_A, ref.branches[1].ic_A, rtol=1e-12)


def test_mat_matrix_without_names_lists_what_it_holds(tmp_path, capsys, data):
    b, p, n, _ = data
    path = tmp_path / "data.mat"
    scipy.io.savemat(path, {"data": np.column_stack([b, p, n])})
    assert main(["analyze", str(path)]) == 2
    err = capsys.readouterr().err
    assert "'data' (241, 3)" in err and "--field-col" in err and "MATLAB v5" in err


def write_mat_v73(path, variables, groups=None):
    """A MATLAB v7.3 file as MATLAB lays it out (from memory): a 512-byte text header
    before the HDF5 signature, arrays stored transposed (column-major), a MATLAB_class
    attribute on each, text as uint16 characters, structs as groups."""
    with h5py.File(path, "w", userblock_size=512) as f:
        for target, items in [(f, variables)] + [(f.create_group(g), v) for g, v in
                                                  (groups or {}).items()]:
            if target is not f:
                target.attrs["MATLAB_class"] = np.bytes_("struct")
            for name, value in items.items():
                if isinstance(value, str):
                    ds = target.create_dataset(name, data=np.array(
                        [[ord(c)] for c in value], dtype=np.uint16))
                    ds.attrs["MATLAB_class"] = np.bytes_("char")
                else:
                    ds = target.create_dataset(name, data=np.atleast_2d(value).T)
                    ds.attrs["MATLAB_class"] = np.bytes_("double")
    header = (b"MATLAB 7.3 MAT-file, Platform: GLNXA64, Created on: Tue Dec  1 10:00:00 2026 "
              b"HDF5 schema 1.00 .").ljust(116, b" ") + b"\0" * 8 + b"\x00\x02IM"
    with open(path, "r+b") as handle:
        handle.write(header)


def test_mat_v73_sweep_and_map(tmp_path, data):
    b, p, n, ref = data
    path = tmp_path / "scan73.mat"
    write_mat_v73(path, {"junction": "KT14-J03", "T_K": np.array([[1.5]])},
                  {"scan": {"B_mT": b[None, :], "Ic_pos_uA": p[None, :], "Ic_neg_uA": n}})
    assert open(path, "rb").read(512)[:10] == b"MATLAB 7.3"
    sweep = read(path)
    same_branches(sweep, ref)
    assert sweep.metadata == {"junction": "KT14-J03", "T_K": "1.5"}
    assert sweep.layout == {"container": "MATLAB v7.3", "group": "scan"}
    rng = np.random.default_rng(2)
    v = rng.normal(size=(5, 7))  # MATLAB's n_field x n_bias
    write_mat_v73(tmp_path / "map.mat", {"B_mT": np.array([[2.0, 0.0, 1.0, 3.0, 4.0]]),
                                         "I_uA": np.linspace(-3, 3, 7)[None, :], "V_uV": v})
    got = read(tmp_path / "map.mat")
    assert isinstance(got, IVMap) and got.shape == (5, 7)
    np.testing.assert_allclose(got.signal, v[[1, 2, 0, 3, 4]] * 1e-6, rtol=1e-15)
    assert got.bias_A.strides[0] == 0


# -- netCDF and xarray ---------------------------------------------------------------------
def _dataset(b, p, n, field_name="B"):
    return xr.Dataset(
        {"ic": (("polarity", field_name), np.stack([p, -n]), {"units": "uA"})},
        coords={field_name: (field_name, b, {"units": "mT"}), "polarity": ["+", "-"]},
        attrs={"junction": "KT14-J03", "cooldown": "CD-07"})


@pytest.mark.parametrize("engine", ["h5netcdf", "scipy"])
def test_netcdf_coordinates_units_attributes(tmp_path, data, engine):
    b, p, n, ref = data
    path = tmp_path / "scan.nc"
    _dataset(b, p, n).to_netcdf(path, engine=engine)
    sweep = read(path)
    same_branches(sweep, ref)
    assert sweep.metadata == {"junction": "KT14-J03", "cooldown": "CD-07"}


def test_dimension_coordinate_is_the_field(tmp_path, data):
    b, p, n, ref = data
    ds = xr.Dataset({"Isw": ("x", p, {"units": "uA"})}, coords={"x": ("x", b, {"units": "mT"})})
    sweep = read_object(ds)
    np.testing.assert_allclose(sweep.branches[0].field_T, ref.branches[0].field_T, rtol=1e-12)


def test_without_xarray(tmp_path, data, monkeypatch):
    b, p, n, ref = data
    one_d = xr.Dataset({"ic_pos": ("B", p, {"units": "uA"}), "ic_neg": ("B", -n, {"units": "uA"})},
                       coords={"B": ("B", b, {"units": "mT"})}, attrs={"junction": "J"})
    one_d.to_netcdf(tmp_path / "four.nc", engine="h5netcdf")
    one_d.to_netcdf(tmp_path / "classic.nc", engine="scipy")
    monkeypatch.setitem(sys.modules, "xarray", None)  # as if the extra were not installed
    with pytest.raises(InputError, match=r"classic\.nc: is a netCDF file.*jjpattern\[netcdf\]"):
        read(tmp_path / "classic.nc")
    sweep = read(tmp_path / "four.nc")  # netCDF-4 is HDF5: still read, without the extra
    same_branches(sweep, ref)
    assert sweep.metadata == {"junction": "J"}  # no _NCProperties


def test_dataframe_and_dataset_straight_to_analyze(data):
    import pandas as pd

    b, p, n, ref = data
    frame = pd.DataFrame({"Ic+ (uA)": p, "Ic- (uA)": -n}, index=pd.Index(b, name="B (mT)"))
    frame.attrs["junction"] = "KT14-J03"
    reference = jjpattern.analyze(ref.path, FAST)
    for obj, label in ((frame, "<pandas.DataFrame>"), (_dataset(b, p, n), "<xarray.Dataset>")):
        result = jjpattern.analyze(obj, FAST)
        assert result.input["path"] == label and len(result.input["sha256"]) == 64
        assert result.metadata["junction"] == "KT14-J03"
        for fit, fit0 in zip(result.fits, reference.fits, strict=True):
            assert fit.branch == fit0.branch
            assert fit.period_T == pytest.approx(fit0.period_T, rel=1e-7)
            assert fit.ic0_A == pytest.approx(fit0.ic0_A, rel=1e-7)
            ic0, offset = TRUTH[fit.branch]
            assert abs(fit.ic0_A - ic0) < 5 * fit.ic0_stderr_A
            assert abs(fit.field_offset_T - offset) < 5 * fit.field_offset_stderr_T
    assert read_object(frame.copy()).sha256 == read_object(frame).sha256
    changed = frame.copy()
    changed.iloc[3, 0] += 1e-6
    assert read_object(changed).sha256 != read_object(frame).sha256
    with pytest.raises(InputError, match="give a file or folder path"):
        jjpattern.analyze([1, 2, 3])


# -- HDF5 groups, other files ----------------------------------------------------------------
def test_nested_hdf5(tmp_path, data):
    b, p, n, ref = data
    path = tmp_path / "nested.h5"
    with h5py.File(path, "w") as f:
        f.attrs["junction"] = "KT14-J03"
        g = f.create_group("run3/sweep")
        g.attrs["cooldown"] = "CD-07"
        g.create_dataset("field", data=b).attrs["units"] = "mT"
        g.create_dataset("ic_pos", data=p).attrs["units"] = "uA"
        g.create_dataset("ic_neg", data=-n).attrs["units"] = "uA"
        f.create_dataset("run3/log/temperature_K", data=np.full(50, 1.5))
    sweep = read(path)
    same_branches(sweep, ref)
    assert sweep.metadata == {"junction": "KT14-J03", "cooldown": "CD-07"}
    assert sweep.layout == {"group": "/run3/sweep"}
    with h5py.File(path, "a") as f:
        f.copy("run3/sweep", "run4")
    with pytest.raises(InputError, match=r"several groups .*'run3/sweep', 'run4'"):
        read(path)
    with h5py.File(tmp_path / "odd.h5", "w") as f:
        f.create_dataset("scans/x", data=b)
        f.create_dataset("scans/y", data=p)
    with pytest.raises(InputError, match=r"it holds 'scans/x' \(241,\), 'scans/y' \(241,\); "
                                         r"name them by path, e\.g\. --field-col"):
        read(tmp_path / "odd.h5")


def test_field_range_crops_a_map(tmp_path):
    path = tmp_path / "m.h5"
    with h5py.File(path, "w") as f:
        f.create_dataset("field", data=np.linspace(-2, 2, 9)).attrs["units"] = "mT"
        f.create_dataset("bias", data=np.linspace(-5, 5, 11)).attrs["units"] = "uA"
        f.create_dataset("voltage", data=np.ones((9, 11))).attrs["units"] = "uV"
    got = read(path, ReadSettings(field_range_T=(-1e-3, None), exclude_T=((0.4e-3, 0.6e-3),)))
    np.testing.assert_allclose(got.field_T, [-1e-3, -0.5e-3, 0, 1e-3, 1.5e-3, 2e-3])
    assert got.bias_A.strides[0] == 0 and got.signal.shape == (6, 11)


@pytest.mark.parametrize(("make", "expected"), [
    ("sqlite", "is an SQLite database, not one of the formats read"),
    ("xlsx", "is a spreadsheet or office document"),
    ("pdf", "is a PDF document"),
])
def test_other_files_are_named_with_the_formats_read(tmp_path, capsys, make, expected):
    if make == "sqlite":
        path = tmp_path / "runs.db"
        with sqlite3.connect(path) as con:
            con.execute("CREATE TABLE ic (b REAL, ic REAL)")
    elif make == "xlsx":
        path = tmp_path / "sheet.xlsx"
        with zipfile.ZipFile(path, "w") as z:
            z.writestr("[Content_Types].xml", "<Types/>")
            z.writestr("xl/workbook.xml", "<workbook/>")
    else:
        path = tmp_path / "fig.pdf"
        path.write_bytes(b"%PDF-1.7\n%\xe2\xe3\xcf\xd3\n" + b"\0" * 64)
    assert main(["analyze", str(path)]) == 2
    err = capsys.readouterr().err
    assert expected in err and "MATLAB .mat" in err and "netCDF" in err
    assert len(err.strip().splitlines()) == 1
