"""Safe output: atomic files, report folders swapped in whole, locks, inputs never overwritten.

Every file is first written to a temporary file made by :mod:`tempfile` in the
target's folder (an unpredictable name opened with ``O_EXCL``, so a planted
symlink is never followed), flushed to disk and renamed over the final name.
A folder is built in a temporary sibling and swapped in (an atomic exchange
where the kernel offers one), under a lock on a file beside it. Every
temporary name holds :data:`TEMP_MARK` and starts with a dot, so what a killed
run leaves behind is hidden, never mistaken for an output, and cleaned by the
next run. Failures of the file system become :class:`OutputError` (exit 2).

The environment variable ``JJPATTERN_TEST_KILL_AT`` (tests only) names a step,
``<file or folder name>:<phase>``, at which the process kills itself with
SIGKILL; phases are ``written`` and ``replaced`` for files, ``built``,
``aside`` and ``swapped`` for folders.
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import json
import os
import secrets
import shutil
import signal
import stat
import tempfile
import time

from .errors import InputError

#: Part of every temporary name; what holds it is never a finished output.
TEMP_MARK = ".jjpartial-"
#: Written last into a folder built by :func:`replace_folder`: the folder is whole.
COMPLETE = ".jjpattern-complete"
KILL_HOOK = "JJPATTERN_TEST_KILL_AT"

_REASONS = {
    errno.ENOSPC: "the disk is full; free some space or write elsewhere",
    errno.EDQUOT: "the disk quota is used up; free some space or write elsewhere",
    errno.EROFS: "the file system is read-only; write elsewhere",
    errno.EACCES: "no permission to write there; choose a folder you can write to",
    errno.EPERM: "no permission to write there; choose a folder you can write to",
    errno.EISDIR: "it is a folder; give a file name",
    errno.ENOTDIR: "a part of the path is a file, not a folder; check the path",
    errno.ENOENT: "the folder does not exist; create it first",
    errno.ENAMETOOLONG: "the name is too long; choose a shorter one",
    errno.EFBIG: "the file is too large for this file system; write elsewhere",
}


class OutputError(InputError):
    """An output cannot be written: one sentence naming the path and what to do (exit 2)."""


def output_error(exc: OSError, path) -> OutputError:
    """The sentence for an operating-system error met while writing ``path``."""
    reason = _REASONS.get(exc.errno) or f"{exc.strerror or exc}; check the path"
    return OutputError(f"{os.fspath(path)}: cannot write ({reason})")


def _step(name: str, phase: str) -> None:
    """Test hook: die here, as ``kill -9`` would, when the hook names this step."""
    if os.environ.get(KILL_HOOK) == f"{name}:{phase}":
        os.kill(os.getpid(), signal.SIGKILL)


def _umask() -> int:
    # Read, not set: os.umask() would change the process for every thread at once.
    try:
        with open("/proc/self/status", encoding="ascii") as handle:
            for line in handle:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    return 0o022


def _mode(path: str, default: int) -> int:
    """Permissions of a new output: those of the file it replaces, else the umask's."""
    try:
        st = os.lstat(path)  # a symlink there is replaced, so its target's mode is no guide
    except OSError:
        st = None
    if st is not None and (stat.S_ISREG(st.st_mode) or stat.S_ISDIR(st.st_mode)):
        return st.st_mode & 0o7777
    return default & ~_umask()


def _fsync_dir(folder: str) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY | os.O_DIRECTORY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:  # some file systems cannot sync a folder; the rename still stands
        pass
    finally:
        os.close(fd)


