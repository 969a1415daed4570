"""Reading inputs: every format ends up as a :class:`Sweep` or an :class:`IVMap` in SI.

:func:`read` is the entry point: it opens the input once (bytes read once if a reader
parses them, hashed once, when a record needs it: :mod:`jjpattern.io.source`), lets
:mod:`jjpattern.io.registry` pick the reader, and returns an Ic(B) sweep or a raw
V(I, B) map.
:func:`load` (a sweep) and :func:`load_map` (a raw map) force the kind.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ..errors import InputError
from ..settings import ReadSettings
from .digest import held
from .layout import field_window
from .maps import IVMap
from .objects import read_object as _read_object
from .registry import reader_for
from .source import Source, folder_sha256, open_source
from .sweep import MIN_POINTS, Branch, Sweep

__all__ = ["read", "read_object", "load", "load_map", "Sweep", "Branch", "IVMap", "Source",
           "ReadSettings", "MIN_POINTS", "folder_sha256", "open_source"]


def read(path, settings: ReadSettings | None = None, *, kind: str = "auto") -> Sweep | IVMap:
    """Read an Ic(B) sweep or a raw V(I, B) map.

    Parameters
    ----------
    path : str or path-like
        A delimited text file, HDF5, netCDF, MATLAB ``.mat``, ``.npz``, or a
        folder of I-V files. The format is chosen once, from the content and
        the suffix.
    settings : ReadSettings, optional
        Columns, units, coil constant and map layout; recognised from the
        names when not given.
    kind : {"auto", "sweep", "map"}
        ``"auto"``: a sweep, unless the input is a folder, an HDF5 file with a
        2-D dataset at its root, or a table with bias and voltage (or dV/dI)
        columns; explicit ``ic_cols`` mean a sweep, ``bias_col`` or
        ``signal_col`` a map.

    Returns
    -------
    Sweep or IVMap
        In SI units, with the SHA-256 of the input (for a folder, of its file
        names and contents).
    """
    settings = settings or ReadSettings()
    source = open_source(path, settings)
    try:
        data = reader_for(source).read(source, settings, kind)
        source.settle()
    except MemoryError:
        # The sizes declared are checked before reading; this is what they could not foresee
        # (a compressed array that unpacks to more than memory holds).
        raise InputError(f"{source.path}: reading it needs more memory than this machine "
                         "has; lower the read setting max_points or split the file") from None
    return _windowed(data, settings)


def read_object(obj, settings: ReadSettings | None = None, *, kind: str = "auto"):
    """Read a ``pandas.DataFrame`` or an ``xarray.Dataset`` as :func:`read` reads a file."""
    settings = settings or ReadSettings()
    return _windowed(_read_object(obj, settings, kind=kind), settings)


def _windowed(data, settings: ReadSettings):
    """A map's rows outside ``field_range_T`` or inside ``exclude_T`` left out (a sweep's
    rows are left out while it is built, where they are counted)."""
    if not isinstance(data, IVMap) or not (settings.field_range_T or settings.exclude_T):
        return data
    keep, _, _ = field_window(data.field_T, settings.field_range_T, settings.exclude_T)
    if keep.all():
        return data
    bias = (np.broadcast_to(data.bias_A[0], (int(keep.sum()), data.bias_A.shape[1]))
            if data.bias_A.strides[0] == 0 else data.bias_A[keep])
    return dataclasses.replace(data, sha256=held(data), field_T=data.field_T[keep],
                               bias_A=bias, signal=data.signal[keep])


def load(path, *, field_col=None, ic_cols=(), field_unit=None, current_unit=None,
         coil_T_per_A=None) -> Sweep:
    """Load an Ic(B) sweep from delimited text, HDF5 or ``.npz`` (``read(..., kind="sweep")``).

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
    """
    settings = ReadSettings(field_col=field_col, ic_cols=tuple(ic_cols or ()),
                            field_unit=field_unit, current_unit=current_unit,
                            coil_T_per_A=coil_T_per_A)
    return read(path, settings, kind="sweep")


def load_map(path, options: ReadSettings | None = None) -> IVMap:
    """Load a raw V(I, B) map: HDF5, long text table or folder (``read(..., kind="map")``)."""
    return read(path, options, kind="map")
