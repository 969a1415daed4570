"""The input readers, tried in order; the first whose ``sniff`` says yes reads the input.

A reader is a module with ``NAME``, ``sniff(source) -> bool`` and
``read(source, settings, kind="auto") -> Sweep | IVMap`` (``kind`` is
``"auto"``, ``"sweep"`` or ``"map"``). To add a format, write such a module
and add one line here, before the text reader, which accepts anything; say
what it reads in ``FORMATS_READ``.
"""

from __future__ import annotations

from . import folder, hdf5, matlab, netcdf, npz, text

READERS = (
    folder,  # a folder of I-V files, one per field step: a raw map
    matlab,  # MATLAB .mat: v5 through scipy.io, v7.3 (HDF5 after a 512-byte header) by h5py
    netcdf,  # netCDF (.nc, classic signature) through xarray; netCDF-4 also as HDF5
    hdf5,    # HDF5 signature or .h5/.hdf5/.hdf: 1-D datasets (sweep) or a 2-D map
    npz,     # zip signature or .npz: 1-D arrays (sweep)
    text,    # anything else: delimited text, an Ic(B) table or a long-table map
)

#: What the readers read, for messages about files they do not.
FORMATS_READ = ("delimited text (.csv, .tsv, .txt), HDF5 (.h5), netCDF (.nc), MATLAB .mat "
                "(v5 and v7.3), NumPy .npz, or a folder of I-V files")

#: Signatures of files people try that are none of those, and what to do instead.
_OTHERS = (
    (b"SQLite format 3\x00", "an SQLite database", "export the table as CSV"),
    (b"%PDF", "a PDF document", "give the data file the figure was made from"),
    (b"\x89PNG", "a PNG image", "give the data file the figure was made from"),
    (b"\xff\xd8\xff", "a JPEG image", "give the data file the figure was made from"),
    (b"\xd0\xcf\x11\xe0", "an old Excel (.xls) or other Office file", "save the sheet as CSV"),
    (b"\x1f\x8b", "a gzip archive", "unpack it first"),
    (b"7z\xbc\xaf", "a 7-Zip archive", "unpack it first"),
)


def reader_for(source):
    """The reader of ``source`` (format detection happens here and only here)."""
    for reader in READERS:
        if reader.sniff(source):
            return reader
    raise AssertionError("the text reader accepts every file")  # pragma: no cover


def not_read_message(path: str, raw: bytes, what: str = "a binary file") -> str:
    """One sentence: what the file seems to be, the formats that are read, and the fix."""
    for signature, kind, fix in _OTHERS:
        if raw.startswith(signature):
            return f"{path}: is {kind}, not one of the formats read ({FORMATS_READ}); {fix}"
    return (f"{path}: looks like {what}, not one of the formats read ({FORMATS_READ}); "
            "export the data as delimited text with a header row")
