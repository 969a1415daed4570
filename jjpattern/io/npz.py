"""NumPy ``.npz`` sweeps, read from the bytes already read, with ``allow_pickle=False``.

Keys are column names with their unit (``B_mT``, ``Ic_uA``); an optional
``metadata`` key holds a JSON object as a string.
"""

from __future__ import annotations

import io
import json
import zipfile

import numpy as np

from ..errors import InputError
from .sweep import build_sweep

NAME = "npz"


def sniff(source) -> bool:
    """The zip signature at the start, or the ``.npz`` suffix."""
    return not source.is_folder and (source.raw.startswith(b"PK") or source.suffix == ".npz")


def read(source, settings, kind: str = "auto"):
    """A Sweep from the archive's 1-D numeric arrays (an .npz holds no raw maps)."""
    if kind == "map":
        raise InputError(f"{source.path}: an .npz file holds an Ic(B) sweep, not a raw map; "
                         "save the map as HDF5 or as a long text table")
    columns, metadata = read_columns(source.raw, source.path)
    return build_sweep(columns, source=source.path, sha256=source.sha256, settings=settings,
                       metadata=metadata, where="array")


def read_columns(raw: bytes, source: str) -> tuple[dict, dict]:
    """Return ``(columns, metadata)`` from the bytes of an ``.npz`` archive."""
    try:
        members = zipfile.ZipFile(io.BytesIO(raw)).namelist()
    except (zipfile.BadZipFile, OSError, ValueError):
        members = None
    if members and not any(m.endswith(".npy") for m in members):
        from .registry import FORMATS_READ

        office = any(m in ("[Content_Types].xml", "mimetype") for m in members)
        kind = "a spreadsheet or office document (.xlsx, .ods)" if office else "a zip archive"
        fix = "save the sheet as CSV" if office else "unpack it and give the data file"
        raise InputError(f"{source}: is {kind}, not one of the formats read ({FORMATS_READ}); "
                         f"{fix}")
    try:
        archive = np.load(io.BytesIO(raw), allow_pickle=False)
    except (OSError, ValueError, EOFError, zipfile.BadZipFile) as exc:
        raise InputError(f"{source}: not a readable .npz file ({exc})") from None
    if not isinstance(archive, np.lib.npyio.NpzFile):
        raise InputError(f"{source}: not a readable .npz file (a single array, not an archive)")
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
            except (OSError, EOFError, zipfile.BadZipFile) as exc:
                raise InputError(f"{source}: array {key!r} cannot be read ({exc})") from None
            if key == "metadata":
                try:
                    metadata = dict(json.loads(str(value)))
                except (ValueError, TypeError):
                    raise InputError(
                        f"{source}: 'metadata' must be a JSON object stored as a string"
                    ) from None
            elif value.ndim == 1 and value.dtype.kind in "iuf":
                columns[key] = value.astype(float, copy=False)
    if not columns:
        raise InputError(f"{source}: the .npz file holds no 1-D numeric arrays")
    if len({v.size for v in columns.values()}) > 1:
        raise InputError(f"{source}: the arrays in the .npz file have different lengths")
    return columns, metadata
