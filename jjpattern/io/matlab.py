"""MATLAB ``.mat`` files: v5 through scipy.io, v7.3 (HDF5 after a 512-byte header) by h5py.

Variables are read from the bytes already read. Vectors (1 x n or n x 1) are
columns named like those of a text file (``B_mT``, ``Ic_uA``); struct fields
count as variables named ``scan.B_mT``; text and 1 x 1 numbers become
metadata (``junction = 'KT14-J03'``, ``temperature_K = 0.3``). A 2-D
``V``/``voltage`` or ``dVdI`` with field and bias vectors is a raw map, as in
MATLAB's orientation (n_field x n_bias, or transposed).
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from .containers import from_named_arrays
from .limits import check_points, clip, damaged, real

NAME = "matlab"
HEADER = b"MATLAB "
SUFFIXES = (".mat",)
_MAX_DEPTH = 4  # struct nesting followed


def sniff(source) -> bool:
    """The text header every .mat file starts with, or the suffix."""
    return not source.is_folder and (source.head.startswith(HEADER)
                                     or source.suffix in SUFFIXES)


def read(source, settings, kind: str = "auto"):
    """A Sweep or an IVMap from the variables of a .mat file."""
    head = source.head[:128]
    hdf5 = b"\x89HDF\r\n\x1a\n"
    if b"MATLAB 7.3" in head or hdf5 in (source.head[:8], source.head[512:520]):
        arrays, metadata = _v73(source, settings)
        version = "7.3"
    else:
        arrays, metadata = _v5(source, settings)
        version = "5"
    return from_named_arrays(arrays, source=source.path, sha256=source.digest,
                             settings=settings, kind=kind, sep=".",
                             what=f"the MATLAB v{version} file", metadata=metadata,
                             option_names=("variable", "name (struct fields as scan.B_mT)"),
                             layout={"container": f"MATLAB v{version}"})


def _v5(source, settings):
    from scipy.io import loadmat, whosmat

    try:
        # The variables' sizes from their headers first: a declared-huge array is refused
        # before anything is read.
        for name, shape, _ in whosmat(source.stream()):
            check_points(source.path, f"variable {name}", shape, settings)
        data = loadmat(source.stream(), simplify_cells=True)
    except NotImplementedError:  # scipy says "use HDF reader" for v7.3 without the header
        return _v73(source, settings)
    except InputError:
        raise
    except Exception as exc:  # noqa: BLE001 - only scipy's parser runs here, on untrusted bytes
        # A damaged v5 file surfaces as anything from struct.error and zlib.error to
        # scipy's own UnboundLocalError: every failure of the parser is the file's.
        raise damaged(source.path, "MATLAB .mat file", exc) from None
    arrays: dict[str, np.ndarray] = {}
    metadata: dict[str, str] = {}
    for name, value in data.items():
        if not name.startswith("__"):
            _walk_v5(name, value, arrays, metadata, 0, source.path)
    return arrays, metadata


def _walk_v5(name, value, arrays, metadata, depth, path):
    if isinstance(value, dict):
        if depth < _MAX_DEPTH:
            for key, item in value.items():
                _walk_v5(f"{name}.{key}", item, arrays, metadata, depth + 1, path)
        return
    if isinstance(value, str):
        metadata[name] = value
        return
    if isinstance(value, (int, float, np.number)) and not isinstance(value, bool):
        metadata[name] = str(value)
        return
    if isinstance(value, (complex, np.complexfloating)) or (
            isinstance(value, np.ndarray) and value.dtype.kind == "c"):
        real(value, path, f"variable {clip(name)}")
    if isinstance(value, np.ndarray) and value.dtype.kind in "iuf" and value.size:
        if value.size == 1:
            metadata[name] = str(value.reshape(-1)[0])
        elif value.ndim <= 2:
            arrays[name] = value.astype(float, copy=False)


def _v73(source, settings):
    import h5py

    from .hdf5 import DAMAGE

    try:
        handle = h5py.File(source.stream(), "r")
    except DAMAGE as exc:
        raise InputError(f"{source.path}: not a readable MATLAB v7.3 file "
                         f"({exc.__class__.__name__})") from None
    arrays: dict[str, np.ndarray] = {}
    metadata: dict[str, str] = {}
    try:
        with handle:
            _walk_v73(handle, "", arrays, metadata, 0, source.path, settings)
    except InputError:
        raise
    except DAMAGE as exc:
        raise damaged(source.path, "MATLAB v7.3 file", exc) from None
    return arrays, metadata


def _class(obj) -> str:
    """MATLAB's class name of a v7.3 variable ('' when there is none). MATLAB writes it as
    a fixed-length ASCII string; an attribute of any other type is not read, because a
    variable-length one is read from the file's global heap, where a damaged file can
    send the HDF5 library into an endless loop."""
    import h5py

    if "MATLAB_class" not in obj.attrs:
        return ""
    dtype = obj.attrs.get_id("MATLAB_class").dtype
    if dtype.kind != "S" or h5py.check_string_dtype(dtype) is None or (
            h5py.check_string_dtype(dtype).length is None):
        return ""
    value = obj.attrs["MATLAB_class"]
    return value.decode("ascii", "replace") if isinstance(value, bytes) else str(value)


def _walk_v73(group, prefix, arrays, metadata, depth, path, settings):
    import h5py

    for key in group.keys():
        if key.startswith("#"):  # '#refs#', '#subsystem#': MATLAB's own storage
            continue
        name = f"{prefix}{key}"
        if isinstance(group.get(key, getlink=True), h5py.ExternalLink):
            raise InputError(f"{path}: variable {clip(name)} is a link to another file, which "
                             "a .mat file is not read through; save the data in this file")
        obj = group.get(key)
        if isinstance(obj, h5py.Group):
            if depth < _MAX_DEPTH:
                _walk_v73(obj, f"{name}.", arrays, metadata, depth + 1, path, settings)
            continue
        if not isinstance(obj, h5py.Dataset):
            continue
        if obj.dtype.kind == "c" or (obj.dtype.names and {"real", "imag"} <= set(obj.dtype.names)):
            real(np.zeros(0, complex), path, f"variable {clip(name)}")
        cls = _class(obj)
        if "MATLAB_empty" in obj.attrs or obj.dtype.kind not in "iuf":
            continue
        if obj.external or obj.is_virtual:
            raise InputError(f"{path}: variable {clip(name)} keeps its values in another file, "
                             "which a .mat file is not read through; save the data in this file")
        check_points(path, f"variable {name}", obj.shape, settings)
        values = obj[()]
        if cls == "char":
            metadata[name] = "".join(map(chr, np.asarray(values).T.reshape(-1)))
        elif cls in ("cell", "struct", "logical") or values.size == 0:
            continue
        elif values.size == 1:
            metadata[name] = str(np.asarray(values).reshape(-1)[0])
        elif values.ndim <= 2:
            # HDF5 holds MATLAB's column-major arrays transposed: back to MATLAB's rows.
            arrays[name] = np.asarray(values, dtype=float).T
