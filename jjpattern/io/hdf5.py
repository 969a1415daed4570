"""HDF5 through h5py's own file driver: only the datasets used are read, each once.

Sweep layout: 1-D datasets at the root named like the columns of a text file
(``field``, ``ic``, ``ic_pos``, ``ic_neg`` ...), each with a ``units``
attribute (``"mT"``, ``"uA"``). Map layout: ``field``, ``bias`` and a 2-D
``voltage`` or ``dvdi`` (see :mod:`jjpattern.io.maps`). A 2-D dataset at the
root makes the file a map. Metadata come from the root attributes;
``field_col`` / ``ic_cols`` / ``bias_col`` / ``signal_col`` name other
dataset paths. When the root holds nothing recognised, the one group that does
is read (:func:`jjpattern.io.containers.find_group`), and a file with none
is refused with the list of its datasets. A netCDF-4 file (HDF5 inside) goes
to the netCDF reader when xarray is installed; without it, it is read here
and netCDF's own attributes are left out of the metadata.
"""

from __future__ import annotations

import os

import numpy as np

from ..errors import InputError
from .containers import find_group, listing, role_of
from .limits import LazyColumns, check_points, clip, damaged, real
from .maps import choose_kind, from_arrays, pick_column
from .netcdf import INTERNAL_ATTRS, xarray_module
from .outside import Outside
from .stored import DAMAGE, StoredMap
from .sweep import build_sweep

NAME = "hdf5"
SIGNATURE = b"\x89HDF\r\n\x1a\n"
SUFFIXES = (".h5", ".hdf5", ".hdf")


def sniff(source) -> bool:
    """The HDF5 signature at the start, or an HDF5 suffix."""
    return not source.is_folder and (source.head.startswith(SIGNATURE)
                                     or source.suffix in SUFFIXES)



def read(source, settings, kind: str = "auto"):
    """A Sweep from 1-D datasets, or an IVMap when the root holds a 2-D dataset.

    The file is opened by its path (its bytes are never all in memory); its hash, taken
    when a record needs it, is refused if the file changed since it was opened
    (:class:`jjpattern.io.digest.Digest`). Data kept in other files (external links,
    external storage, virtual datasets) are refused unless the read setting
    ``allow_external`` is set; then those files are found beside it, and they are hashed.
    """
    import h5py

    outside = Outside(source, settings)
    try:
        handle = _open(source.path)
    except DAMAGE:
        try:  # a lock or a file system HDF5 cannot open it through: from the bytes
            handle = h5py.File(source.stream(), "r")
        except DAMAGE as exc:
            raise InputError(f"{source.path}: not a readable HDF5 file "
                             f"({exc.__class__.__name__})") from None
    try:
        with handle:
            # h5py builds an attrs object per access (~50 us): only when there are some
            attrs = handle.attrs if h5py.h5a.get_num_attrs(handle.id) else None
            if (attrs is None or "_NCProperties" not in attrs or xarray_module() is None
                    or outside.scan(handle)):  # other files: only this reader checks them
                return outside.sealed(_read_open(handle, attrs, source, settings, kind,
                                                 outside))
    except InputError:
        raise
    except DAMAGE as exc:
        raise damaged(source.path, "HDF5 file", exc) from None
    from . import netcdf  # netCDF-4 written by xarray or netCDF4: coordinates, attributes

    return netcdf.read(source, settings, kind)


def _open(path):
    """``h5py.File(path, "r")``; on POSIX opened by HDF5 with its default access
    properties, which h5py's own set equals (~0.2 ms less)."""
    import h5py

    if os.name != "posix":
        return h5py.File(path, "r")
    return h5py.File(h5py.h5f.open(os.fsencode(path), h5py.h5f.ACC_RDONLY))


