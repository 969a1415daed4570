"""Data handed straight to the Python API: a ``pandas.DataFrame`` or an ``xarray.Dataset``.

A DataFrame is read like a text table (its column names carry roles and
units; a named index counts as a column; ``df.attrs`` are metadata, with
``df.attrs["units"]`` a mapping of column to unit). A Dataset is read as a
netCDF file is. The SHA-256 recorded is of the names, values and attributes.
"""

from __future__ import annotations

import hashlib
import json

import numpy as np

from ..errors import InputError
from ..settings import ReadSettings
from .limits import clip, real

FRAME_LABEL = "<pandas.DataFrame>"
DATASET_LABEL = "<xarray.Dataset>"


def is_frame(obj) -> bool:
    return type(obj).__module__.startswith("pandas") and hasattr(obj, "columns")


def is_dataset(obj) -> bool:
    return type(obj).__module__.startswith("xarray") and hasattr(obj, "data_vars")


def read_object(obj, settings: ReadSettings | None = None, *, kind: str = "auto"):
    """A Sweep or an IVMap from a DataFrame or a Dataset, as :func:`jjpattern.io.read` does."""
    settings = settings or ReadSettings()
    if is_dataset(obj):
        from .netcdf import read_dataset

        return read_dataset(obj, source=DATASET_LABEL, sha256=_dataset_sha256(obj),
                            settings=settings, kind=kind)
    if is_frame(obj):
        return _read_frame(obj, settings, kind)
    raise InputError(f"cannot read a {type(obj).__name__}; give a file or folder path, a "
                     "pandas.DataFrame or an xarray.Dataset")


def _digest(named, attrs) -> str:
    digest = hashlib.sha256()
    for name, values in named:
        digest.update(str(name).encode("utf-8", "surrogateescape") + b"\0")
        digest.update(np.ascontiguousarray(values, dtype="<f8").tobytes())
    digest.update(json.dumps(attrs, sort_keys=True, default=str).encode("utf-8"))
    return digest.hexdigest()


def _dataset_sha256(ds) -> str:
    named = [(n, np.asarray(v.values, dtype=float)) for n, v in
             list(ds.coords.items()) + list(ds.data_vars.items()) if v.dtype.kind in "iufb"]
    return _digest(named, {str(k): v for k, v in ds.attrs.items()})


def _read_frame(frame, settings, kind):
    import pandas as pd

    from .maps import choose_kind, from_long_table, looks_like_map
    from .sweep import build_sweep

    if frame.index.name is not None and frame.index.name not in frame.columns:
        frame = frame.reset_index()
    columns, named = {}, []
    for position, name in enumerate(frame.columns):
        key = str(name)
        if key in columns:
            raise InputError(f"{FRAME_LABEL}: the column name {clip(key)} comes twice; rename one")
        cells = frame.iloc[:, position]
        if cells.dtype.kind == "c":
            real(np.zeros(0, complex), FRAME_LABEL, f"column {clip(key)}")
        values = pd.to_numeric(cells, errors="coerce").to_numpy(dtype=float)
        bad = np.flatnonzero(np.isnan(values) & cells.notna().to_numpy())
        if bad.size:
            columns[key] = (f"{FRAME_LABEL}: row {bad[0]} of column {clip(key)} holds "
                            f"{clip(cells.iloc[bad[0]])}, not a number")
        else:
            columns[key] = values
            named.append((key, values))
    attrs = dict(getattr(frame, "attrs", {}) or {})
    units = attrs.pop("units", None) or {}
    if not isinstance(units, dict):
        raise InputError(f"{FRAME_LABEL}: attrs['units'] must map column names to units")
    metadata = {str(k): str(v) for k, v in attrs.items()}
    sha256 = _digest(named, {"metadata": metadata, "units": units})
    if choose_kind(kind, settings, looks_like_map(columns)) == "map":
        return from_long_table(columns, source=FRAME_LABEL, sha256=sha256,
                               metadata=metadata, settings=settings)
    return build_sweep(columns, source=FRAME_LABEL, sha256=sha256, settings=settings,
                       units={str(k): str(v) for k, v in units.items()}, metadata=metadata)
