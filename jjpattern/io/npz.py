"""NumPy ``.npz`` sweeps, read from the bytes already read, with ``allow_pickle=False``.

Keys are column names with their unit (``B_mT``, ``Ic_uA``); an optional
``metadata`` key holds a JSON object as a string.
"""

from __future__ import annotations

import json
import struct
import zipfile
import zlib

import numpy as np

from ..errors import InputError
from .containers import listing
from .limits import LazyColumns, check_points, clip, damaged, real
from .source import BufferStream
from .sweep import build_sweep

NAME = "npz"


def sniff(source) -> bool:
    """The zip signature at the start, or the ``.npz`` suffix."""
    return not source.is_folder and (source.head.startswith(b"PK") or source.suffix == ".npz")


def read(source, settings, kind: str = "auto"):
    """A Sweep from the archive's 1-D numeric arrays (an .npz holds no raw maps)."""
    if kind == "map":
        raise InputError(f"{source.path}: an .npz file holds an Ic(B) sweep, not a raw map; "
                         "save the map as HDF5 or as a long text table")
    columns, metadata = read_columns(source.raw, source.path, settings)
    return build_sweep(columns, source=source.path, sha256=source.digest, settings=settings,
                       metadata=metadata, where="array")


#: Failures of a damaged archive or member: zip structure, deflate stream, CRC, .npy header.
_DAMAGE = (zipfile.BadZipFile, zlib.error, OSError, EOFError, ValueError, KeyError,
           NotImplementedError, struct.error, OverflowError)


def read_columns(raw, source: str, settings=None) -> tuple[LazyColumns, dict]:
    """Return ``(columns, metadata)`` from the bytes of an ``.npz`` archive.

    Every member's shape and type come from its ``.npy`` header; arrays are read
    only when used, and never through pickle.
    """
    try:
        archive = zipfile.ZipFile(BufferStream(raw))
        members = archive.infolist()
    except _DAMAGE as exc:
        if not raw.startswith(b"PK"):
            raise InputError(f"{source}: not a readable .npz file (a single array, not an "
                             "archive: saved with numpy.save?); save the arrays with "
                             "numpy.savez") from None
        raise damaged(source, ".npz file", exc) from None
    names = [m.filename for m in members if not m.is_dir()]
    if not any(n.endswith(".npy") for n in names):
        from .registry import FORMATS_READ

        office = any(n in ("[Content_Types].xml", "mimetype") for n in names)
        kind = "a spreadsheet or office document (.xlsx, .ods)" if office else "a zip archive"
        fix = "save the sheet as CSV" if office else "unpack it and give the data file"
        raise InputError(f"{source}: is {kind}, not one of the formats read ({FORMATS_READ}); "
                         f"{fix}")
    other = next((n for n in names if not n.endswith(".npy")), None)
    if other is not None:
        raise InputError(f"{source}: member {clip(other)} of the .npz archive is not a NumPy "
                         "array (.npy); save only arrays, with numpy.savez")
    headers = {}
    for name in names:
        key = name[:-len(".npy")]
        try:
            with archive.open(name) as member:
                headers[key] = _header(member)
        except InputError:
            raise
        except _DAMAGE as exc:
            raise damaged(source, f".npz file (array {clip(key)})", exc) from None
    shapes, metadata = {}, {}
    for key, (shape, dtype) in headers.items():
        if dtype.hasobject:
            raise InputError(f"{source}: array {clip(key)} holds Python objects, which need "
                             "pickle, refused for safety; save numbers as numeric arrays")
        if key == "metadata":
            metadata = _metadata(archive, key, shape, dtype, source, settings)
        elif dtype.kind == "c" and len(shape) == 1:
            real(np.zeros(0, dtype), source, f"array {clip(key)}")
        elif len(shape) == 1 and dtype.kind in "iuf":
            shapes[key] = shape
    if not shapes:
        raise InputError(f"{source}: the .npz file holds no 1-D numeric arrays")
    if len({s[0] for s in shapes.values()}) > 1:
        raise InputError(f"{source}: the arrays in the .npz file have different lengths "
                         f"({listing(shapes)})")

    def load(key):
        check_points(source, f"array {key}", shapes[key], settings)
        return _array(archive, key, source).astype(float, copy=False)

    return LazyColumns(shapes, load), metadata


def _header(member) -> tuple[tuple, np.dtype]:
    fmt = np.lib.format
    version = fmt.read_magic(member)
    if version == (1, 0):
        shape, _, dtype = fmt.read_array_header_1_0(member)
    elif version == (2, 0):
        shape, _, dtype = fmt.read_array_header_2_0(member)
    else:
        raise ValueError(f".npy format version {version} is not read")
    return tuple(shape), dtype


def _array(archive, key, source) -> np.ndarray:
    try:
        with archive.open(f"{key}.npy") as member:
            return np.lib.format.read_array(member, allow_pickle=False)
    except _DAMAGE as exc:
        raise damaged(source, f".npz file (array {clip(key)})", exc) from None


def _metadata(archive, key, shape, dtype, source, settings) -> dict:
    check_points(source, "array metadata", shape, settings)
    value = _array(archive, key, source)
    try:
        return dict(json.loads(str(value)))
    except (ValueError, TypeError):
        raise InputError(f"{source}: 'metadata' must be a JSON object stored as a string"
                         ) from None
