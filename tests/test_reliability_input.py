"""What the readers promise about bad, huge, foreign and absurd inputs (issue 15, input side).

Each test builds the file a lab could meet (the invented KT-14 chip) and checks the
one-sentence refusal, or what is read. The CLI tests check exit status 2 with one line.
"""

from __future__ import annotations

import hashlib
import io
import json
import warnings
import zipfile

import h5py
import numpy as np
import pytest
from fuzz_helpers import read_peak_bytes

from jjpattern.cli import main
from jjpattern.errors import InputError
from jjpattern.io import read, read_object
from jjpattern.pipeline import analyze
from jjpattern.settings import JunctionSettings, ReadSettings, Settings

B_MT = np.linspace(-3, 3, 61)
IC_UA = np.abs(10 * np.sinc(B_MT) + np.random.default_rng(14).normal(0, 0.05, B_MT.size))


def _csv(tmp_path, name="kt14.csv", head="", b=B_MT, ic=IC_UA, header="B (mT),Ic (uA)"):
    rows = "\n".join(f"{x!r},{y!r}" for x, y in zip(np.asarray(b).tolist(),
                                                     np.asarray(ic).tolist(), strict=True))
    path = tmp_path / name
    path.write_text(head + header + "\n" + rows + "\n")
    return str(path)


def _refused(path, *words, settings=None):
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no numpy ComplexWarning or other noise on the way
        with pytest.raises(InputError) as info:
            read(path, settings)
    message = str(info.value)
    assert "\n" not in message
    for word in words:
        assert word in message, message
    return message


# --- containers that their libraries cannot read ---------------------------------------

def _npz_bytes(**arrays):
    out = io.BytesIO()
    np.savez_compressed(out, **arrays)
    return out.getvalue()


def test_npz_with_a_damaged_deflate_stream(tmp_path):
    raw = bytearray(_npz_bytes(B_mT=B_MT, Ic_uA=IC_UA))
    info = zipfile.ZipFile(io.BytesIO(bytes(raw))).infolist()[0]
    start = info.header_offset + 30 + len(info.filename.encode()) + 20  # inside its data
    raw[start:start + 16] = b"\xff" * 16
    path = tmp_path / "damaged.npz"
    path.write_bytes(bytes(raw))
    _refused(str(path), "not a readable .npz file", "damaged.npz")


def test_npz_with_a_member_that_is_not_an_array(tmp_path):
    path = tmp_path / "notes.npz"
    with zipfile.ZipFile(path, "w") as archive:
        archive.writestr("B_mT.npy", _npy(B_MT))
        archive.writestr("notes.txt", "cooldown 14, KT-14")
    _refused(str(path), "'notes.txt'", "not a NumPy array")


def test_npz_with_a_pickled_object_array_is_refused_unread(tmp_path):
    path = tmp_path / "objects.npz"
    np.savez(path, B_mT=B_MT, Ic_uA=np.array([{"a": 1}] * 61, dtype=object))
    _refused(str(path), "'Ic_uA'", "pickle")


def _npy(values) -> bytes:
    out = io.BytesIO()
    np.save(out, values)
    return out.getvalue()


def _damaged_hdf5(tmp_path):
    """A sweep whose root group's link storage is overwritten (h5py: 'Link iteration failed'
    or an OSError on the attributes); the first such spot found from the file's end."""
    out = io.BytesIO()
    with h5py.File(out, "w") as f:
        f.attrs["junction"] = "KT14-J03"
        f.create_dataset("field", data=B_MT).attrs["units"] = "mT"
        f.create_dataset("ic", data=IC_UA).attrs["units"] = "uA"
    good = out.getvalue()
    for start in range(96, len(good) - 8, 8):
        raw = good[:start] + b"\xff" * 8 + good[start + 8:]
        try:
            with h5py.File(io.BytesIO(raw), "r") as f:
                dict(f.attrs)
                list(f.keys())
        except (RuntimeError, OSError, KeyError, ValueError):
            path = tmp_path / "damaged.h5"
            path.write_bytes(raw)
            return str(path)
    raise AssertionError("no damaging spot found")


def test_damaged_hdf5_is_one_sentence(tmp_path):
    _refused(_damaged_hdf5(tmp_path), "damaged.h5", "HDF5")


def test_damaged_mat_is_one_sentence(tmp_path):
    import scipy.io

    out = io.BytesIO()
    scipy.io.savemat(out, {"B_mT": B_MT, "Ic_uA": IC_UA}, do_compression=True)
    raw = bytearray(out.getvalue())
    raw[200:240] = b"\x00" * 40
    path = tmp_path / "damaged.mat"
    path.write_bytes(bytes(raw))
    _refused(str(path), "damaged.mat", "MATLAB")


