"""The input's SHA-256, taken when a record needs it: the reference is Python's hashlib over
the file's bytes; a file that changed since it was opened is refused in one sentence."""

import hashlib
import os
import pickle

import h5py
import numpy as np
import pytest

from jjpattern.cli import main
from jjpattern.errors import InputError
from jjpattern.io import read
from jjpattern.io.digest import Digest, held
from jjpattern.io.source import HEAD_BYTES, open_source
from jjpattern.synthetic import ideal

CHANGED = r"the file changed while it was being analysed; run again once it is complete$"
MOVED = r"the file was moved or deleted after it was read; keep it in place until the"


def _hashlib(path) -> str:
    return hashlib.sha256(open(path, "rb").read()).hexdigest()


def _sweep_h5(path):
    field_mT = np.linspace(-5.0, 5.0, 201)
    ic_uA = 1e6 * ideal(field_mT * 1e-3, "rectangular", 10e-6, 1e-3, 0.0) + 0.2
    with h5py.File(path, "w") as f:
        f.create_dataset("field", data=field_mT).attrs["units"] = "mT"
        f.create_dataset("ic", data=ic_uA).attrs["units"] = "uA"


def _later(path):
    """The file's modification time a second later, as a rewrite in place would leave it."""
    stat = os.stat(path)
    os.utime(path, ns=(stat.st_atime_ns, stat.st_mtime_ns + 10**9))


@pytest.mark.parametrize("size", [1, 1 << 20, 2_500_001], ids=["1 B", "1 MiB", "2.5 MB"])
def test_digest_is_hashlib_of_the_bytes_whether_read_first_or_streamed(tmp_path, size):
    path = tmp_path / "data.bin"
    path.write_bytes(np.random.default_rng(size).integers(1, 256, size, np.uint8).tobytes())
    first = open_source(path)
    assert bytes(first.raw) == path.read_bytes()
    assert first.sha256 == _hashlib(path)  # from the bytes held
    streamed = open_source(path)
    assert streamed.sha256 == _hashlib(path)  # in blocks of 1 MiB from the file
    assert streamed._raw is None


def test_reading_leaves_the_digest_to_the_record(tmp_path):
    h5, csv = tmp_path / "s.h5", tmp_path / "s.csv"
    _sweep_h5(h5)
    csv.write_text("B (mT),Ic (uA)\n" + "".join(f"{b},{1 + b * b}\n" for b in range(-20, 21)))
    sweep = read(h5)
    lazy = held(sweep)
    assert isinstance(lazy, Digest) and not lazy.computed  # nothing hashed while reading
    assert sweep.sha256 == _hashlib(h5) and lazy.computed
    assert sweep.summary()["sha256"] == _hashlib(h5)
    # A reader that parsed the bytes has them hashed at once, and lets them go.
    text = read(csv)
    assert held(text).computed and held(text).raw is None
    assert text.sha256 == _hashlib(csv)


def test_a_sweep_with_its_digest_to_come_pickles(tmp_path):
    path = tmp_path / "s.h5"
    _sweep_h5(path)
    sweep = read(path)
    copy = pickle.loads(pickle.dumps(sweep))  # as a batch worker hands it on
    assert not held(copy).computed
    assert np.array_equal(copy.branches[0].ic_A, sweep.branches[0].ic_A)
    assert copy.sha256 == sweep.sha256 == _hashlib(path)


@pytest.mark.parametrize("change", ["grown", "touched", "replaced", "removed"])
def test_a_file_changed_before_its_digest_is_refused(tmp_path, change):
    path = tmp_path / "s.h5"
    _sweep_h5(path)
    sweep = read(path)
    if change == "grown":
        with open(path, "ab") as handle:
            handle.write(b"\0" * 16)
    elif change == "touched":
        _later(path)
    elif change == "replaced":  # written beside it and renamed over it: another inode
        _sweep_h5(tmp_path / "new.h5")
        os.replace(tmp_path / "new.h5", path)
    else:
        path.unlink()
    said = MOVED if change == "removed" else CHANGED
    with pytest.raises(InputError, match=rf"^{path}: {said}"):
        sweep.sha256  # noqa: B018
    with pytest.raises(InputError, match=said):
        sweep.summary()


def test_a_change_of_directory_before_the_record_is_no_change(tmp_path, monkeypatch):
    path = tmp_path / "s.h5"
    _sweep_h5(path)
    monkeypatch.chdir(tmp_path)
    sweep = read("s.h5")
    monkeypatch.chdir(tmp_path.parent)  # a notebook's os.chdir between read and record
    assert sweep.sha256 == _hashlib(path)


def test_the_command_line_says_so_in_one_sentence(tmp_path, monkeypatch, capsys):
    from jjpattern.io import hdf5

    path = tmp_path / "s.h5"
    _sweep_h5(path)
    real = hdf5.read

    def read_then_rewritten(source, settings, kind="auto"):
        data = real(source, settings, kind)
        _later(source.path)  # the acquisition program writes on while the fit runs
        return data

    monkeypatch.setattr(hdf5, "read", read_then_rewritten)
    assert main(["analyze", str(path), "--json"]) == 2
    err = capsys.readouterr().err
    assert f"{path}: the file changed while it was being analysed" in err
    assert "Traceback" not in err


def test_blank_files_are_refused_at_open_however_long(tmp_path):
    blank = tmp_path / "blank.csv"
    blank.write_bytes(b" \n\t" * HEAD_BYTES)  # longer than the first bytes read
    with pytest.raises(InputError, match="blank.csv: the file is empty"):
        open_source(blank)
    late = tmp_path / "late.csv"
    late.write_bytes(b"\n" * (3 * HEAD_BYTES) + b"B (mT),Ic (uA)\n")
    assert open_source(late).head == b"\n" * HEAD_BYTES
    (tmp_path / "empty.h5").write_bytes(b"")
    with pytest.raises(InputError, match="empty.h5: the file is empty"):
        read(tmp_path / "empty.h5")


def test_a_file_hdf5_will_not_open_by_its_path_is_read_from_its_bytes(tmp_path, monkeypatch):
    # HDF5 refuses to open a path that this process holds open without file locking, or on
    # a file system without locks: the reader falls back to the bytes (and hashes those).
    path = tmp_path / "s.h5"
    _sweep_h5(path)
    by_path = read(path)
    real, real_open = h5py.File, h5py.h5f.open
    refusal = OSError("Unable to synchronously open file (file locking flag values don't "
                      "match)")

    def no_paths(name, *args, **kwargs):
        if isinstance(name, str):
            raise refusal
        return real(name, *args, **kwargs)

    def no_path_open(name, *args, **kwargs):  # the reader opens through HDF5 on POSIX
        if name == os.fsencode(path):
            raise refusal
        return real_open(name, *args, **kwargs)

    monkeypatch.setattr(h5py, "File", no_paths)
    monkeypatch.setattr(h5py.h5f, "open", no_path_open)
    sweep = read(path)
    assert held(sweep).computed and sweep.sha256 == _hashlib(path)
    for got, expected in zip(sweep.branches, by_path.branches, strict=True):
        assert np.array_equal(got.field_T, expected.field_T)
        assert np.array_equal(got.ic_A, expected.ic_A)
