"""An input's SHA-256, computed when a record needs it rather than when the data are read.

Hashing a large file costs as much as reading it with h5py, and a reader that does not
parse bytes (HDF5 through h5py's own file driver) never holds them. A :class:`Digest`
remembers the file's path and its stat signature at open; its value is computed on first
use, from the bytes if a reader read them, else by streaming the file, which must not
have changed since it was opened. :class:`DigestField` lets a dataclass field ``sha256``
hold a Digest while reading it still gives the hex string.
"""

from __future__ import annotations

import hashlib
import os

from ..errors import InputError

_BLOCK = 1 << 20


def signature(stat) -> tuple[int, int, int]:
    """What tells that a file changed: size, modification time (ns) and inode."""
    return (stat.st_size, stat.st_mtime_ns, stat.st_ino)


def changed_message(path: str) -> str:
    return f"{path}: the file changed while it was being analysed; run again once it is complete"


class Digest:
    """Hex SHA-256 of one file, computed once, on first use of :attr:`value`.

    Parameters
    ----------
    path : str
        The file, as given by the user (named in messages).
    stat_signature : tuple
        :func:`signature` of the file when it was opened.
    """

    __slots__ = ("path", "stat_signature", "raw", "_value", "_where")

    def __init__(self, path: str, stat_signature: tuple):
        self.path = path
        # Opened by its absolute path: a notebook may change directory before the record.
        self._where = os.path.abspath(path)
        self.stat_signature = stat_signature
        #: The file's bytes when a reader read them (hashed instead of reading the file).
        self.raw = None
        self._value: str | None = None

    @property
    def value(self) -> str:
        """The hex digest (computed now if it was not yet)."""
        return self.compute()

    def compute(self) -> str:
        """The hex digest, computed once: from the bytes when held, else from the file."""
        if self._value is None:
            if self.raw is not None:
                self._value = hashlib.sha256(self.raw).hexdigest()
            else:
                self._value = self._streamed()
            self.raw = None  # the bytes are no longer needed for the hash
        return self._value

    @property
    def computed(self) -> bool:
        return self._value is not None

    def _streamed(self) -> str:
        digest = hashlib.sha256()
        try:
            with open(self._where, "rb", buffering=0) as handle:
                self._unchanged(os.fstat(handle.fileno()))
                buffer = bytearray(_BLOCK)
                with memoryview(buffer) as view:
                    while count := handle.readinto(buffer):
                        digest.update(view[:count])
                self._unchanged(os.fstat(handle.fileno()))
        except FileNotFoundError:
            raise InputError(f"{self.path}: the file was moved or deleted after it was read; "
                             "keep it in place until the result is written (its SHA-256 "
                             "is taken then)") from None
        except OSError as exc:
            raise InputError(f"{self.path}: cannot be read ({exc.strerror})") from None
        return digest.hexdigest()

    def _unchanged(self, stat) -> None:
        if signature(stat) != self.stat_signature:
            raise InputError(changed_message(self.path))

    def __getstate__(self):
        return (self.path, self._where, self.stat_signature, self.raw, self._value)

    def __setstate__(self, state):
        self.path, self._where, self.stat_signature, self.raw, self._value = state

    def __repr__(self) -> str:
        shown = self._value[:12] + "..." if self._value else "not yet computed"
        return f"Digest({self.path!r}, {shown})"


class DigestField:
    """A dataclass field ``sha256`` that holds a :class:`Digest`, a string or ``None``.

    Reading it gives the hex string (computing a Digest's value then); it has no default,
    so the field stays where it is among the required ones. :func:`held` gives what is
    held without computing anything.
    """

    def __set_name__(self, owner, name):
        self._slot = "_" + name

    def __get__(self, obj, owner=None):
        if obj is None:
            raise AttributeError(self._slot[1:])  # no default for the dataclass
        found = obj.__dict__[self._slot]
        return found.value if isinstance(found, Digest) else found

    def __set__(self, obj, value):
        obj.__dict__[self._slot] = value


def held(obj, name: str = "sha256"):
    """The Digest (or string, or ``None``) in ``obj``'s :class:`DigestField`, as it is;
    the attribute itself for an object without one."""
    try:
        return vars(obj)["_" + name]
    except (KeyError, TypeError):
        return getattr(obj, name)