# --- sizes, checked before reading -------------------------------------------------------

def _declared(tmp_path, name, big_name, units="uA"):
    """A few kB file whose ``big_name`` declares 10^10 values (chunked, never written)."""
    path = tmp_path / name
    with h5py.File(path, "w") as f:
        f.create_dataset("field", data=B_MT).attrs["units"] = "mT"
        if big_name != "ic":
            f.create_dataset("ic", data=IC_UA).attrs["units"] = "uA"
        f.create_dataset(big_name, shape=(10**10,), dtype="f8", chunks=(1024,)).attrs[
            "units"] = units
    return str(path)


def test_declared_huge_dataset_is_refused_before_reading(tmp_path):
    path = _declared(tmp_path, "huge.h5", "ic")
    assert len(open(path, "rb").read()) < 20_000
    _refused(path, "10,000,000,000 values", "max_points")


def test_unrelated_huge_dataset_is_never_read(tmp_path):
    """A camera log declared at 80 GB beside the sweep: the sweep reads, the log is not read."""
    sweep = read(_declared(tmp_path, "camera.h5", "camera_log", units="counts"))
    assert sweep.branches[0].points_used == 61


def test_file_size_limit_is_a_read_setting(tmp_path):
    path = _csv(tmp_path)
    _refused(path, "above the limit of 100", "max_bytes", settings=ReadSettings(max_bytes=100))
    assert read(path, ReadSettings(max_bytes=10_000)).branches


def test_point_limit_is_a_read_setting(tmp_path):
    path = tmp_path / "sweep.npz"
    path.write_bytes(_npz_bytes(B_mT=B_MT, Ic_uA=IC_UA))
    _refused(str(path), "61 values", "max_points", settings=ReadSettings(max_points=50))


def test_row_limit_is_a_read_setting(tmp_path):
    path = _csv(tmp_path)  # 61 rows and a final newline
    _refused(path, "61 rows, above the limit of 60", "max_rows",
             settings=ReadSettings(max_rows=60))
    assert read(path, ReadSettings(max_rows=61)).branches[0].points_used == 61


def test_table_longer_than_any_array_is_refused_unparsed(tmp_path):
    path = tmp_path / "long_map.csv"
    path.write_text("B (mT),I (uA),V (uV)\n" + "0,1,2\n" * 30)
    _refused(str(path), "the table's lines", "max_points", settings=ReadSettings(max_points=20))


def test_limits_must_be_positive_whole_numbers():
    with pytest.raises(InputError, match="max_points"):
        ReadSettings(max_points=0)
    with pytest.raises(InputError, match="max_bytes"):
        Settings.from_dict({"read": {"max_bytes": "lots"}})


def test_text_reading_memory_stays_bounded(tmp_path):
    """A 60,000-row table (about 1.1 MB) peaks below 16 times its size while read
    (tracemalloc); the stated bound in the contributor guide is 16 x the file's size."""
    b = np.linspace(-3, 3, 60_000)
    path = _csv(tmp_path, "long.csv", b=np.round(b, 6), ic=np.round(10 * np.abs(np.sinc(b)), 6))
    size = len(open(path, "rb").read())
    peak = read_peak_bytes(path)
    assert peak < 16 * size, peak / size


# --- nothing read from outside the input --------------------------------------------------

@pytest.fixture()
def foreign(tmp_path):
    """Ic kept in another file three ways: an external link, external storage, a virtual
    dataset; returns the folder and the outside files' SHA-256."""
    with h5py.File(tmp_path / "other.h5", "w") as f:
        f.create_dataset("ic", data=IC_UA).attrs["units"] = "uA"
    (tmp_path / "raw.bin").write_bytes(IC_UA.astype("<f8").tobytes())
    for kind in ("link", "storage", "virtual"):
        with h5py.File(tmp_path / f"{kind}.h5", "w") as f:
            f.create_dataset("field", data=B_MT).attrs["units"] = "mT"
            if kind == "link":
                f["ic"] = h5py.ExternalLink("other.h5", "/ic")
            elif kind == "storage":
                f.create_dataset("ic", shape=(61,), dtype="<f8",
                                 external=[("raw.bin", 0, 61 * 8)]).attrs["units"] = "uA"
            else:
                layout = h5py.VirtualLayout(shape=(61,), dtype="f8")
                layout[:] = h5py.VirtualSource("other.h5", "ic", shape=(61,))
                f.create_virtual_dataset("ic", layout).attrs["units"] = "uA"
    digests = {name: hashlib.sha256((tmp_path / name).read_bytes()).hexdigest()
               for name in ("other.h5", "raw.bin")}
    return tmp_path, digests


