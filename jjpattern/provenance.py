"""Where a result came from: library versions and the command that reproduces it."""

from __future__ import annotations

import platform
import shlex
from importlib import metadata

from . import __version__

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
