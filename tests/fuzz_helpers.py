"""Shared pieces of the fuzz tests: hypothesis profiles, valid files to mutate, invariants.

Profiles: ``ci`` (the default) is derandomized (a fixed seed, the same cases on every
run) and sized for about 20 s of the suite; ``long`` (``HYPOTHESIS_PROFILE=long``) draws
fresh random cases, fifty times as many, for local runs.
"""

from __future__ import annotations

import io
import math
import os
import tracemalloc

import h5py
import numpy as np
import scipy.io
from hypothesis import HealthCheck, settings
from scipy import constants

from jjpattern.io import IVMap, Sweep, read
from jjpattern.io.limits import MAX_CURRENT_A, MAX_FIELD_T
from jjpattern.io.sweep import MIN_POINTS

_QUIET = [HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.filter_too_much,
          HealthCheck.function_scoped_fixture]
settings.register_profile("ci", derandomize=True, deadline=None, database=None,
                          suppress_health_check=_QUIET, print_blob=True)
settings.register_profile("long", derandomize=False, deadline=None, database=None,
                          suppress_health_check=_QUIET, print_blob=True)
PROFILE = os.environ.get("HYPOTHESIS_PROFILE", "ci")
settings.load_profile(PROFILE)
_FACTOR = 50 if PROFILE == "long" else 1

#: The flux quantum h/2e (scipy.constants, CODATA exact values).
PHI0_WB = constants.h / (2 * constants.e)


def read_peak_bytes(path, settings=None) -> int:
    """tracemalloc peak of ``read(path)``, measured on a second call (the first imports)."""
    read(path, settings)
    tracemalloc.start()
    try:
        read(path, settings)
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def examples(n: int) -> int:
    """How many cases a test draws under the active profile."""
    return n * _FACTOR


def _pattern(n=61):
    """An invented KT-14 sweep: |sinc| with 1 mT period, 10 uA, noise folded at the nodes."""
    rng = np.random.default_rng(14)
    b_mT = np.linspace(-3, 3, n)
    ic_uA = np.abs(10 * np.sinc(b_mT) + rng.normal(0, 0.05, n))
    return b_mT, ic_uA


def _csv() -> bytes:
    b, ic = _pattern()
    rows = "\n".join(f"{x:.4f},{y:.4f}" for x, y in zip(b, ic, strict=True))
    return ("# junction: KT14-J03\n# length_um: 10\nB (mT),Ic (uA)\n" + rows + "\n").encode()


def _tsv_decimal_comma() -> bytes:
    b, ic = _pattern()
    rows = "\r\n".join(f"{x:.4f}\t{y:.4f}".replace(".", ",") for x, y in zip(b, ic, strict=True))
    return ("Feld\tIc\r\nmT\tuA\r\n" + rows + "\r\n").encode("latin-1").replace(
        b"Feld", b"B")


def _hdf5(mapped: bool) -> bytes:
    b, ic = _pattern(31 if mapped else 61)
    out = io.BytesIO()
    with h5py.File(out, "w") as f:
        f.attrs["junction"] = "KT14-J03"
        f.create_dataset("field", data=b).attrs["units"] = "mT"
        if mapped:
            bias = np.linspace(-15, 15, 41)
            f.create_dataset("bias", data=bias).attrs["units"] = "uA"
            # RSJ-like: V = R sqrt(I^2 - Ic^2) beyond Ic, with 5 ohm.
            excess = np.clip(bias[None, :] ** 2 - ic[:, None] ** 2, 0, None)
            v = np.sign(bias)[None, :] * 5 * np.sqrt(excess)
            f.create_dataset("voltage", data=v).attrs["units"] = "uV"
        else:
            f.create_dataset("ic", data=ic).attrs["units"] = "uA"
            f.create_dataset("temperature_log", data=np.linspace(0.3, 0.31, 500))
    return out.getvalue()


def _npz() -> bytes:
    b, ic = _pattern()
    out = io.BytesIO()
    np.savez_compressed(out, B_mT=b, Ic_uA=ic, metadata=np.array('{"junction": "KT14-J03"}'))
    return out.getvalue()


def _mat_v5() -> bytes:
    b, ic = _pattern()
    out = io.BytesIO()
    scipy.io.savemat(out, {"B_mT": b, "Ic_uA": ic, "junction": "KT14-J03"})
    return out.getvalue()