@pytest.mark.parametrize("kind, other", [("link", "other.h5"), ("storage", "raw.bin"),
                                         ("virtual", "other.h5")])
def test_other_files_refused_unless_allowed_then_hashed(foreign, kind, other, monkeypatch):
    folder, digests = foreign
    monkeypatch.chdir(folder.parent)  # names are found beside the input, not in the cwd
    path = str(folder / f"{kind}.h5")
    _refused(path, repr(other), "--allow-external")
    sweep = read(path, ReadSettings(allow_external=True))
    assert np.allclose(np.sort(sweep.branches[0].ic_A), np.sort(IC_UA) * 1e-6)
    listed = sweep.layout["external_files"]
    assert [item["sha256"] for item in listed] == [digests[other]]
    own = hashlib.sha256(open(path, "rb").read()).hexdigest()
    assert sweep.layout["file_sha256"] == own and sweep.sha256 != own


def test_virtual_dataset_with_a_missing_source_is_refused(foreign):
    folder, _ = foreign
    (folder / "other.h5").unlink()
    _refused(str(folder / "virtual.h5"), "not found", settings=ReadSettings(allow_external=True))


def test_cli_allow_external_records_the_other_file(foreign, capsys):
    folder, digests = foreign
    path = str(folder / "link.h5")
    assert main(["analyze", path]) == 2
    assert "--allow-external" in capsys.readouterr().err
    assert main(["analyze", path, "--allow-external", "--json"]) == 0
    document = json.loads(capsys.readouterr().out)
    assert document["input"]["layout"]["external_files"][0]["sha256"] == digests["other.h5"]
    assert document["settings"]["read"]["allow_external"] is True


# --- numbers checked at the edge -----------------------------------------------------------

@pytest.mark.parametrize("column, value, words", [
    ("b", 1e308, ("'B (mT)'", "beyond 1000 T")),
    ("ic", 1e160, ("'Ic (uA)'", "beyond 1000 A")),
])
def test_absurd_magnitudes_are_refused_naming_the_column(tmp_path, column, value, words):
    b, ic = B_MT.copy(), IC_UA.copy()
    (b if column == "b" else ic)[7] = value
    _refused(_csv(tmp_path, b=b, ic=ic), *words, "value 8")


def test_denormal_currents_and_fields_are_refused(tmp_path):
    _refused(_csv(tmp_path, "i.csv", ic=IC_UA * 1e-304), "'Ic (uA)'", "below 1e-18 A")
    _refused(_csv(tmp_path, "b.csv", b=B_MT * 1e-307), "'B (mT)'", "spans")


def test_overflow_on_conversion_is_refused(tmp_path):
    """A magnet current of 1e307 A times a 1e5 T/A coil overflows: refused, not dropped."""
    b = B_MT.copy()
    b[4] = 1e307
    path = _csv(tmp_path, b=b, header="I_coil (A),Ic (uA)")
    _refused(path, "'I_coil (A)'", "value 5", settings=ReadSettings(coil_T_per_A=1e5))


def test_signalling_nan_from_a_binary_file_is_dropped_quietly(tmp_path):
    ic = IC_UA.copy()
    ic[5:6] = np.array([0x7FF0000000000001], dtype=np.uint64).view(np.float64)
    path = tmp_path / "snan.npz"
    path.write_bytes(_npz_bytes(B_mT=B_MT, Ic_uA=ic))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert read(str(path)).summary()["points_dropped"] == 1


def test_non_finite_rows_are_dropped_and_counted(tmp_path):
    b, ic = B_MT.copy(), IC_UA.copy()
    b[3], ic[9], ic[10] = np.nan, np.inf, -np.inf
    sweep = read(_csv(tmp_path, b=b, ic=ic))
    assert sweep.summary()["points_dropped"] == 3
    assert sweep.summary()["points_used"] == 58


def test_complex_voltage_map_is_refused_without_a_warning(tmp_path):
    path = tmp_path / "complex.h5"
    with h5py.File(path, "w") as f:
        f.create_dataset("field", data=B_MT).attrs["units"] = "mT"
        f.create_dataset("bias", data=np.linspace(-15, 15, 41)).attrs["units"] = "uA"
        f.create_dataset("voltage", data=np.ones((61, 41)) * (1 + 1j)).attrs["units"] = "uV"
    _refused(str(path), "'/voltage'", "complex")


