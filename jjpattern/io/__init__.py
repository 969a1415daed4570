"""Loaders: every format ends up as a :class:`Sweep` in SI units."""

from __future__ import annotations

import hashlib
import os

from ..errors import InputError
from .sweep import MIN_POINTS, Branch, Sweep, build_sweep

__all__ = ["load", "Sweep", "Branch", "MIN_POINTS"]

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


def load(path, *, field_col=None, ic_cols=(), field_unit=None, current_unit=None) -> Sweep:
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
        current_unit=current_unit, sha256=sha,
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
