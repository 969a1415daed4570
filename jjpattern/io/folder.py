"""A folder of I-V files, one per field step, as one raw map.

Each file is a text table with a bias and a voltage (or dV/dI) column; its
field comes from a ``# field: 1.25 mT`` line or from the file name
(``field_from_name``, a regular expression). Every file is read once; the
map's hash covers the file names as well as their bytes
(:func:`jjpattern.io.source.combine_digests`).
"""

from __future__ import annotations

import dataclasses
import hashlib
import os
import re

import numpy as np

from ..errors import InputError
from .limits import check_file_size, clip
from .maps import IVMap, from_long_table, share_bias
from .source import combine_digests, folder_files
from .sweep import is_field_name
from .text import decode, parse_table
from .units import split_header

NAME = "folder"


def sniff(source) -> bool:
    """A folder (there are no bytes of its own)."""
    return source.is_folder


def read(source, settings, kind: str = "auto") -> IVMap:
    """The map: one row per file, sorted by field, bias in each file's order."""
    folder = source.path
    if kind == "sweep":
        raise InputError(f"{folder}: is a folder, not a sweep file")
    names = folder_files(folder)
    if not names:
        raise InputError(f"{folder}: the folder holds no I-V files")
    rows, fields, digests, meta0 = [], [], [], {}
    total = 0
    for name in names:
        path = os.path.join(folder, name)
        try:
            with open(path, "rb") as handle:
                size = os.fstat(handle.fileno()).st_size
                total += size
                check_file_size(path, size, settings)
                check_file_size(folder, total, settings, "its files hold")
                raw = handle.read()
        except OSError as exc:
            raise InputError(f"{path}: cannot be read ({exc.strerror})") from None
        digests.append((name, hashlib.sha256(raw).hexdigest()))
        metadata, columns = parse_table(decode(raw, path), path, settings.decimal)
        value, unit = _field_of_file(path, metadata, settings)
        if not unit:
            raise InputError(f"{path}: the field value has no unit; pass --field-unit")
        columns = {**columns, "__field__": np.full(len(next(iter(columns.values()))), value)}
        one = from_long_table(columns, source=path, sha256=None, metadata=metadata,
                              settings=dataclasses.replace(settings, field_col="__field__",
                                                           field_unit=unit))
        rows.append((one.bias_A[0], one.signal[0], one.kind))
        fields.append(one.field_T[0])
        meta0 = meta0 or metadata
    kinds = {k for _, _, k in rows}
    if len(kinds) > 1:
        raise InputError(f"{folder}: some files hold voltage and others dV/dI; use one kind")
    width = max(r[0].size for r in rows)
    bias = np.full((len(rows), width), np.nan)
    signal = np.full_like(bias, np.nan)
    for i, (b, s, _) in enumerate(rows):
        bias[i, :b.size], signal[i, :s.size] = b, s
    order = np.argsort(fields, kind="stable")
    return IVMap(folder, combine_digests(digests), np.asarray(fields)[order],
                 share_bias(bias[order]), signal[order], kinds.pop(), meta0,
                 "folder of I-V files")


def _field_of_file(path, metadata, settings):
    """The field of one I-V file, from its name (``--field-from-name``) or a metadata line."""
    name = os.path.basename(path)
    if settings.field_from_name:
        try:
            match = re.search(settings.field_from_name, name)
        except re.error as exc:
            raise InputError(f"--field-from-name {clip(settings.field_from_name)}: not a regular "
                             f"expression ({exc})") from None
        if not match:
            raise InputError(f"{path}: the file name does not match --field-from-name "
                             f"{clip(settings.field_from_name)}")
        text = match.groupdict().get("field") or (match.group(1) if match.re.groups else None)
        if not settings.field_unit:
            raise InputError(f"{path}: a field taken from the file name needs --field-unit")
        try:
            return float(text), settings.field_unit
        except (TypeError, ValueError):
            raise InputError(f"{path}: --field-from-name picked {clip(text)} from the name, not a "
                             "number; put the number in a group such as (?P<field>...)"
                             ) from None
    for key, value in metadata.items():
        k_name, k_unit = split_header(key)
        if is_field_name(k_name, coil=settings.coil_T_per_A is not None):
            parts = value.split()
            unit = k_unit or (parts[1] if len(parts) > 1 else None) or settings.field_unit
            try:
                return float(parts[0]), unit
            except (ValueError, IndexError):
                raise InputError(f"{path}: metadata {clip(key)} = {clip(value)} is not a "
                                 "field value") from None
    raise InputError(f"{path}: no field value; add a line '# field: 1.25 mT' or pass "
                     "--field-from-name with a pattern for the file name")
