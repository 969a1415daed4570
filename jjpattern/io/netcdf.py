"""netCDF files and xarray datasets, through xarray (the optional extra ``netcdf``).

Coordinates and variables are found by name as columns are (``field``/``B``,
``ic``/``ic_pos``...); when no field is named, the dimension coordinate of the
current variables is the field (``ic(B)``). Units come from each variable's
``units`` attribute, metadata from the dataset's attributes. A current
variable with a polarity dimension (labels ``+``/``-``, ``positive``/
``negative`` or ``1``/``-1``) gives one branch per label. Without xarray a
netCDF-4 file is still read as the HDF5 file it is; a classic netCDF file
needs the extra.
"""

from __future__ import annotations

import gc
import sys

import numpy as np

from ..errors import InputError
from .containers import from_named_arrays
from .limits import check_points, clip, damaged, real
from .sweep import ic_branch_hint, is_field_name
from .units import split_header

NAME = "netcdf"
SUFFIXES = (".nc", ".nc4", ".netcdf", ".cdf")
CLASSIC = (b"CDF\x01", b"CDF\x02", b"CDF\x05")
HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"
EXTRA = "pip install 'jjpattern[netcdf]'"
#: Attributes that netCDF and its libraries write for themselves, not metadata.
INTERNAL_ATTRS = {"_NCProperties", "_nc3_strict", "_Netcdf4Dimid", "_Netcdf4Coordinates",
                  "DIMENSION_LIST", "REFERENCE_LIST", "CLASS", "NAME", "_FillValue",
                  "_IsNetcdf4Coordinate", "coordinates"}
_POLARITY = {"+": "pos", "pos": "pos", "positive": "pos", "1": "pos", "+1": "pos", "1.0": "pos",
             "-": "neg", "neg": "neg", "negative": "neg", "-1": "neg", "-1.0": "neg"}


def sniff(source) -> bool:
    """The classic netCDF signature, or a netCDF suffix."""
    return not source.is_folder and (source.head[:4] in CLASSIC or source.suffix in SUFFIXES)


def xarray_module():
    """xarray, or ``None`` when the optional extra is not installed."""
    try:
        import xarray
    except ImportError:
        return None
    return xarray


def read(source, settings, kind: str = "auto"):
    """A Sweep or an IVMap from a netCDF file (classic or netCDF-4)."""
    is_hdf5 = source.head.startswith(HDF5_SIGNATURE)
    xr = xarray_module()
    if xr is None:
        if is_hdf5:
            from . import hdf5

            return hdf5.read(source, settings, kind)
        raise InputError(f"{source.path}: is a netCDF file, which is read through xarray: "
                         f"install the optional extra netcdf ({EXTRA})")
    engine = "h5netcdf" if is_hdf5 else "scipy"
    dataset = _open(xr, source, engine)
    try:
        with dataset:
            return read_dataset(dataset, source=source.path, sha256=source.digest,
                                settings=settings, kind=kind, what="the netCDF file")
    except InputError:
        raise
    except _DAMAGE as exc:  # values are read lazily: damage may show only now
        raise damaged(source.path, "netCDF file", exc) from None


def _open(xr, source, engine):
    """The dataset, or an InputError raised once the half-opened file is gone.

    h5netcdf's ``File.__del__`` fails on a file its constructor refused and Python prints
    that as a traceback; the failure is kept until those objects are freed (quietly, here)
    and raised afterwards, so that one sentence is all the user sees.
    """
    failure = None
    hook = sys.unraisablehook
    sys.unraisablehook = lambda unraisable: None
    try:
        try:
            return xr.open_dataset(source.stream(), engine=engine)
        except ImportError as exc:  # xarray without h5netcdf (or scipy's netCDF support)
            failure = InputError(f"{source.path}: reading this netCDF file needs "
                                 f"{exc.name or engine}; install the optional extra netcdf "
                                 f"({EXTRA})")
        except _DAMAGE as exc:
            failure = damaged(source.path, "netCDF file", exc)
        gc.collect()  # the traceback's frames held the half-opened file
    finally:
        sys.unraisablehook = hook
    raise failure


