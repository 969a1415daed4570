"""An HDF5 dataset not yet read: read whole, or as a map scaled to SI block by block.

A map kept the plain way (contiguous, unfiltered, in the file itself, native float64,
the file opened by its path) is read by the operating system straight from the place
HDF5 reports for it, one block of rows at a time into the map's own array; each block is
scaled and screened while it is still in cache. Any other storage is read by HDF5
(hyperslabs of rows, or the whole dataset when chunked, filtered or elsewhere), which
converts types and byte order.
"""

from __future__ import annotations

import os

import numpy as np

from .limits import clip, damaged, screen, within

#: Bytes read at a time into a map, then scaled and screened while still in cache (1 MiB
#: measured a little faster than 256 KiB, whose more calls cost more than the cache saves).
READ_BLOCK = 1 << 20

#: What h5py raises on a damaged file: broken B-trees, heaps, attributes, filters.
DAMAGE = (OSError, RuntimeError, KeyError, ValueError, TypeError, OverflowError)


class StoredMap:
    """A numeric dataset not yet read: ``whole()`` reads it, ``scaled(factor, limit)`` reads
    a map row block by row block, each scaled to SI and screened while still in cache.

    Parameters
    ----------
    ds : h5py.Dataset
        The dataset (its other files already refused or noted).
    path : str
        The input, for messages.
    dtype : numpy.dtype, optional
        ``ds.dtype`` when the caller already has it (h5py builds it anew on every look).
    plist : optional
        ``ds.id.get_create_plist()`` when the caller already has it.
    """

    def __init__(self, ds, path: str, dtype=None, plist=None):
        self.ds, self.path = ds, path
        self.shape = ds.shape
        self.ndim = len(self.shape)
        self.dtype = ds.dtype if dtype is None else dtype
        self._plist = plist

    def _failed(self, exc):
        return damaged(self.path, f"HDF5 file (dataset {clip(self.ds.name)})", exc)

    def whole(self) -> np.ndarray:
        import h5py

        ds = self.ds
        try:
            if self.shape and ds.size:  # HDF5 converts the type while reading, into one array
                values = np.empty(self.shape, np.float64)
                ds.id.read(h5py.h5s.ALL, h5py.h5s.ALL, values)
                return values
            if self.dtype == np.float64:
                return np.asarray(ds[()])
            return np.asarray(ds.astype(np.float64)[()])
        except DAMAGE as exc:
            raise self._failed(exc) from None

    def scaled(self, factor: float, limit: float, order=None) -> tuple[np.ndarray, bool]:
        """``(values times factor, whether none is beyond limit)`` (see :func:`screen`),
        the rows in ``order`` (stored row of each row given) when it is not ``None``."""
        import h5py

        ds = self.ds
        try:
            plist = self._plist or ds.id.get_create_plist()
            blocks = not (self.ndim != 2 or ds.size == 0 or plist.get_nfilters()
                          or plist.get_layout() != h5py.h5d.CONTIGUOUS
                          or plist.get_external_count())
            direct = _direct(ds) if blocks else None
        except DAMAGE as exc:
            raise self._failed(exc) from None
        if not blocks:  # chunks, filters, other files: HDF5 reads it whole
            values = self.whole()
            inside = within(values, limit, factor)
            if order is not None:
                from .maps import permute_rows

                permute_rows(values, order)
            return values, inside
        n_rows, n_cols = self.shape
        step = max(1, READ_BLOCK // (8 * n_cols))
        values = np.empty(self.shape, np.float64)
        if order is not None:  # each block put in place from a buffer, not rows swapped after
            to = np.empty_like(order)
            to[order] = np.arange(order.size)
            buffer = np.empty((min(step, n_rows), n_cols), np.float64)
        read = _os_reader(*direct, self) if direct else _hdf5_reader(ds)
        inside = True
        try:
            for start in range(0, n_rows, step):
                block = (values[start:start + step] if order is None
                         else buffer[:min(step, n_rows - start)])
                read(start, block)
                inside = screen(block, limit, factor) and inside
                if order is not None:
                    values[to[start:start + step]] = block
        except DAMAGE as exc:
            raise self._failed(exc) from None
        return values, inside


def _direct(ds):
    """``(file descriptor, offset)`` of a dataset the operating system can read as it is
    (native float64, all of it stored at one place of a file HDF5 opened by its path),
    else ``None``."""
    import h5py

    if not hasattr(os, "preadv"):
        return None
    dsid = ds.id
    if not dsid.get_type().equal(h5py.h5t.NATIVE_DOUBLE):
        return None  # another type or byte order: HDF5 converts it
    offset = dsid.get_offset()  # None while no storage is allocated (fill values)
    if offset is None or dsid.get_storage_size() != 8 * ds.size:
        return None
    fid = h5py.h5i.get_file_id(dsid)
    if fid.get_access_plist().get_driver() != h5py.h5fd.SEC2:
        return None  # a file read from memory or through Python: HDF5 reads it
    return fid.get_vfd_handle(), offset


def _os_reader(fd: int, offset: int, stored: StoredMap):
    """Reads rows ``start ...`` into a C-contiguous float64 block, from HDF5's own open
    file (no second open that could meet another file)."""
    row_bytes = 8 * stored.shape[1]

    def read(start, block):
        with memoryview(block) as view, view.cast("B") as target:
            done, at = 0, offset + start * row_bytes
            while done < target.nbytes:
                count = os.preadv(fd, [target[done:]], at + done)
                if not count:  # the file ends before the dataset does
                    raise OSError(f"the file ends inside dataset {stored.ds.name}")
                done += count

    return read


def _hdf5_reader(ds):
    """Reads rows ``start ...`` into a block through HDF5 (which converts the type)."""
    import h5py

    dsid = ds.id
    space = dsid.get_space()

    def read(start, block):
        space.select_hyperslab((start, 0), block.shape)
        dsid.read(h5py.h5s.create_simple(block.shape), space, block)

    return read
