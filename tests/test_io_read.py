"""The read() entry point: one opening and one hash per input, the reader registry, raw maps."""

import hashlib
import os

import h5py
import numpy as np
import pytest

from jjpattern.errors import InputError
from jjpattern.io import IVMap, Sweep, folder_sha256, load, load_map, read
from jjpattern.io.maps import from_arrays
from jjpattern.io.registry import READERS, reader_for
from jjpattern.io.source import open_source
from jjpattern.settings import ReadSettings


def _sweep_csv(path, n=41):
    b = np.linspace(-3, 3, n)
    path.write_text("B (mT),Ic (uA)\n" + "".join(f"{x},{10 * abs(np.sinc(x))}\n" for x in b))
    return b


def _map_h5(path, field_mT, bias_uA, v_uV, layout="field x bias"):
    with h5py.File(path, "w") as f:
        f.create_dataset("field", data=field_mT).attrs["units"] = "mT"
        f.create_dataset("bias", data=bias_uA).attrs["units"] = "uA"
        data = v_uV if layout == "field x bias" else v_uV.T
        f.create_dataset("voltage", data=data).attrs["units"] = "uV"


def _iv_folder(folder, names, fields_mT, rng):
    folder.mkdir()
    bias = np.linspace(-5, 5, 21)
    for name, b in zip(names, fields_mT, strict=True):
        v = np.round(rng.normal(size=bias.size), 6)
        (folder / name).write_text(f"# field: {b} mT\nI (uA)\tV (uV)\n" + "".join(
            f"{x}\t{y}\n" for x, y in zip(bias, v, strict=True)))


def test_registry_lists_each_reader_once_and_text_last():
    names = [r.NAME for r in READERS]
    assert names == ["folder", "matlab", "netcdf", "hdf5", "npz", "text"]
    assert all(callable(r.sniff) and callable(r.read) for r in READERS)


def test_format_is_chosen_from_content_and_suffix(tmp_path):
    _sweep_csv(tmp_path / "s.csv")
    _map_h5(tmp_path / "m.dat", np.arange(3.0), np.arange(4.0), np.zeros((3, 4)))
    np.savez(tmp_path / "s.npz", B_mT=np.arange(12.0), Ic_uA=np.ones(12))
    (tmp_path / "d").mkdir()
    found = {name: reader_for(open_source(tmp_path / name)).NAME
             for name in ("s.csv", "m.dat", "s.npz", "d")}
    # m.dat carries no HDF5 suffix: the signature alone decides.
    assert found == {"s.csv": "text", "m.dat": "hdf5", "s.npz": "npz", "d": "folder"}


def test_sha256_is_of_the_file_bytes(tmp_path):
    _sweep_csv(tmp_path / "s.csv")
    expected = hashlib.sha256((tmp_path / "s.csv").read_bytes()).hexdigest()  # hashlib
    assert read(tmp_path / "s.csv").sha256 == expected
    assert load(tmp_path / "s.csv").sha256 == expected


def test_a_file_changed_after_opening_is_refused_when_hashed(tmp_path):
    # The HDF5 reader reads the file by its path; the hash, taken later, must be of the
    # file as it was opened: a change of size or time since then is refused in one sentence.
    path = tmp_path / "m.h5"
    _map_h5(path, np.array([1.0, 2.0]), np.array([0.0, 1.0]), np.array([[1.0, 2.0],
                                                                       [3.0, 4.0]]))
    source = open_source(path)
    _map_h5(path, np.array([1.0, 2.0]), np.array([0.0, 1.0]), np.zeros((2, 2)))
    stat = os.stat(path)
    os.utime(path, ns=(stat.st_atime_ns, stat.st_mtime_ns + 10**9))  # a later clock tick
    ivmap = reader_for(source).read(source, ReadSettings())
    assert np.array_equal(ivmap.signal, np.zeros((2, 2)))  # what the file holds now
    with pytest.raises(InputError, match=r"m\.h5: the file changed while it was being "
                                         r"analysed; run again once it is complete$"):
        ivmap.sha256  # noqa: B018


