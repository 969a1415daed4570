"""A starter manifest: every readable file or folder of a measurement folder, to fill in."""

from __future__ import annotations

import csv
import os
import re

from ..errors import InputError
from ..outdir import atomic_file

#: Columns of the starter manifest; sizes and positions are left empty to fill in.
HEADER = ["file", "junction", "chip", "cooldown", "length (um)", "width (um)", "area (um2)",
          "x (mm)", "y (mm)"]


def _natural(text: str):
    return [int(p) if p.isdigit() else p.lower() for p in re.split(r"(\d+)", text)]


def file_labels(path: str) -> dict:
    """``junction``, ``chip`` and ``cooldown`` as the file's own metadata gives them
    (``# chip: KT-14`` lines of a text file, root attributes of an HDF5 file); ``{}``
    for other files, folders, or a file that cannot be read."""
    labels = {}
    try:
        with open(path, "rb") as handle:
            head = handle.read(1 << 16)
        if head.startswith(b"\x89HDF\r\n\x1a\n"):
            import h5py

            from ..io.hdf5 import _metadata

            with h5py.File(path, "r") as handle:
                labels = _metadata(handle.attrs)
        elif b"\x00" not in head:
            from ..io.text import _head

            text = head.decode("utf-8-sig", errors="replace").replace("\r\n", "\n")
            labels = _head(text, path)[0]
    except (OSError, InputError, ValueError):
        return {}  # the manifest then leaves the cells for the user to fill in
    return {k: str(labels[k]).strip() for k in ("junction", "chip", "cooldown")
            if str(labels.get(k) or "").strip()}


def write_starter_manifest(folder, out_path, can_read) -> list[str]:
    """Write a manifest listing every readable file or folder under ``folder``.

    A folder that ``can_read`` accepts (a folder of I-V files) is listed as one
    entry; other folders are searched. Paths are relative to the manifest, in
    natural order (``j2`` before ``j10``); ``junction``, ``chip`` and
    ``cooldown`` come from the file's metadata (the junction guessed from the name
    without it), and the size and position columns are left empty to fill in.

    Parameters
    ----------
    folder : str or path-like
        Where the measured files are.
    out_path : str or path-like
        The manifest to write; it must not exist yet.
    can_read : callable
        ``can_read(path) -> bool``: whether jjpattern can read that file or folder.

    Returns
    -------
    list of str
        The relative paths written, in order.
    """
    folder = os.path.abspath(os.fspath(folder))
    out_path = os.path.abspath(os.fspath(out_path))
    if not os.path.isdir(folder):
        raise InputError(f"{folder}: not a folder; give the folder that holds the measurements")
    if os.path.exists(out_path):
        raise InputError(f"{out_path}: already exists; choose another name or remove it first")
    if not os.path.isdir(os.path.dirname(out_path)):
        raise InputError(f"{out_path}: the folder {os.path.dirname(out_path)} does not exist; "
                         "create it first")
    found: list[str] = []
    visited: set[str] = set()

    def walk(where: str) -> None:
        real = os.path.realpath(where)
        if real in visited:  # a symbolic link back up the tree
            return
        visited.add(real)
        for name in sorted(os.listdir(where), key=_natural):
            entry = os.path.join(where, name)
            if name.startswith(".") or entry == out_path:
                continue
            if can_read(entry):
                found.append(entry)
            elif os.path.isdir(entry):
                walk(entry)

    walk(folder)
    if not found:
        raise InputError(f"{folder}: no file or folder that jjpattern can read; check the folder")
    base = os.path.dirname(out_path)
    relative = [os.path.relpath(p, base).replace(os.sep, "/") for p in found]
    stems = [os.path.splitext(os.path.basename(p.rstrip("/")))[0] for p in relative]
    if len(set(stems)) < len(stems):
        stems = [os.path.splitext(p)[0].replace("/", "-") for p in relative]
    with atomic_file(out_path) as handle:
        writer = csv.writer(handle)
        writer.writerow(HEADER)
        labels = [file_labels(p) if os.path.isfile(p) else {} for p in found]
        names = [lab.get("junction", stem) for lab, stem in zip(labels, stems, strict=True)]
        keys = [(lab.get("chip"), name, lab.get("cooldown"))
                for lab, name in zip(labels, names, strict=True)]
        if len(set(keys)) < len(keys):  # one junction measured twice: the manifest needs
            names = stems                # one row per junction, so keep the file names
        for rel, name, lab in zip(relative, names, labels, strict=True):
            writer.writerow([rel, name, lab.get("chip", ""), lab.get("cooldown", "")]
                            + [""] * (len(HEADER) - 4))
    return relative
