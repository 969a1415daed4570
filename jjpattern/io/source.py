"""What a reader is given: the input's path, its bytes (read once) and their SHA-256."""

from __future__ import annotations

import hashlib
import os
from dataclasses import dataclass

from ..errors import InputError


@dataclass(frozen=True)
class Source:
    """One input, opened once.

    Attributes
    ----------
    path : str
        As given by the user (used in messages and recorded in results).
    raw : bytes or None
        The whole file; ``None`` for a folder, whose reader reads each file once.
    sha256 : str or None
        Hex SHA-256 of ``raw``; ``None`` for a folder (see :func:`folder_sha256`).
    suffix : str
        Lower-case file extension with its dot (``".h5"``), ``""`` for a folder.
    """

    path: str
    raw: bytes | None
    sha256: str | None
    suffix: str

    @property
    def is_folder(self) -> bool:
        return self.raw is None


def open_source(path, settings=None) -> Source:
    """Read a file's bytes and hash them, or note a folder; user mistakes raise InputError.

    The size is checked against the read setting ``max_bytes`` before reading.
    """
    from .limits import check_file_size

    path = os.fspath(path)
    if not os.path.exists(path):
        raise InputError(f"{path}: file not found; check the path")
    if os.path.isdir(path):
        return Source(path, None, None, "")
    try:
        with open(path, "rb") as handle:
            check_file_size(path, os.fstat(handle.fileno()).st_size, settings)
            raw = handle.read()
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror})") from None
    # isspace() stops at the first other byte; strip() could copy a large binary file.
    if not raw or raw.isspace():
        raise InputError(f"{path}: the file is empty")
    return Source(path, raw, hashlib.sha256(raw).hexdigest(), os.path.splitext(path)[1].lower())


def folder_files(folder: str) -> list[str]:
    """Names of the regular, non-hidden files directly in ``folder``, sorted."""
    try:
        names = os.listdir(folder)
    except OSError as exc:
        raise InputError(f"{folder}: cannot be listed ({exc.strerror})") from None
    return sorted(n for n in names
                  if not n.startswith(".") and os.path.isfile(os.path.join(folder, n)))


def combine_digests(named_digests) -> str:
    """SHA-256 over ``"<file sha256>  <name>\\n"`` lines sorted by name.

    The lines are those of ``sha256sum``, so renaming a file changes the
    folder's hash as surely as editing it does.
    """
    digest = hashlib.sha256()
    for name, file_sha in sorted(named_digests):
        digest.update(f"{file_sha}  {name}\n".encode("utf-8", "surrogateescape"))
    return digest.hexdigest()


def folder_sha256(folder) -> str:
    """Content hash of a folder of I-V files: every file's name and bytes."""
    folder = os.fspath(folder)
    pairs = []
    for name in folder_files(folder):
        with open(os.path.join(folder, name), "rb") as handle:
            pairs.append((name, hashlib.sha256(handle.read()).hexdigest()))
    return combine_digests(pairs)
