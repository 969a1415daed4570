"""How a command ends: exit statuses, and every exception turned into one sentence.

0 done (flags or not), 2 bad input, usage or output (a file that cannot be
written), 1 internal error (a bug), 3 ``batch --strict`` with a failed junction,
130 interrupted, 141 stdout closed by its reader (``| head``).
"""

from __future__ import annotations

import errno
import os
import sys

EXIT_OK, EXIT_INTERNAL, EXIT_INPUT, EXIT_FAILED_JUNCTIONS = 0, 1, 2, 3
#: Status after the reader of stdout went away: 128 + SIGPIPE, what a tool stopped by
#: the signal itself reports, so ``set -o pipefail`` scripts still see the cut.
EXIT_CLOSED_PIPE = 141
#: Errors of the file system met when writing (full disk, read-only, ...): the user's to
#: fix, so exit 2 with a sentence rather than "internal error".
_OUTPUT_ERRNOS = {errno.ENOSPC, errno.EDQUOT, errno.EROFS, errno.EACCES, errno.EPERM,
                  errno.EISDIR, errno.ENOTDIR, errno.ENAMETOOLONG, errno.EFBIG}


def run_guarded(handler, args) -> int:
    """Run ``handler(args)`` and return its status, or the status of what it raised."""
    from .errors import InputError

    try:
        status = handler(args)
        sys.stdout.flush()  # a closed pipe shows here, not in the interpreter's last flush
        return status
    except BrokenPipeError:
        return _closed_pipe()
    except InputError as exc:
        print(f"jjpattern: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except OSError as exc:
        if exc.errno not in _OUTPUT_ERRNOS:
            return _internal(exc)
        from .outdir import output_error

        name = exc.filename or "a file"
        message = (f"{name}: permission denied; check the permissions of the file and its "
                   "folder" if exc.errno in (errno.EACCES, errno.EPERM)
                   else output_error(exc, name))  # the others only happen when writing
        print(f"jjpattern: {message}", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print("jjpattern: interrupted", file=sys.stderr)
        return 130
    except Exception as exc:  # noqa: BLE001 - last line of defence, no traceback for users
        return _internal(exc)


def _closed_pipe() -> int:
    """Quiet end on a closed stdout: point it at /dev/null so the exit flush cannot fail."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError, AttributeError):
        pass
    return EXIT_CLOSED_PIPE


def _internal(exc: BaseException) -> int:
    if os.environ.get("JJPATTERN_DEBUG"):
        raise exc
    print(f"jjpattern: internal error ({exc.__class__.__name__}: {exc}); this is a bug, "
          "please report it with the input file (JJPATTERN_DEBUG=1 shows the traceback)",
          file=sys.stderr)
    return EXIT_INTERNAL
