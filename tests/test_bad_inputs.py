"""Every bad input gives exit status 2 and one clear line naming the problem, no traceback."""

import h5py
import numpy as np
import pytest

from jjpattern.cli import main

GOOD_ROWS = "\n".join(f"{b:.3f},{10 * abs(np.sinc(b)):.4f}" for b in np.linspace(-3, 3, 61))


def _write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text)
    return str(path)


def _hdf5_missing_units(tmp_path):
    path = tmp_path / "nounits.h5"
    with h5py.File(path, "w") as f:
        f["field"] = np.linspace(-3, 3, 61)
        f["ic"] = np.ones(61)
    return str(path)


def _hdf5_empty(tmp_path):
    path = tmp_path / "empty.h5"
    with h5py.File(path, "w"):
        pass
    return str(path)


def _hdf5_map_of_words(tmp_path):
    path = tmp_path / "words.h5"
    with h5py.File(path, "w") as f:
        f.create_dataset("field", data=np.arange(3.0)).attrs["units"] = "mT"
        f.create_dataset("bias", data=np.arange(4.0)).attrs["units"] = "uA"
        f.create_dataset("voltage", data=np.full((3, 4), b"high")).attrs["units"] = "uV"
    return str(path)


def _npy_as_npz(tmp_path):
    path = tmp_path / "one.npz"
    with open(path, "wb") as handle:
        np.save(handle, np.arange(20.0))
    return str(path)


def _empty_folder(tmp_path):
    (tmp_path / "ivs").mkdir()
    return str(tmp_path / "ivs")


CASES = {
    "missing file": (lambda t: str(t / "nope.csv"), "file not found"),
    "empty file": (lambda t: _write(t, "e.csv", ""), "empty"),
    "blank lines only": (lambda t: _write(t, "b.csv", "\n\n  \n"), "empty"),
    "header only": (lambda t: _write(t, "h.csv", "B (mT),Ic (uA)\n"), "no data rows"),
    "prose": (lambda t: _write(t, "p.txt", "Notes from the cooldown.\nThe fridge was cold.\n"),
              "not a number"),
    "one column": (lambda t: _write(t, "o.csv", "B (mT)\n1\n2\n3\n"), "only one column"),
    "no header": (lambda t: _write(t, "n.csv", GOOD_ROWS + "\n"), "not a header"),
    "all nan": (lambda t: _write(t, "a.csv", "B (mT),Ic (uA)\n" + "nan,nan\n" * 20),
                "no finite values"),
    "too few points": (lambda t: _write(t, "f.csv", "B (mT),Ic (uA)\n" + "\n".join(
        f"{i},{i + 1}" for i in range(6))), "only 6 usable points"),
    "unknown unit": (lambda t: _write(t, "u.csv", "B (furlong),Ic (uA)\n" + GOOD_ROWS),
                     "unknown field unit 'furlong'"),
    "no unit": (lambda t: _write(t, "nu.csv", "B,Ic (uA)\n" + GOOD_ROWS), "has no unit"),
    "ragged rows": (lambda t: _write(t, "r.csv", "B (mT),Ic (uA)\n1,2\n3,4,5\n"),
                    "line 3 has 3 fields"),
    "all-zero Ic": (lambda t: _write(t, "z.csv", "B (mT),Ic (uA)\n" + "\n".join(
        f"{i},0" for i in range(30))), "zero everywhere"),
    "no Ic column": (lambda t: _write(t, "c.csv", "B (mT),V (uV)\n1,2\n"),
                     "no critical-current column"),
    "corrupt hdf5": (lambda t: _write(t, "c.h5", "\x89HDF\r\n\x1a\n garbage"),
                     "not a readable HDF5 file"),
    "empty hdf5": (_hdf5_empty, "holds no datasets"),
    "hdf5 without units": (_hdf5_missing_units, "has no unit"),
    "corrupt npz": (lambda t: _write(t, "c.npz", "PK not really"), "not a readable .npz"),
    "binary junk": (lambda t: _write(t, "j.dat", "\x00\x01\x02" * 50), "binary"),
    "word in a later row": (lambda t: _write(t, "w.csv", "B (mT),Ic (uA)\n" + GOOD_ROWS
                                             + "\n3.1,lost\n"), "line 63, column 'Ic (uA)'"),
    "map of words": (_hdf5_map_of_words, "not numbers"),
    "empty folder": (_empty_folder, "holds no I-V files"),
    "npz that is one array": (_npy_as_npz, "not an archive"),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_bad_input_exit_2_with_message(case, tmp_path, capsys):
    make, expected = CASES[case]
    path = make(tmp_path)
    code = main(["analyze", path])
    err = capsys.readouterr().err
    assert code == 2
    assert expected in err
    assert "Traceback" not in err
    assert len(err.strip().splitlines()) == 1


def test_hdf5_path_that_does_not_exist(tmp_path, capsys):
    path = tmp_path / "s.h5"
    with h5py.File(path, "w") as f:
        f["field"] = np.linspace(-3, 3, 61)
    code = main(["analyze", str(path), "--field-col", "field", "--ic-col", "/scans/ic"])
    err = capsys.readouterr().err
    assert code == 2 and "no dataset at '/scans/ic'" in err


def test_unknown_column_name_lists_the_columns(tmp_path, capsys):
    path = _write(tmp_path, "s.csv", "B (mT),Ic (uA)\n" + GOOD_ROWS)
    code = main(["analyze", path, "--ic-col", "Isw"])
    err = capsys.readouterr().err
    assert code == 2 and "no critical-current column named 'Isw'" in err and "'B (mT)'" in err


def test_bad_plot_suffix(tmp_path, capsys):
    path = _write(tmp_path, "s.csv", "B (mT),Ic (uA)\n" + GOOD_ROWS)
    code = main(["analyze", path, "--plot", str(tmp_path / "fig.jpeg")])
    assert code == 2 and ".png, .pdf or .svg" in capsys.readouterr().err


def test_usage_errors_exit_2(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["analyze"])
    assert exc.value.code == 2
    assert main([]) == 2
