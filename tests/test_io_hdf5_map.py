"""HDF5 maps read by h5py from the file's path into one array, converted in place.

The reference for every value is h5py reading the same dataset (times the unit factor);
the reference for every hash is hashlib over the file.
"""

import hashlib
import io

import h5py
import numpy as np
import pytest
from fuzz_helpers import read_peak_bytes

from jjpattern.errors import InputError
from jjpattern.io import read
from jjpattern.io.registry import reader_for
from jjpattern.io.source import BufferStream, _read_all, open_source
from jjpattern.settings import ReadSettings

FIELD_MT = np.linspace(-3.0, 3.0, 41)
BIAS_UA = np.linspace(-20.0, 20.0, 257)


def _voltage_uV(rng):
    return rng.normal(0.0, 5.0, (FIELD_MT.size, BIAS_UA.size))


def _write(path, v_uV, field_mT=FIELD_MT, **options):
    userblock = options.pop("userblock_size", 0)
    transposed = options.pop("transposed", False)
    extra = options.pop("extra", None)
    units = options.pop("units", ("mT", "uA", "uV"))
    with h5py.File(path, "w", userblock_size=userblock) as f:
        f.create_dataset("field", data=field_mT).attrs["units"] = units[0]
        f.create_dataset("bias", data=BIAS_UA).attrs["units"] = units[1]
        f.create_dataset("voltage", data=v_uV.T if transposed else v_uV,
                         **options).attrs["units"] = units[2]
        if extra is not None:
            f.create_dataset("log", data=extra)


def _read_with_source(path, settings=None):
    """The map, read without the file's bytes ever being read whole (checked)."""
    source = open_source(path, settings)
    got = reader_for(source).read(source, settings or ReadSettings())
    assert source._raw is None and not source.digest.computed
    assert got.signal.flags.owndata or got.signal.base.flags.owndata  # one array of its own
    return got


def _h5py_values(path):
    with h5py.File(path, "r") as f:
        return np.asarray(f["voltage"][()], dtype=np.float64)


@pytest.mark.parametrize("userblock", [0, 512])
def test_map_is_read_by_its_path_into_its_own_array(tmp_path, userblock):
    v = _voltage_uV(np.random.default_rng(1))
    path = tmp_path / "m.h5"
    _write(path, v, userblock_size=userblock)
    expected = _h5py_values(path) * 1e-6
    got = _read_with_source(path)
    assert got.signal.flags.c_contiguous and got.signal.flags.writeable
    assert np.array_equal(got.signal, expected)
    assert got.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()  # hashlib
    assert got.bias_A.strides[0] == 0  # the shared bias row stays shared
    assert np.array_equal(got.bias_A[3], BIAS_UA * 1e-6)


def test_descending_field_is_reordered_in_place(tmp_path):
    v = _voltage_uV(np.random.default_rng(2))
    path = tmp_path / "m.h5"
    _write(path, v, field_mT=FIELD_MT[::-1].copy())
    expected = _h5py_values(path)[::-1] * 1e-6
    got = _read_with_source(path)
    assert np.array_equal(got.field_T, FIELD_MT * 1e-3)
    assert np.array_equal(got.signal, expected)
    assert got.bias_A.strides[0] == 0


# Unit factors to SI as the SI prefixes define them (milli 1e-3, micro 1e-6, nano 1e-9).
@pytest.mark.parametrize("units, factors", [
    (("mT", "uA", "uV"), (1e-3, 1e-6, 1e-6)),
    (("T", "A", "V"), (1.0, 1.0, 1.0)),
    (("uT", "nA", "mV"), (1e-6, 1e-9, 1e-3)),
])
@pytest.mark.parametrize("descending", [False, True], ids=["ascending", "descending"])
def test_values_are_h5py_values_times_the_unit_factor_bit_for_bit(tmp_path, units, factors,
                                                                 descending):
    v = _voltage_uV(np.random.default_rng(8))
    field = FIELD_MT[::-1].copy() if descending else FIELD_MT
    path = tmp_path / "m.h5"
    _write(path, v, field_mT=field, units=units)
    with h5py.File(path, "r") as f:
        stored = {name: np.asarray(f[name][()], dtype=np.float64)
                  for name in ("field", "bias", "voltage")}
    order = slice(None, None, -1) if descending else slice(None)
    got = _read_with_source(path)
    assert np.array_equal(got.field_T, stored["field"][order] * factors[0])
    assert np.array_equal(got.bias_A[0], stored["bias"] * factors[1])
    assert np.array_equal(got.signal, stored["voltage"][order] * factors[2])