def test_hdf5_opened_once_by_its_path_without_its_bytes(tmp_path, monkeypatch):
    from jjpattern.io import source as source_module

    path = tmp_path / "m.h5"
    _map_h5(path, np.arange(5.0), np.arange(7.0), np.ones((5, 7)))
    calls = []
    real, real_open = h5py.File, h5py.h5f.open

    def counting(name, *args, **kwargs):
        if isinstance(name, str):
            calls.append(name)
        return real(name, *args, **kwargs)

    def counting_open(name, *args, **kwargs):  # the reader opens through HDF5 on POSIX
        calls.append(os.fsdecode(name))
        return real_open(name, *args, **kwargs)

    def whole_file(*args):
        raise AssertionError("the whole file was read")

    monkeypatch.setattr(h5py, "File", counting)
    monkeypatch.setattr(h5py.h5f, "open", counting_open)
    monkeypatch.setattr(source_module, "_read_file", whole_file)
    ivmap = read(path)
    assert isinstance(ivmap, IVMap)
    assert calls == [str(path)]
    # hashlib over the file is the reference; the hash streams the file.
    assert ivmap.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()


def test_kind_decided_from_data_or_forced(tmp_path):
    _sweep_csv(tmp_path / "s.csv")
    (tmp_path / "long.csv").write_text("B (mT),I (uA),V (uV)\n" + "".join(
        f"{b},{i},{i * 0.1}\n" for b in (0, 1) for i in range(-3, 4)))
    _map_h5(tmp_path / "m.h5", np.arange(3.0), np.arange(4.0), np.zeros((3, 4)))
    assert isinstance(read(tmp_path / "s.csv"), Sweep)
    assert isinstance(read(tmp_path / "long.csv"), IVMap)
    assert isinstance(read(tmp_path / "m.h5"), IVMap)
    with pytest.raises(InputError, match="no critical-current column"):
        read(tmp_path / "long.csv", kind="sweep")
    with pytest.raises(InputError, match="bias column: none recognised"):
        read(tmp_path / "s.csv", kind="map")
    with pytest.raises(ValueError, match="kind"):
        read(tmp_path / "s.csv", kind="table")


def test_explicit_bias_column_means_a_map(tmp_path):
    (tmp_path / "t.csv").write_text("B (mT),Ibias (uA),Vj (uV)\n" + "".join(
        f"{b},{i},{i * 0.5}\n" for b in (0, 1, 2) for i in range(-2, 3)))
    got = read(tmp_path / "t.csv", ReadSettings(bias_col="Ibias", signal_col="Vj",
                                               signal_unit="uV"))
    assert isinstance(got, IVMap) and got.shape == (3, 5)
    assert got.signal[1, 4] == pytest.approx(1e-6)


def test_load_and_load_map_force_the_kind(tmp_path):
    b = _sweep_csv(tmp_path / "s.csv")
    sweep = load(tmp_path / "s.csv", ic_cols=["Ic"])
    assert sweep.branches[0].field_T[-1] == pytest.approx(b[-1] * 1e-3)
    _map_h5(tmp_path / "m.h5", np.arange(3.0), np.arange(4.0), np.zeros((3, 4)))
    assert load_map(tmp_path / "m.h5", ReadSettings(signal_unit="uV")).signal.shape == (3, 4)
    with pytest.raises(InputError, match="is a folder, not a sweep file"):
        load(tmp_path)


def test_folder_hash_covers_names_and_contents(tmp_path):
    rng = np.random.default_rng(4)
    _iv_folder(tmp_path / "a", ["iv_0.txt", "iv_1.txt"], [0.5, 1.5], rng)
    (tmp_path / "b").mkdir()
    for name, other in (("iv_0.txt", "first.txt"), ("iv_1.txt", "second.txt")):
        (tmp_path / "b" / other).write_bytes((tmp_path / "a" / name).read_bytes())
    ha, hb = folder_sha256(tmp_path / "a"), folder_sha256(tmp_path / "b")
    assert ha != hb  # same bytes, other names
    assert folder_sha256(tmp_path / "a") == ha  # same folder twice
    # Reference: sha256sum's lines "<hex>  <name>" sorted by name, hashed (hashlib).
    lines = "".join(f"{hashlib.sha256((tmp_path / 'a' / n).read_bytes()).hexdigest()}  {n}\n"
                    for n in ("iv_0.txt", "iv_1.txt"))
    assert ha == hashlib.sha256(lines.encode()).hexdigest()
    ivmap = read(tmp_path / "a")
    assert ivmap.sha256 == ha
    assert np.array_equal(ivmap.field_T, [0.5e-3, 1.5e-3])
    assert read(tmp_path / "b").sha256 == hb
    (tmp_path / "a" / "iv_1.txt").write_text(
        (tmp_path / "a" / "iv_1.txt").read_text().replace("1.5 mT", "1.6 mT"))
    assert folder_sha256(tmp_path / "a") != ha