#: What xarray and its engines raise on a damaged file (headers, B-trees, sizes, strings).
_DAMAGE = (OSError, ValueError, TypeError, KeyError, IndexError, RuntimeError, OverflowError,
           EOFError, AttributeError, MemoryError)


def _text(value) -> str:
    if isinstance(value, bytes):
        return value.decode("utf-8", "replace")
    if isinstance(value, np.ndarray):
        flat = value.reshape(-1)
        return _text(flat[0]) if flat.size == 1 else ", ".join(_text(v) for v in flat)
    if isinstance(value, np.generic):
        return str(value.item())
    return str(value)


def dataset_metadata(attrs) -> dict:
    """A dataset's attributes as metadata, without netCDF's own bookkeeping."""
    return {str(k): _text(v) for k, v in attrs.items() if str(k) not in INTERNAL_ATTRS}


def _polarity_labels(dataset, dim, size):
    if dim in dataset.coords:
        labels = [_text(v).strip().lower() for v in np.asarray(dataset.coords[dim].values)]
    else:
        return None
    mapped = [_POLARITY.get(label) for label in labels]
    if None in mapped or len(set(mapped)) != size:
        return None
    return mapped


def read_dataset(dataset, *, source, sha256, settings, kind="auto", what="the xarray dataset"):
    """A Sweep or an IVMap from an ``xarray.Dataset`` (coordinates, variables, attributes)."""
    arrays, units, metadata = {}, {}, dataset_metadata(dataset.attrs)
    current_dims = set()
    for name, var in list(dataset.coords.items()) + list(dataset.data_vars.items()):
        name = str(name)
        if var.dtype.kind == "c":
            real(np.zeros(0, complex), source, f"variable {clip(name)}")
        if var.dtype.kind not in "iuf":
            continue
        check_points(source, f"variable {name}", var.shape, settings)
        values = np.asarray(var.values)
        unit = var.attrs.get("units", var.attrs.get("unit"))
        if values.ndim == 0:
            metadata.setdefault(name, _text(values))
            continue
        is_current = ic_branch_hint(split_header(name)[0]) is not None
        if values.ndim == 2 and is_current:
            split = _split_polarity(dataset, var, name, values)
            if split:
                for key, column in split.items():
                    arrays[key] = column
                    if unit is not None:
                        units[key] = _text(unit)
                current_dims.update(d for d in var.dims if len(split) != var.sizes[d])
                continue
        if values.ndim > 2:
            continue
        arrays[name] = values.astype(float, copy=False)
        if unit is not None:
            units[name] = _text(unit)
        if is_current and values.ndim == 1:
            current_dims.add(var.dims[0])
    if not (settings.field_col or settings.bias_col or settings.signal_col) and not any(
            is_field_name(split_header(n)[0], settings.coil_T_per_A is not None)
            for n in arrays):
        # ic(B): the dimension coordinate of the currents is the field.
        dims = [d for d in current_dims if d in dataset.coords and str(d) in arrays]
        if len(dims) == 1:
            import dataclasses

            settings = dataclasses.replace(settings, field_col=str(dims[0]))
    return from_named_arrays(arrays, source=source, sha256=sha256, settings=settings,
                             kind=kind, sep="/", what=what, units=units, metadata=metadata,
                             option_names=("variable", "name"),
                             layout={"container": "netCDF/xarray"})


def _split_polarity(dataset, var, name, values):
    """``{'ic_pos': ..., 'ic_neg': ...}`` from a current with a polarity dimension."""
    for axis, dim in enumerate(var.dims):
        size = var.sizes[dim]
        if size > 2:
            continue
        labels = _polarity_labels(dataset, dim, size)
        if labels is None:
            continue
        base = split_header(name)[0]
        unit = split_header(name)[1]
        out = {}
        for k, label in enumerate(labels):
            key = f"{base}_{label}" + (f" ({unit})" if unit else "")
            out[key] = np.take(values, k, axis=axis).astype(float)
        return out
    return None