@pytest.mark.parametrize("options", [
    {"dtype": np.float32}, {"dtype": ">f8"}, {"chunks": (8, 64)},
    {"compression": "gzip"}, {"transposed": True},
    {"extra": np.zeros(3 * FIELD_MT.size * BIAS_UA.size)},  # the map is a third of the file
], ids=["float32", "big-endian", "chunked", "gzip", "transposed", "small-part"])
def test_other_storage_is_read_by_hdf5_with_the_same_values(tmp_path, options):
    v = _voltage_uV(np.random.default_rng(3))
    path = tmp_path / "m.h5"
    _write(path, v, **options)
    with h5py.File(path, "r") as f:
        stored = np.asarray(f["voltage"][()], dtype=np.float64)
    expected = (stored.T if options.get("transposed") else stored) * 1e-6
    got = _read_with_source(path)
    assert np.array_equal(got.signal, expected)


def test_gaps_pass_and_bad_values_are_named_after_scaling_in_place(tmp_path):
    v = _voltage_uV(np.random.default_rng(4))
    v[5, 7:40] = np.nan  # a gap: kept as NaN
    _write(tmp_path / "gap.h5", v)
    got = read(tmp_path / "gap.h5")
    assert np.isnan(got.signal[5, 7:40]).all()
    assert np.array_equal(np.isnan(got.signal), np.isnan(v))
    v[5, 7:40] = 1.0
    v[30, 100] = 2e9  # 2e3 V once in SI: beyond the 1e3 V believed
    _write(tmp_path / "big.h5", v)
    value = 30 * BIAS_UA.size + 101
    with pytest.raises(InputError, match=rf"holds a voltage of 2000 V \(value {value}\)"):
        read(tmp_path / "big.h5")
    v[30, 100] = 1e307
    with h5py.File(tmp_path / "inf.h5", "w") as f:  # 1e307 kOhm overflows to infinity in ohm
        f.create_dataset("field", data=FIELD_MT).attrs["units"] = "mT"
        f.create_dataset("bias", data=BIAS_UA).attrs["units"] = "uA"
        f.create_dataset("dvdi", data=v).attrs["units"] = "kOhm"
    with pytest.raises(InputError, match="'dvdi' holds infinite values"):
        read(tmp_path / "inf.h5")


def test_reading_a_map_peaks_near_the_file_size(tmp_path):
    """tracemalloc peak of read() below 1.5 x the map (h5py alone: 1.0 x; it was 2.7 x)."""
    v = np.random.default_rng(5).normal(size=(1001, BIAS_UA.size))
    path = tmp_path / "m.h5"
    _write(path, v, field_mT=np.linspace(-3, 3, 1001))
    assert read_peak_bytes(path) < 1.5 * v.nbytes


def _steps(stream):
    """What a sequence of seeks and reads gives, errors included."""
    out = []
    for step in (lambda: stream.read(3), lambda: stream.seek(-2, 2), lambda: stream.read(),
                 lambda: stream.read(), lambda: stream.seek(100), lambda: stream.read(4),
                 lambda: stream.seek(-500, 1), lambda: stream.tell(), lambda: stream.seek(-1),
                 lambda: stream.seek(0, 7), lambda: stream.seek(2, 0),
                 lambda: stream.readinto(bytearray(4)), lambda: stream.tell(),
                 lambda: stream.read(-1), lambda: stream.read(None)):
        try:
            out.append(step())
        except ValueError as exc:
            out.append(type(exc))
    return out


def test_buffer_stream_reads_and_seeks_as_bytesio():
    data = bytes(range(50))
    assert _steps(BufferStream(bytearray(data))) == _steps(io.BytesIO(data))
    target = bytearray(6)
    stream = BufferStream(bytearray(data))
    stream.seek(47)
    assert stream.readinto(target) == 3 and target == bytearray(data[47:] + b"\0\0\0")


