"""Loaders: every format ends up as a :class:`Sweep` in SI units."""

from __future__ import annotations

import hashlib
import os

from ..errors import InputError
from .sweep import MIN_POINTS, Branch, Sweep, build_sweep

__all__ = ["load", "load_map", "open_input", "Sweep", "Branch", "MIN_POINTS"]

_HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"


def _read_bytes(path: str) -> bytes:
    if not os.path.exists(path):
        raise InputError(f"{path}: file not found; check the path")
    if os.path.isdir(path):
        raise InputError(f"{path}: is a folder, not a sweep file")
    try:
        with open(path, "rb") as handle:
            return handle.read()
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror})") from None


def load(path, *, field_col=None, ic_cols=(), field_unit=None, current_unit=None,
         coil_T_per_A=None) -> Sweep:
    """Load an Ic(B) sweep from delimited text, HDF5 or ``.npz``.

    Parameters
    ----------
    path : str or path-like
        The file. The format is chosen by its content and suffix.
    field_col, ic_cols : optional
        Column names (or HDF5 dataset paths, or ``.npz`` keys) to use instead
        of recognising them from their names; ``ic_cols`` is a sequence.
    field_unit, current_unit : str, optional
        Units to use when the names carry none (``"mT"``, ``"uA"``).
    coil_T_per_A : float, optional
        The field axis is a magnet current; multiply by this coil constant.

    Returns
    -------
    Sweep
        Fields in tesla, critical-current magnitudes in ampere, per branch.
    """
    path = os.fspath(path)
    raw = _read_bytes(path)
    if not raw.strip():
        raise InputError(f"{path}: the file is empty")
    sha = hashlib.sha256(raw).hexdigest()
    ic_cols = tuple(ic_cols or ())
    common = dict(
        source=path, field_col=field_col, ic_cols=ic_cols, field_unit=field_unit,
        current_unit=current_unit, sha256=sha, coil_T_per_A=coil_T_per_A,
    )
    suffix = os.path.splitext(path)[1].lower()
    if raw.startswith(_HDF5_SIGNATURE) or suffix in {".h5", ".hdf5", ".hdf"}:
        from .hdf5 import read_columns

        explicit = ([field_col] if field_col else []) + list(ic_cols)
        if explicit and not (field_col and ic_cols):
            raise InputError(
                f"{path}: give both --field-col and --ic-col as dataset paths, or neither"
            )
        columns, units, metadata = read_columns(path, path, tuple(explicit))
        return build_sweep(columns, units=units, metadata=metadata, where="dataset", **common)
    if raw.startswith(b"PK") or suffix == ".npz":
        from .npz import read_columns

        columns, metadata = read_columns(path, path)
        return build_sweep(columns, metadata=metadata, where="array", **common)
    from .text import decode, parse_table

    metadata, columns, _ = parse_table(decode(raw, path), path)
    return build_sweep(columns, metadata=metadata, **common)


def _is_hdf5(path: str, raw: bytes) -> bool:
    return raw.startswith(_HDF5_SIGNATURE) or os.path.splitext(path)[1].lower() in {
        ".h5", ".hdf5", ".hdf"}


def load_map(path, options=None):
    """Load a raw V(I, B) map: HDF5 arrays, a long-form text table, or a folder of I-V files.

    ``options`` is a :class:`jjpattern.io.maps.MapOptions` (columns, units,
    coil constant, layout).
    """
    from .maps import MapOptions, from_long_table, read_hdf5_map, read_iv_folder

    path = os.fspath(path)
    opts = options or MapOptions()
    if os.path.isdir(path):
        return read_iv_folder(path, opts)
    raw = _read_bytes(path)
    if not raw.strip():
        raise InputError(f"{path}: the file is empty")
    sha = hashlib.sha256(raw).hexdigest()
    if _is_hdf5(path, raw):
        return read_hdf5_map(path, sha, opts)
    from .text import decode, parse_table

    metadata, columns, _ = parse_table(decode(raw, path), path)
    return from_long_table(columns, source=path, sha256=sha, metadata=metadata, opts=opts)


def open_input(path, *, sweep_options: dict, map_options):
    """A :class:`Sweep` for an Ic(B) table, or an :class:`IVMap` for raw data.

    Raw data are a folder, an HDF5 file with a 2-D dataset, or a text table
    with bias and voltage (or dV/dI) columns.
    """
    from .maps import hdf5_has_map, looks_like_map

    path = os.fspath(path)
    if os.path.isdir(path):
        return load_map(path, map_options)
    raw = _read_bytes(path)
    if raw.strip() and _is_hdf5(path, raw) and hdf5_has_map(path):
        return load_map(path, map_options)
    if raw.strip() and not _is_hdf5(path, raw) and not raw.startswith(b"PK"):
        from .maps import MapOptions, from_long_table
        from .text import decode, parse_table

        metadata, columns, _ = parse_table(decode(raw, path), path)
        sha = hashlib.sha256(raw).hexdigest()
        if looks_like_map(columns):
            return from_long_table(columns, source=path, sha256=sha, metadata=metadata,
                                   opts=map_options or MapOptions())
        options = dict(sweep_options)
        options["ic_cols"] = tuple(options.get("ic_cols") or ())
        return build_sweep(columns, metadata=metadata, source=path, sha256=sha, **options)
    return load(path, **sweep_options)
