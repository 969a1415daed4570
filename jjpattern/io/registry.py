"""The input readers, tried in order; the first whose ``sniff`` says yes reads the input.

A reader is a module with ``NAME``, ``sniff(source) -> bool`` and
``read(source, settings, kind="auto") -> Sweep | IVMap`` (``kind`` is
``"auto"``, ``"sweep"`` or ``"map"``). To add a format, write such a module
and add one line here, before the text reader, which accepts anything.
"""

from __future__ import annotations

from . import folder, hdf5, npz, text

READERS = (
    folder,  # a folder of I-V files, one per field step: a raw map
    hdf5,    # HDF5 signature or .h5/.hdf5/.hdf: 1-D datasets (sweep) or a 2-D map
    npz,     # zip signature or .npz: 1-D arrays (sweep)
    text,    # anything else: delimited text, an Ic(B) table or a long-table map
)


def reader_for(source):
    """The reader of ``source`` (format detection happens here and only here)."""
    for reader in READERS:
        if reader.sniff(source):
            return reader
    raise AssertionError("the text reader accepts every file")  # pragma: no cover
