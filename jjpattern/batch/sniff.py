"""What jjpattern can read in a folder, judged cheaply, and the starter manifest listing it."""

from __future__ import annotations

import os

from ..errors import InputError


def can_read(path) -> bool:
    """Whether jjpattern reads ``path`` as one junction, judged from the first 64 KiB.

    Files: HDF5 and ``.npz`` by signature, delimited text by a header with a
    field and a critical-current column (or a long-form raw map). Folders: two
    or more I-V files (bias and voltage columns, no field column).
    """
    path = os.fspath(path)
    if os.path.basename(path).startswith("."):
        return False
    if os.path.isdir(path):
        try:
            names = [n for n in os.listdir(path) if not n.startswith(".")]
        except OSError:
            return False
        files = [os.path.join(path, n) for n in names if os.path.isfile(os.path.join(path, n))]
        return len(files) >= 2 and len(files) == len(names) and all(
            _sniff(f) == "iv" for f in files)
    return os.path.isfile(path) and _sniff(path) in ("hdf5", "npz", "sweep", "map")


def _sniff(path: str) -> str | None:
    from ..io.maps import looks_like_map
    from ..io.sweep import ic_branch_hint, is_field_name
    from ..io.text import is_number, split_whitespace_header
    from ..io.units import split_header

    try:
        with open(path, "rb") as handle:
            head = handle.read(1 << 16)
    except OSError:
        return None
    suffix = os.path.splitext(path)[1].lower()
    if head.startswith(b"\x89HDF\r\n\x1a\n"):
        return "hdf5"
    if head.startswith(b"PK") and suffix == ".npz":
        return "npz"
    if not head.strip() or b"\x00" in head:
        return None
    try:
        text = head.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = head.decode("latin-1")
    lines = [s.strip() for s in text.splitlines() if s.strip() and not s.strip().startswith("#")]
    if len(lines) < 2:
        return None
    delim = next((d for d in (",", "\t", ";") if d in lines[0]), None)
    names = (split_whitespace_header(lines[0]) if delim is None
             else [n.strip().strip("\"'") for n in lines[0].split(delim)])
    first = lines[1].split() if delim is None else lines[1].split(delim)
    try:
        float(first[0])
    except ValueError:
        return None
    if len(names) < 2 or all(is_number(n) for n in names):
        return None
    bare = [split_header(n)[0] for n in names]  # 'Isw_uA' -> 'Isw', 'B (mT)' -> 'B'
    has_field = any(is_field_name(n) for n in bare)
    if looks_like_map(names):
        return "map" if has_field else "iv"
    if has_field and any(ic_branch_hint(n) is not None for n in bare):
        return "sweep"
    return None


def starter_manifest(folder, out_path=None) -> tuple[str, list[str]]:
    """Write ``manifest.csv`` in ``folder`` listing what jjpattern can read there.

    Returns the manifest's path and the entries written.
    """
    from .starter import write_starter_manifest

    out_path = os.fspath(out_path or os.path.join(os.fspath(folder), "manifest.csv"))
    if os.path.exists(out_path):
        raise InputError(f"{out_path}: a manifest is already there; run jjpattern batch "
                         f"{out_path} --out DIR, or remove it to list the folder again")
    return out_path, write_starter_manifest(folder, out_path, can_read)