def _read_open(handle, attrs, source, settings, kind, outside):
    import h5py

    metadata = _metadata(attrs) if attrs is not None else {}
    # h5py builds an object per lookup (slow, ~0.1 ms): look each dataset up once.
    root = {}
    for key in handle:
        outside.link(handle, key)
        value = outside.get(handle, key)
        if isinstance(value, h5py.Dataset) and not _dimension_only(value):
            root[key] = value
    layout = {}
    if not _names_given(settings) and not _recognised(root, settings, kind):
        found = _group(handle, source.path, settings, kind, outside)
        if found is not None:
            group, kind, root = found
            metadata.update(_metadata(handle[group].attrs))
            layout["group"] = "/" + group
    has_map = any(len(v.shape) == 2 for v in root.values())  # shape is cached, ndim is not
    if choose_kind(kind, settings, has_map) == "map":
        return _map(handle, root, source, settings, metadata, outside)
    columns, units = _columns(handle, root, source.path, settings, outside)
    return build_sweep(columns, source=source.path, sha256=source.digest, settings=settings,
                       units=units, metadata=metadata, where="dataset", layout=layout)


def _metadata(attrs) -> dict:
    return {k: _text(v) for k, v in attrs.items() if k not in INTERNAL_ATTRS}


def _dimension_only(ds) -> bool:
    """A netCDF dimension without a variable: a placeholder, not data."""
    import h5py

    if not h5py.h5a.exists(ds.id, b"NAME"):  # the usual answer, without h5py's attrs object
        return False
    attrs = ds.attrs
    name = attrs["NAME"] if "NAME" in attrs else b""  # a miss through get() raises inside
    return isinstance(name, bytes) and name.startswith(b"This is a netCDF dimension but not")


def _names_given(settings) -> bool:
    return bool(settings.field_col or settings.ic_cols or settings.bias_col
                or settings.signal_col)


def _recognised(root, settings, kind) -> bool:
    """The root holds a map, or a field and a current named as the readers know them."""
    if kind != "sweep" and any(len(v.shape) == 2 for v in root.values()):
        return True
    roles = {role_of(name, settings.coil_T_per_A is not None) for name in root}
    return "field" in roles and ("ic" in roles or kind == "map")


def _group(handle, path, settings, kind, outside):
    """``(group, kind, datasets)`` of the one group that holds a sweep or a map, or ``None``
    when everything is at the root (the root's own messages then say what is missing)."""
    import h5py

    shapes = {}

    def visit(name, obj):
        if isinstance(obj, h5py.Dataset) and obj.dtype.kind in "iuf" and not _dimension_only(obj):
            shapes[name] = obj.shape

    visit_links = getattr(handle, "visititems_links", None)
    if visit_links is not None:  # external links inside groups, before anything follows them
        visit_links(lambda name, link: outside.link(handle, name, link))
    handle.visititems(visit)
    if not any("/" in name for name in shapes):
        return None
    group, chosen, names = find_group(shapes, sep="/", source=path, settings=settings,
                                      kind=kind, what="the HDF5 file",
                                      option_names=("dataset", "path"))
    prefix = f"{group}/" if group else ""
    return group, chosen, {n[len(prefix):]: outside.get(handle, n) for n in names}


def _text(value) -> str:
    if isinstance(value, bytes):
        return value.decode("utf-8", "replace")
    if isinstance(value, np.ndarray) and value.size == 1:
        return _text(value.reshape(-1)[0])
    return str(value)


def _unit(ds) -> str | None:
    import h5py

    for key in (b"units", b"unit"):
        if h5py.h5a.exists(ds.id, key):  # without h5py's attrs object
            return _text(_scalar(ds.attrs, key.decode()))
    return None


def _scalar(attrs, key):
    """``attrs[key]``; a scalar read as h5py reads it, without its general path (half the
    time, which counts on every dataset of a map)."""
    import h5py

    aid = attrs.get_id(key)
    if aid.get_space().get_simple_extent_type() != h5py.h5s.SCALAR:
        return attrs[key]  # arrays, and empty attributes (h5py.Empty)
    dtype = aid.dtype
    if dtype.subdtype is not None:
        return attrs[key]
    value = np.zeros((), dtype)
    aid.read(value, mtype=h5py.h5t.py_create(dtype))
    value = value[()]
    info = h5py.check_string_dtype(dtype)
    if info is not None and info.length is None and isinstance(value, bytes):
        return value.decode("utf-8", "surrogateescape")  # as h5py gives a variable-length one
    return value


def _dataset(handle, name, path, outside):
    import h5py

    outside.link(handle, name)
    found = outside.get(handle, name)
    if not isinstance(found, h5py.Dataset):
        raise InputError(f"{path}: no dataset at {clip(name)}; check the path")
    return found


