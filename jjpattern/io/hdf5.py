"""HDF5 sweeps through h5py.

Default layout: 1-D datasets at the root named like the columns of a text
file (``field``, ``ic``, ``ic_pos``, ``ic_neg`` ...), each with a ``units``
attribute (``"mT"``, ``"uA"``); metadata from the file's root attributes.
``field_col`` / ``ic_cols`` name other dataset paths.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError


def _text(value) -> str:
    if isinstance(value, bytes):
        return value.decode("utf-8", "replace")
    if isinstance(value, np.ndarray) and value.size == 1:
        return _text(value.reshape(-1)[0])
    return str(value)


def read_columns(path: str, source: str, paths=()) -> tuple[dict, dict, dict]:
    """Read 1-D datasets, their units and the root attributes.

    Returns ``(columns, units, metadata)``; with ``paths`` only those datasets.
    """
    import h5py

    try:
        handle = h5py.File(path, "r")
    except OSError as exc:
        raise InputError(f"{source}: not a readable HDF5 file ({exc.__class__.__name__})") from None
    columns: dict[str, np.ndarray] = {}
    units: dict[str, str] = {}
    with handle:
        metadata = {k: _text(v) for k, v in handle.attrs.items()}
        if paths:
            selected = []
            for p in paths:
                if p not in handle or not isinstance(handle[p], h5py.Dataset):
                    raise InputError(f"{source}: no dataset at {p!r}; check the path")
                selected.append(p)
        else:
            selected = [k for k, v in handle.items() if isinstance(v, h5py.Dataset)]
            if not selected:
                raise InputError(f"{source}: the HDF5 file holds no datasets at its root")
        for name in selected:
            ds = handle[name]
            if ds.ndim != 1 or ds.dtype.kind not in "iuf":
                if paths:
                    raise InputError(
                        f"{source}: dataset {name!r} is not a 1-D numeric array "
                        f"(shape {ds.shape}, type {ds.dtype})"
                    )
                continue
            columns[name] = np.asarray(ds[()], dtype=float)
            unit = ds.attrs.get("units", ds.attrs.get("unit"))
            if unit is not None:
                units[name] = _text(unit)
    if not columns:
        raise InputError(f"{source}: the HDF5 file holds no 1-D numeric datasets at its root")
    lengths = {c.size for c in columns.values()}
    if len(lengths) > 1:
        raise InputError(
            f"{source}: the datasets have different lengths "
            f"({', '.join(f'{k}: {v.size}' for k, v in columns.items())})"
        )
    return columns, units, metadata