@contextlib.contextmanager
def atomic_file(path, binary: bool = False):
    """Open a temporary file beside ``path``; on a clean exit it replaces ``path`` whole.

    Yields a text handle (UTF-8, ``\\n`` line ends) or, with ``binary``, a byte
    handle. On an error the temporary file is removed and ``path`` left as it was.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    name = os.path.basename(path)
    if os.path.isdir(path):
        raise OutputError(f"{path}: it is a folder; give a file name")
    if not os.path.isdir(folder):
        raise OutputError(f"{path}: the folder {folder} does not exist; create it first")
    try:
        fd, tmp = tempfile.mkstemp(dir=folder, prefix=_temp_prefix(name))
    except OSError as exc:
        raise output_error(exc, path) from None
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)  # says "alive" to clean_partial until the fd closes
        with os.fdopen(fd, "wb" if binary else "w", **(
                {} if binary else {"encoding": "utf-8", "newline": "\n"})) as handle:
            yield handle
            handle.flush()
            os.fsync(handle.fileno())
            os.fchmod(handle.fileno(), _mode(path, 0o666))
        _step(name, "written")
        os.replace(tmp, path)  # replaces a symlink at ``path`` itself, never its target
        _step(name, "replaced")
    except OSError as exc:
        raise output_error(exc, path) from None
    finally:
        with contextlib.suppress(FileNotFoundError):
            os.remove(tmp)


def _temp_prefix(name: str) -> str:
    return f".{name[:60]}{TEMP_MARK}"


def _remove_if_stale(path: str) -> None:
    """Remove a temporary file unless its writer is alive (it holds a lock on it)."""
    try:
        fd = os.open(path, os.O_RDONLY | os.O_NOFOLLOW | os.O_NONBLOCK)
    except OSError:  # a symlink or gone: a symlink is removed, never opened
        with contextlib.suppress(OSError):
            if os.path.islink(path):
                os.remove(path)
        return
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        return  # being written right now
    finally:
        os.close(fd)
    with contextlib.suppress(OSError):
        os.remove(path)


def write_text(path, text: str) -> None:
    """Write ``text`` to ``path`` so that no reader ever sees a half-written file."""
    with atomic_file(path) as handle:
        handle.write(text)


def write_bytes(path, data: bytes) -> None:
    """:func:`write_text` for bytes."""
    with atomic_file(path, binary=True) as handle:
        handle.write(data)


def check_file_target(path, inputs=()) -> None:
    """Refuse an output file that is a folder, sits in no folder, or is one of ``inputs``."""
    path = os.fspath(path)
    if os.path.isdir(path):
        raise OutputError(f"{path}: it is a folder; give a file name")
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise OutputError(f"{path}: the folder {folder} does not exist; create it first")
    for source in inputs:
        if os.path.exists(path) and os.path.exists(source) and os.path.samefile(path, source):
            raise OutputError(f"{path}: it is the input; choose another output name")
    clean_partial(folder, only=os.path.basename(path))


def _inside(path: str, folder: str) -> bool:
    path, folder = os.path.realpath(path), os.path.realpath(folder)
    return os.path.commonpath([path, folder]) == folder


@contextlib.contextmanager
def file_lock(lock_path, busy: str, timeout_s: float | None = None):
    """Hold an exclusive ``flock`` on ``lock_path`` (created if needed) for the ``with`` block.

    The kernel drops the lock when its holder dies, so a killed run leaves no
    stale lock. ``timeout_s=None`` waits as long as needed; past ``timeout_s``
    the sentence ``busy`` is raised as :class:`OutputError`. The lock file holds
    the holder's process id, for people only.
    """
    lock_path = os.fspath(lock_path)
    try:
        fd = os.open(lock_path, os.O_RDWR | os.O_CREAT | os.O_NOFOLLOW, 0o666 & ~_umask())
    except OSError as exc:
        raise output_error(exc, lock_path) from None
    try:
        deadline = None if timeout_s is None else time.monotonic() + timeout_s
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | (0 if deadline is None else fcntl.LOCK_NB))
                break
            except BlockingIOError:
                if time.monotonic() >= deadline:
                    raise OutputError(busy) from None
                time.sleep(0.05)
        with contextlib.suppress(OSError):
            os.ftruncate(fd, 0)
            os.pwrite(fd, str(os.getpid()).encode("ascii"), 0)
        yield lock_path
    finally:
        os.close(fd)  # closing the last descriptor releases the lock


def folder_lock(folder, timeout_s: float | None = None):
    """:func:`file_lock` on ``.<name>.lock`` beside ``folder``, for replacing it."""
    folder = os.path.abspath(os.fspath(folder)).rstrip(os.sep)
    lock_path = os.path.join(os.path.dirname(folder), f".{os.path.basename(folder)}.lock")
    return file_lock(lock_path, f"{folder}: another jjpattern run is writing there; wait for "
                                "it to finish or choose another folder", timeout_s)


def is_complete(folder) -> bool:
    """Whether ``folder`` was swapped in whole by :func:`replace_folder`."""
    return os.path.isfile(os.path.join(os.fspath(folder), COMPLETE))


def _exchange(a: str, b: str) -> bool:
    """Swap two paths in one step (Linux renameat2 RENAME_EXCHANGE); ``False`` if unsupported."""
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    at_fdcwd, rename_exchange = -100, 2
    if renameat2(at_fdcwd, os.fsencode(a), at_fdcwd, os.fsencode(b), rename_exchange) == 0:
        return True
    code = ctypes.get_errno()
    if code in (errno.EINVAL, errno.ENOSYS, errno.EOPNOTSUPP):
        return False  # a file system or kernel without the exchange: two renames instead
    raise OSError(code, os.strerror(code), b)


def clean_partial(folder, only: str | None = None) -> None:
    """Remove what killed runs left in ``folder`` (for the output named ``only``, or all):
    temporary files and folders whose writers are gone. A live writer's are kept."""
    folder = os.fspath(folder)
    try:
        names = os.listdir(folder)
    except OSError:
        return
    for name in names:
        if TEMP_MARK not in name or (only is not None and not name.startswith(
                (_temp_prefix(only), f".{only}{TEMP_MARK}"))):
            continue
        entry = os.path.join(folder, name)
        if not os.path.isdir(entry) or os.path.islink(entry):
            _remove_if_stale(entry)
            continue
        target = os.path.join(folder, name[1:].split(TEMP_MARK)[0])
        try:
            with folder_lock(target, timeout_s=0):
                _recover(target)
        except OutputError:  # being written right now
            continue
        except OSError:
            continue