def _floats(ds, path, settings, outside) -> np.ndarray:
    """The dataset as one new float64 array, converted by HDF5 while reading (no copy)."""
    return _numbers(ds, path, settings, outside).whole()


def _numbers(ds, path, settings, outside) -> StoredMap:
    """A numeric dataset, to be read: its size is checked from its declared shape and where
    its values live (another file?) before anything is read."""
    dtype = ds.dtype  # h5py builds a new dtype on every look
    if dtype.kind == "c" or (dtype.names and set(dtype.names) == {"r", "i"}):
        real(np.zeros(0, complex), path, f"dataset {clip(ds.name)}")
    if dtype.kind not in "iuf":
        raise InputError(f"{path}: dataset {clip(ds.name)} holds {dtype}, not numbers")
    check_points(path, lambda: f"dataset {ds.name}", ds.shape, settings)
    plist = ds.id.get_create_plist()  # one look for every property (each look ~20 us)
    return StoredMap(outside.dataset(ds, plist), path, dtype, plist)


def _columns(handle, root, path, settings, outside) -> tuple[LazyColumns, dict]:
    """1-D numeric datasets (all at the root, or the named ones) and their units; the
    values are read only for the columns the sweep uses."""
    explicit = ([settings.field_col] if settings.field_col else []) + list(settings.ic_cols)
    if explicit and not (settings.field_col and settings.ic_cols):
        raise InputError(f"{path}: give both --field-col and --ic-col as dataset paths, "
                         "or neither")
    if explicit:
        selected = {name: _dataset(handle, name, path, outside) for name in explicit}
    else:
        selected = root
        if not selected:
            raise InputError(f"{path}: the HDF5 file holds no datasets")
    shapes: dict[str, tuple] = {}
    units: dict[str, str] = {}
    for name, ds in selected.items():
        if ds.ndim != 1 or ds.dtype.kind not in "iuf":
            if explicit and ds.dtype.kind == "c":
                real(np.zeros(0, complex), path, f"dataset {clip(name)}")
            if explicit:
                raise InputError(f"{path}: dataset {clip(name)} is not a 1-D numeric array "
                                 f"(shape {ds.shape}, type {ds.dtype})")
            continue
        shapes[name] = ds.shape
        unit = _unit(ds)
        if unit is not None:
            units[name] = unit
    if not shapes:
        raise InputError(f"{path}: the HDF5 file holds no 1-D numeric datasets at its root; it "
                         f"holds {listing({k: v.shape for k, v in selected.items()})}; name "
                         "them with --field-col and --ic-col (dataset paths)")
    # Only the columns a sweep can use must agree: a log of another length beside them is
    # left alone (and never read).
    coil = settings.coil_T_per_A is not None
    used = {n: s for n, s in shapes.items()
            if n in explicit or role_of(n, coil) in ("field", "ic")} or shapes
    for name, shape in used.items():
        check_points(path, f"dataset {name}", shape, settings)
    if len({s[0] for s in used.values()}) > 1:
        raise InputError(f"{path}: the datasets have different lengths ({listing(used)})")
    return LazyColumns(shapes, lambda name: _floats(selected[name], path, settings,
                                                    outside)), units


def _map(handle, root, source, settings, metadata, outside):
    """The map datasets (recognised at the root, or named), read once each."""
    path = source.path
    names, found = {}, {}
    for role, explicit in (("field", settings.field_col), ("bias", settings.bias_col),
                           ("signal", settings.signal_col)):
        if explicit:
            names[role], found[role] = explicit, _dataset(handle, explicit, path, outside)
        else:
            names[role] = pick_column(list(root), role, None, path, f"{role} dataset")
            found[role] = root[names[role]]
    # The signal is read last, by from_arrays once its unit is known, into an array of its
    # own converted in place.
    arrays = {role: _floats(ds, path, settings, outside) for role, ds in found.items()
              if role != "signal"}
    arrays["signal"] = _numbers(found["signal"], path, settings, outside)
    units = {names[role]: unit for role, ds in found.items()
             if (unit := _unit(ds)) is not None}
    return from_arrays(arrays["field"], arrays["bias"], arrays["signal"], units, names,
                       source=path, sha256=source.digest, metadata=metadata,
                       settings=settings, owned=True)
