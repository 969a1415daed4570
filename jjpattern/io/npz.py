"""NumPy ``.npz`` sweeps, read with ``allow_pickle=False``.

Keys are column names with their unit (``B_mT``, ``Ic_uA``); an optional
``metadata`` key holds a JSON object as a string.
"""

from __future__ import annotations

import json
import zipfile

import numpy as np

from ..errors import InputError


def read_columns(path: str, source: str) -> tuple[dict, dict]:
    """Return ``(columns, metadata)`` from an ``.npz`` archive."""
    try:
        archive = np.load(path, allow_pickle=False)
    except (OSError, ValueError, zipfile.BadZipFile) as exc:
        raise InputError(f"{source}: not a readable .npz file ({exc})") from None
    columns: dict[str, np.ndarray] = {}
    metadata: dict = {}
    with archive:
        for key in archive.files:
            try:
                value = archive[key]
            except ValueError:
                raise InputError(
                    f"{source}: array {key!r} needs pickle, which is refused for safety"
                ) from None
            if key == "metadata":
                try:
                    metadata = dict(json.loads(str(value)))
                except (ValueError, TypeError):
                    raise InputError(
                        f"{source}: 'metadata' must be a JSON object stored as a string"
                    ) from None
            elif value.ndim == 1 and value.dtype.kind in "iuf":
                columns[key] = value.astype(float)
    if not columns:
        raise InputError(f"{source}: the .npz file holds no 1-D numeric arrays")
    if len({v.size for v in columns.values()}) > 1:
        raise InputError(f"{source}: the arrays in the .npz file have different lengths")
    return columns, metadata