def test_complex_frame_column_is_refused():
    import pandas as pd

    frame = pd.DataFrame({"B (mT)": B_MT, "Ic (uA)": IC_UA * (1 + 0.5j)})
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with pytest.raises(InputError, match="'Ic \\(uA\\)' holds complex"):
            read_object(frame)


@pytest.mark.parametrize("line, key", [("# length_um: nan", "length_um"),
                                       ("# london_nm: -80", "london_nm"),
                                       ("# barrier_nm: 0", "barrier_nm"),
                                       ("# jc_kA_cm2: -1", "jc_kA_cm2")])
def test_bad_geometry_metadata_is_refused(tmp_path, line, key):
    path = _csv(tmp_path, head=line + "\n")
    with pytest.raises(InputError, match=key):
        analyze(path)


def test_negative_geometry_setting_is_refused(tmp_path):
    settings = Settings(junction=JunctionSettings(length_m=-10e-6))
    with pytest.raises(InputError, match="junction.length_m"):
        analyze(_csv(tmp_path), settings)


# --- text: encodings, decimal commas, huge lines, long user strings ------------------------

@pytest.mark.parametrize("encoding", ["utf-8", "utf-8-sig", "latin-1", "utf-16"])
def test_encodings_read_alike(tmp_path, encoding):
    rows = "\r\n".join(f"{x:.4f};{y:.4f}".replace(".", ",") for x, y in zip(B_MT, IC_UA,
                                                                           strict=True))
    path = tmp_path / f"{encoding}.csv"
    path.write_bytes(("# operator: Jos\u00e9\r\nB (mT);Ic (\u00b5A)\r\n" + rows).encode(encoding))
    sweep = read(str(path))
    assert sweep.metadata["operator"] == "Jos\u00e9"
    assert np.allclose(sweep.branches[0].ic_A.max(), IC_UA.max() * 1e-6, rtol=1e-4)


def test_huge_comment_line_is_read_past(tmp_path):
    path = _csv(tmp_path, head="# " + "x" * 2_000_000 + "\n")
    assert read(path).branches[0].points_used == 61


def test_messages_clip_user_strings(tmp_path):
    path = _csv(tmp_path, header="B (" + "m" * 5000 + "),Ic (uA)")
    message = _refused(path, "unknown field unit", "5000 characters")
    assert len(message) < 600


# --- the command line: exit 2, one line, no traceback --------------------------------------

def _cli_cases(tmp_path):
    npz_raw = bytearray(_npz_bytes(B_mT=B_MT, Ic_uA=IC_UA))
    npz_raw[60:80] = b"\xff" * 20
    (tmp_path / "cut.npz").write_bytes(bytes(npz_raw[: len(npz_raw) // 2]))
    (tmp_path / "bad.npz").write_bytes(bytes(npz_raw))
    b = B_MT.copy()
    b[0] = 1e308
    return [str(tmp_path / "cut.npz"), str(tmp_path / "bad.npz"), _damaged_hdf5(tmp_path),
            _declared(tmp_path, "huge.h5", "ic"), _csv(tmp_path, "absurd.csv", b=b),
            _csv(tmp_path, "tiny.csv", ic=IC_UA * 1e-304),
            _csv(tmp_path, "geometry.csv", head="# london_nm: nan\n")]


def test_cli_bad_files_exit_2_with_one_line(tmp_path, capsys):
    for path in _cli_cases(tmp_path):
        code = main(["analyze", path])
        err = capsys.readouterr().err
        assert code == 2, (path, err)
        assert err.count("\n") == 1 and err.startswith("jjpattern: "), err
        assert "Traceback" not in err and "internal error" not in err


def test_read_limits_are_command_line_options(tmp_path, capsys):
    """A limit refused in one sentence that names the option, which then lets it through."""
    from jjpattern.cli import main

    path = tmp_path / "s.csv"
    b = np.linspace(-2, 2, 301)
    ic = np.abs(np.sinc(b)) * 10 + 0.05
    rows = "".join(f"{x:.4f},{y:.5f}\n" for x, y in zip(b, ic, strict=True))
    path.write_text("B (mT),Ic (uA)\n" + rows)
    assert main(["analyze", str(path), "--read-limit", "rows=100"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "301 rows" in err[0] and "--read-limit rows=N" in err[0]
    assert main(["analyze", str(path), "--read-limit", "rows=400", "--json"]) == 0
    assert main(["analyze", str(path), "--read-limit", "lines=400"]) == 2
    assert "NAME one of bytes, values, rows" in capsys.readouterr().err