def _recover(target: str) -> None:
    """Under the folder's lock: put back an old folder set aside by a run killed between
    its two renames, then remove every other leftover of ``target``."""
    if not os.path.isdir(target):
        olds = [p for p in _leftovers(target) if f"{TEMP_MARK}old-" in p]
        if olds:
            os.rename(olds[-1], target)
    for left in _leftovers(target):
        shutil.rmtree(left, ignore_errors=True)


def _leftovers(target: str) -> list:
    parent, name = os.path.split(target)
    prefix = f".{name}{TEMP_MARK}"
    return sorted(os.path.join(parent, n) for n in os.listdir(parent) if n.startswith(prefix))


def _strangers(target: str, owned) -> list:
    """Entries of ``target`` that an earlier complete folder did not write (someone's own)."""
    entries = os.listdir(target)
    try:
        with open(os.path.join(target, COMPLETE), encoding="utf-8") as handle:
            known = {f.split("/")[0] for f in json.load(handle)["files"]} | {COMPLETE}
    except (OSError, ValueError, KeyError, TypeError, AttributeError):
        known = set()
    return sorted(e for e in entries if e not in known and not (owned and owned(e)))


def check_folder_target(out_dir, inputs=(), owned=None) -> str:
    """The real path of ``out_dir`` after the checks of :func:`replace_folder`, which a
    command can run before any work so that a refusal comes at once."""
    target = os.path.realpath(os.fspath(out_dir))  # a symlinked folder: replace its target
    shown = os.fspath(out_dir)
    if os.path.exists(target) and not os.path.isdir(target):
        raise OutputError(f"{shown}: it is a file, not a folder; choose a folder name")
    for source in inputs:
        if os.path.exists(source) and _inside(source, target):
            raise OutputError(f"{shown}: the input {os.fspath(source)} is inside this folder, "
                              "which the output replaces as a whole; choose another folder")
    if _inside(os.getcwd(), target):
        raise OutputError(f"{shown}: the current folder is inside it, and the output replaces "
                          "it as a whole; run from another folder or choose another folder")
    try:
        strangers = _strangers(target, owned) if os.path.isdir(target) else []
        if strangers:
            raise OutputError(f"{shown}: the folder holds {strangers[0][:80]!r}, which is not "
                              "from an earlier report; move it away or choose another folder")
    except OSError as exc:
        raise output_error(exc, out_dir) from None
    return target


@contextlib.contextmanager
def replace_folder(out_dir, *, inputs=(), owned=None, lock_timeout_s: float | None = None):
    """Build a folder in a temporary sibling (yielded) and swap it in for ``out_dir`` whole.

    A reader of ``out_dir`` sees the old complete folder or the new complete
    one, never a mix. Refused with :class:`OutputError`: ``out_dir`` is a file,
    holds one of ``inputs``, or holds anything but an earlier complete folder
    (or, for folders written before the marker existed, names ``owned(name)``
    accepts).
    """
    target = check_folder_target(out_dir, inputs=inputs, owned=owned)
    shown = os.fspath(out_dir)
    parent = os.path.dirname(target)
    try:
        os.makedirs(parent, exist_ok=True)
    except OSError as exc:
        raise output_error(exc, out_dir) from None
    with folder_lock(target, lock_timeout_s):
        try:
            _recover(target)
            check_folder_target(out_dir, inputs=inputs, owned=owned)  # again, under the lock
            build = tempfile.mkdtemp(dir=parent, prefix=f".{os.path.basename(target)}"
                                                        f"{TEMP_MARK}build-")
        except OSError as exc:
            raise output_error(exc, out_dir) from None
        try:
            yield build
            _finish(build, target, shown)
        finally:
            shutil.rmtree(build, ignore_errors=True)


def _finish(build: str, target: str, shown: str) -> None:
    name = os.path.basename(target)
    try:
        files = sorted(os.path.relpath(os.path.join(d, f), build).replace(os.sep, "/")
                       for d, _, fs in os.walk(build) for f in fs)
        write_text(os.path.join(build, COMPLETE), json.dumps({"files": files}, indent=1) + "\n")
        os.chmod(build, _mode(target, 0o777))
        _fsync_dir(build)
        _step(name, "built")
        if not os.path.isdir(target):
            os.rename(build, target)
        elif _exchange(build, target):
            _step(name, "swapped")  # ``build`` now holds the old folder
        else:
            aside = os.path.join(os.path.dirname(target),
                                 f".{name}{TEMP_MARK}old-{secrets.token_hex(8)}")
            os.rename(target, aside)
            _step(name, "aside")
            os.rename(build, target)
            _step(name, "swapped")
            shutil.rmtree(aside, ignore_errors=True)
        _fsync_dir(os.path.dirname(target))
    except OSError as exc:
        raise output_error(exc, shown) from None
