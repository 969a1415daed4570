"""What a reader is given: the input's path, its first bytes, its bytes (read once, when a
reader needs them) and their SHA-256 (computed when a record needs it)."""

from __future__ import annotations

import hashlib
import io
import os
import stat as stat_module

from ..errors import InputError
from .digest import Digest, signature

#: How much of a file is read at open to recognise its format.
HEAD_BYTES = 4096


class Source:
    """One input, opened once: its path, its first bytes, its bytes on demand, its hash.

    Parameters
    ----------
    path : str
        As given by the user (used in messages and recorded in results).
    head : bytes
        The first bytes of the file (at most :data:`HEAD_BYTES`), for recognising the
        format; ``b""`` for a folder.
    digest : Digest or None
        The file's SHA-256, computed on first use; ``None`` for a folder, whose reader
        hashes each file it reads (see :func:`folder_sha256`).
    settings : ReadSettings, optional
        Whose ``max_bytes`` bounds :attr:`raw`.
    """

    def __init__(self, path: str, head: bytes, digest: Digest | None, settings=None):
        self.path = path
        self.head = head
        self.digest = digest
        self.suffix = "" if digest is None else os.path.splitext(path)[1].lower()
        self._settings = settings
        self._raw: bytearray | None = None

    @property
    def is_folder(self) -> bool:
        return self.digest is None

    @property
    def raw(self) -> bytearray | None:
        """The whole file, read once, on first use (``None`` for a folder); the hash is
        then taken from these very bytes. Readers that parse bytes use it; the HDF5
        reader does not (h5py reads the datasets it needs from the file)."""
        if self._raw is None and self.digest is not None:
            self._raw = _read_file(self.path, self._settings)
            if not self.digest.computed:
                self.digest.raw = self._raw
        return self._raw

    @property
    def sha256(self) -> str | None:
        """Hex SHA-256 of the file (computed now if it was not yet); ``None`` for a folder."""
        return None if self.digest is None else self.digest.compute()

    def settle(self) -> None:
        """Once read: a reader that parsed the bytes has its hash taken from them now, so
        that what it returns does not keep the whole file in memory."""
        if self._raw is not None:
            self.digest.compute()
            self._raw = None

    def stream(self) -> BufferStream:
        """The bytes as a read-only binary file, without a copy (``io.BytesIO`` copies a
        bytearray)."""
        return BufferStream(self.raw)


class BufferStream(io.RawIOBase):
    """A read-only binary file over a buffer; seeks and reads as ``io.BytesIO`` does."""

    def __init__(self, buffer):
        super().__init__()
        self._view = memoryview(buffer).cast("B")
        self._pos = 0

    def readable(self) -> bool:
        return True

    def seekable(self) -> bool:
        return True

    def tell(self) -> int:
        self._checkClosed()
        return self._pos

    def seek(self, pos: int, whence: int = 0) -> int:
        self._checkClosed()
        pos = int(pos)
        if whence not in (0, 1, 2):
            raise ValueError(f"invalid whence ({whence}, should be 0, 1 or 2)")
        if whence == 0 and pos < 0:
            raise ValueError(f"negative seek value {pos}")
        pos += (0, self._pos, len(self._view))[whence]
        self._pos = max(pos, 0)
        return self._pos

    def readinto(self, target) -> int:
        self._checkClosed()
        with memoryview(target) as out, out.cast("B") as flat:
            chunk = self._view[self._pos:self._pos + flat.nbytes]
            flat[:len(chunk)] = chunk
        self._pos += len(chunk)
        return len(chunk)

    def read(self, size: int | None = -1) -> bytes:
        self._checkClosed()
        end = len(self._view) if size is None or size < 0 else self._pos + size
        data = self._view[self._pos:end].tobytes()
        self._pos += len(data)
        return data

    def readall(self) -> bytes:
        return self.read()


def open_source(path, settings=None) -> Source:
    """Note a file's size, signature and first bytes, or note a folder; user mistakes
    raise InputError.

    The size is checked against the read setting ``max_bytes`` and an empty (or blank)
    file is refused here; the bytes are read, and hashed, only when used.
    """
    from .limits import check_file_size

    path = os.fspath(path)
    try:
        is_dir = stat_module.S_ISDIR(os.stat(path).st_mode)
    except (OSError, ValueError):  # as os.path.exists says no
        raise InputError(f"{path}: file not found; check the path") from None
    if is_dir:
        return Source(path, b"", None)
    try:
        with open(path, "rb", buffering=0) as handle:
            stat = os.fstat(handle.fileno())
            check_file_size(path, stat.st_size, settings)
            head = handle.read(HEAD_BYTES)
            blank = not head or (head.isspace() and _blank(handle))
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror})") from None
    if blank:
        raise InputError(f"{path}: the file is empty")
    return Source(path, head, Digest(path, signature(stat)), settings)


def _blank(handle) -> bool:
    """Whether the rest of the file is white space too (read only while it is)."""
    while chunk := handle.read(1 << 16):
        if not chunk.isspace():
            return False
    return True


def _read_file(path: str, settings) -> bytearray:
    from .limits import check_file_size

    try:
        with open(path, "rb", buffering=0) as handle:
            size = os.fstat(handle.fileno()).st_size
            check_file_size(path, size, settings)
            raw = _read_all(handle, size, path, settings)
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror})") from None
    # isspace() stops at the first other byte; strip() could copy a large binary file.
    if not raw or raw.isspace():
        raise InputError(f"{path}: the file is empty")
    return raw


def _read_all(handle, size: int, path: str, settings) -> bytearray:
    """The file's bytes into one buffer of its declared size (no second copy); a file
    that shrinks or grows meanwhile is read to its end, the size checked again."""
    from .limits import check_file_size

    raw = bytearray(size)
    with memoryview(raw) as view:
        done = 0
        while done < size:
            count = handle.readinto(view[done:])
            if not count:
                break
            done += count
    if done < size:
        del raw[done:]
    tail = handle.read()
    if tail:
        check_file_size(path, len(raw) + len(tail), settings)
        raw += tail
    return raw


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
