"""Where a result came from: versions, input checksum, settings, the command to rerun."""

from __future__ import annotations

import platform
import shlex
from importlib import metadata

from .. import __version__

DEPENDENCIES = ("numpy", "scipy", "lmfit", "matplotlib", "h5py", "pandas", "uncertainties")


def versions() -> dict:
    """Versions of jjpattern, Python and the libraries it uses (read without importing them)."""
    out = {"jjpattern": __version__, "python": platform.python_version()}
    for name in DEPENDENCIES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = None
    return out


def command_line(argv) -> str:
    """The shell command that reproduces a run, quoted so it can be pasted."""
    return shlex.join(["jjpattern", *argv])


def provenance(document: dict, argv) -> dict:
    """The provenance block: tool and library versions, the input, settings and command."""
    return {
        "versions": versions(),
        "input_path": document["input"]["path"],
        "input_sha256": document["input"]["sha256"],
        "settings": document["settings"],
        "command": command_line(argv),
    }