def test_a_file_that_changes_size_while_read_is_read_to_its_end():
    assert _read_all(io.BytesIO(b"abcdef"), 4, "f", None) == bytearray(b"abcdef")
    assert _read_all(io.BytesIO(b"abc"), 10, "f", None) == bytearray(b"abc")
    with pytest.raises(InputError, match="holds 6 bytes, above the limit of 5"):
        _read_all(io.BytesIO(b"abcdef"), 4, "f", ReadSettings(max_bytes=5))


def test_arrays_not_owned_are_left_as_given():
    from jjpattern.io.maps import from_arrays

    rng = np.random.default_rng(7)
    field = np.array([2.0, 1.0, 0.0])  # descending: rows are reordered
    bias = rng.normal(size=(3, 5))  # one bias row per field step
    signal = rng.normal(size=(3, 5))
    given = field.copy(), bias.copy(), signal.copy()
    got = from_arrays(field, bias, signal, {"f": "mT", "b": "uA", "s": "uV"},
                      {"field": "f", "bias": "b", "signal": "s"}, source="x", sha256=None,
                      metadata={}, settings=ReadSettings())
    assert all(np.array_equal(a, b) for a, b in zip((field, bias, signal), given, strict=True))
    assert np.array_equal(got.signal, signal[::-1] * 1e-6)
    assert np.array_equal(got.bias_A, bias[::-1] * 1e-6)


def test_scalar_attributes_read_as_h5py_reads_them(tmp_path):
    from jjpattern.io.hdf5 import _scalar

    path = tmp_path / "a.h5"
    values = {"vlen": "uV", "utf8": "\u00b5V", "fixed": np.bytes_(b"mT"), "int": 3,
              "float": 2.5, "array": np.array([1.0, 2.0]), "empty": h5py.Empty("f8"),
              "vlen bytes": b"\xffuV"}
    with h5py.File(path, "w") as f:
        ds = f.create_dataset("x", data=np.zeros(3))
        for key, value in values.items():
            ds.attrs[key] = value
    with h5py.File(path, "r") as f:
        attrs = f["x"].attrs
        for key in values:
            got, expected = _scalar(attrs, key), attrs[key]  # reference: h5py's own read
            assert type(got) is type(expected), key
            assert np.array_equal(got, expected) if key != "empty" else got == expected, key


@pytest.mark.parametrize("storage", [{}, {"chunks": (8, 64)}], ids=["contiguous", "chunked"])
@pytest.mark.parametrize("arrangement", ["ascending", "descending", "shuffled"])
def test_rows_read_in_blocks_land_in_field_order(tmp_path, monkeypatch, storage, arrangement):
    from jjpattern.io import stored

    monkeypatch.setattr(stored, "READ_BLOCK", 3 * 8 * BIAS_UA.size)  # blocks of 3 rows, 41 rows
    rng = np.random.default_rng(9)
    stored_order = {"ascending": np.arange(FIELD_MT.size),
                    "descending": np.arange(FIELD_MT.size)[::-1],
                    "shuffled": rng.permutation(FIELD_MT.size)}[arrangement]
    path = tmp_path / "m.h5"
    _write(path, _voltage_uV(rng), field_mT=FIELD_MT[stored_order], **storage)
    back = np.argsort(FIELD_MT[stored_order], kind="stable")  # stored row of each field row
    expected = _h5py_values(path)[back] * 1e-6  # reference: h5py, reordered by numpy
    got = _read_with_source(path)
    assert np.array_equal(got.field_T, FIELD_MT * 1e-3)
    assert np.array_equal(got.signal, expected)


def test_a_bad_value_in_a_later_block_is_named_in_field_order(tmp_path, monkeypatch):
    from jjpattern.io import stored

    monkeypatch.setattr(stored, "READ_BLOCK", 3 * 8 * BIAS_UA.size)
    v = _voltage_uV(np.random.default_rng(10))
    v[2, 100] = 2e9  # stored row 2 of a descending file: field row 38 once sorted
    _write(tmp_path / "big.h5", v, field_mT=FIELD_MT[::-1].copy())
    value = 38 * BIAS_UA.size + 101
    with pytest.raises(InputError, match=rf"holds a voltage of 2000 V \(value {value}\)"):
        read(tmp_path / "big.h5")