def _mat_v73() -> bytes:
    b, ic = _pattern()
    out = io.BytesIO()
    with h5py.File(out, "w", userblock_size=512) as f:
        for name, values in (("B_mT", b), ("Ic_uA", ic)):
            f.create_dataset(name, data=values[None, :]).attrs["MATLAB_class"] = b"double"
    raw = bytearray(out.getvalue())
    header = b"MATLAB 7.3 MAT-file, KT-14 sweep"
    raw[:len(header)] = header
    return bytes(raw)


def _netcdf(engine: str) -> bytes:
    import tempfile

    import xarray as xr

    b, ic = _pattern()
    ds = xr.Dataset({"ic": ("B", ic, {"units": "uA"})},
                    coords={"B": ("B", b, {"units": "mT"})}, attrs={"junction": "KT14-J03"})
    with tempfile.TemporaryDirectory() as folder:
        path = os.path.join(folder, "sweep.nc")
        ds.to_netcdf(path, engine=engine)
        with open(path, "rb") as handle:
            return handle.read()


#: Valid inputs by file name (the suffix chooses the reader as a user's file would).
BASES = {"sweep.csv": _csv(), "sweep_de.tsv": _tsv_decimal_comma(), "sweep.h5": _hdf5(False),
         "map.h5": _hdf5(True), "sweep.npz": _npz(), "sweep.mat": _mat_v5(),
         "sweep73.mat": _mat_v73(), "sweep.nc": _netcdf("scipy")}
# A netCDF-4 file (HDF5 read through h5netcdf) is not mutated here: one mutation made the
# HDF5 library itself crash the process (a segmentation fault no reader can catch).


def mutate(raw: bytes, operations) -> bytes:
    """Apply ``(kind, position, payload)`` edits: flip, cut, insert, overwrite, repeat."""
    data = bytearray(raw)
    for kind, position, payload in operations:
        if not data:
            break
        at = position % len(data)
        if kind == "flip":
            data[at] ^= payload[0] or 1
        elif kind == "cut":
            del data[at:]
        elif kind == "insert":
            data[at:at] = payload
        elif kind == "overwrite":
            data[at:at + len(payload)] = payload
        else:  # repeat a stretch: duplicated records, a doubled header
            data[at:at] = data[at:at + 8 * len(payload)]
    return bytes(data)


def check_read(data) -> None:
    """What a reader returns is in SI, finite where used, and within the stated limits."""
    assert isinstance(data, (Sweep, IVMap))
    if isinstance(data, Sweep):
        assert data.branches
        for b in data.branches:
            assert b.points_used >= MIN_POINTS
            assert np.isfinite(b.field_T).all() and np.isfinite(b.ic_A).all()
            assert (np.diff(b.field_T) > 0).all()
            # A column of one polarity keeps its few noise values of the other sign.
            assert (np.abs(b.ic_A) <= MAX_CURRENT_A).all()
            assert (np.abs(b.field_T) <= MAX_FIELD_T).all()
            assert b.points_dropped >= 0
        return
    assert data.signal.ndim == 2 and data.bias_A.shape == data.signal.shape
    assert data.field_T.shape == (data.signal.shape[0],)
    assert np.isfinite(data.field_T).all() and (np.diff(data.field_T) >= 0).all()
    assert not np.isinf(data.signal).any()


def check_result(result) -> None:
    """Every number is finite, A_eff = Phi0 / period, standard errors >= 0; a missing
    number comes with a flag or a reason."""
    for fit in result.fits:
        for key, value in fit.numbers().items():
            if isinstance(value, float):
                assert math.isfinite(value), (key, value)
                if "stderr" in key:
                    assert value >= 0, (key, value)
        if fit.period_T is not None:
            assert fit.period_T > 0
            if fit.effective_area_m2 is not None:
                assert fit.effective_area_m2 == _close(PHI0_WB / fit.period_T)
        elif not fit.withheld:
            assert result.flags, "a fit without a period and no flag saying why"
    json_text = result.to_json()
    assert "NaN" not in json_text and "Infinity" not in json_text


def _close(expected):
    import pytest

    return pytest.approx(expected, rel=1e-9)