def test_folder_field_pattern_mistakes_are_input_errors(tmp_path):
    _iv_folder(tmp_path / "a", ["iv_B0.5.txt", "iv_B1.5.txt"], [0.5, 1.5],
               np.random.default_rng(5))
    with pytest.raises(InputError, match="not a regular expression"):
        read(tmp_path / "a", ReadSettings(field_from_name="B(", field_unit="mT"))
    with pytest.raises(InputError, match="not a number"):
        read(tmp_path / "a", ReadSettings(field_from_name=r"iv_(B)", field_unit="mT"))
    got = read(tmp_path / "a", ReadSettings(field_from_name=r"B([0-9.]+)\.txt",
                                            field_unit="uT"))
    assert np.allclose(got.field_T, [0.5e-6, 1.5e-6], rtol=1e-12)


@pytest.mark.parametrize("layout", ["field x bias", "bias x field"])
@pytest.mark.parametrize("descending", [False, True])
def test_hdf5_map_rows_sorted_in_si_with_a_shared_bias_row(tmp_path, layout, descending):
    rng = np.random.default_rng(6)
    field = np.linspace(-2, 2, 9)[::-1] if descending else np.linspace(-2, 2, 9)
    bias = np.linspace(-10, 10, 13)
    v = rng.normal(size=(9, 13))
    _map_h5(tmp_path / "m.h5", field, bias, v, layout)
    got = read(tmp_path / "m.h5")
    order = np.argsort(field)
    assert np.array_equal(got.field_T, field[order] * 1e-3)
    assert np.array_equal(got.signal, v[order] * 1e-6)
    assert got.signal.flags.c_contiguous
    assert got.bias_A.shape == (9, 13) and got.bias_A.strides[0] == 0
    assert np.array_equal(got.bias_A[5], bias * 1e-6)


def test_two_d_bias_kept_per_row_or_shared_when_rows_agree(tmp_path):
    field, bias = np.array([2.0, 0.0, 1.0]), np.linspace(-1, 1, 5)
    per_row = bias + np.array([[0.0], [0.1], [0.2]])
    _map_h5(tmp_path / "p.h5", field, per_row, np.zeros((3, 5)))
    _map_h5(tmp_path / "s.h5", field, np.tile(bias, (3, 1)), np.zeros((3, 5)))
    got = read(tmp_path / "p.h5")
    assert got.bias_A.strides[0] != 0
    assert np.allclose(got.bias_A, per_row[[1, 2, 0]] * 1e-6, rtol=1e-15, atol=0)
    assert read(tmp_path / "s.h5").bias_A.strides[0] == 0


def test_from_arrays_leaves_the_callers_arrays_alone():
    field, bias, v = np.array([1.0, 0.0]), np.array([0.0, 1.0, 2.0]), np.ones((2, 3))
    got = from_arrays(field, bias, v, {"f": "mT", "b": "uA", "v": "uV"},
                      {"field": "f", "bias": "b", "signal": "v"}, source="x", sha256=None,
                      metadata={}, settings=ReadSettings())
    assert np.array_equal(v, np.ones((2, 3))) and np.array_equal(field, [1.0, 0.0])
    assert got.signal[0, 0] == pytest.approx(1e-6)


def test_npz_is_no_map(tmp_path):
    np.savez(tmp_path / "s.npz", B_mT=np.arange(12.0), Ic_uA=np.ones(12))
    with pytest.raises(InputError, match="not a raw map"):
        load_map(tmp_path / "s.npz")
