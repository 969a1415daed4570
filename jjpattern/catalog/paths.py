"""Where the catalog is: given on the command line, named by JJPATTERN_CATALOG, or the
default one in the user's data folder (used only once ``jjpattern catalog init`` made it)."""

from __future__ import annotations

import os
import sys

from ..errors import InputError

#: Environment variable naming a catalog to use (a lab's shared catalog, say).
ENV_VAR = "JJPATTERN_CATALOG"
FILE_NAME = "catalog.sqlite"


def default_catalog_path(environ=None, platform: str | None = None) -> str:
    """The default catalog file in the user's data folder.

    Linux and other Unix: ``$XDG_DATA_HOME/jjpattern`` (else ``~/.local/share/jjpattern``);
    macOS: ``~/Library/Application Support/jjpattern``; Windows: ``%LOCALAPPDATA%\\jjpattern``.
    """
    environ = os.environ if environ is None else environ
    platform = sys.platform if platform is None else platform
    home = environ.get("HOME") or environ.get("USERPROFILE") or os.path.expanduser("~")
    if platform.startswith("win"):
        base = environ.get("LOCALAPPDATA") or environ.get("APPDATA") or os.path.join(
            home, "AppData", "Local")
    elif platform == "darwin":
        base = os.path.join(home, "Library", "Application Support")
    else:
        base = environ.get("XDG_DATA_HOME") or ""
        # The XDG rule: a relative value is invalid and is ignored.
        if not os.path.isabs(base):
            base = os.path.join(home, ".local", "share")
    return os.path.join(base, "jjpattern", FILE_NAME)


def configured_catalog(environ=None) -> tuple[str, str]:
    """``(path, why)``: the catalog named by the environment, else the default location."""
    environ = os.environ if environ is None else environ
    named = environ.get(ENV_VAR, "").strip()
    if named:
        return os.path.expanduser(named), f"from {ENV_VAR}"
    return default_catalog_path(environ), "default location"


def catalog_for_recording(explicit=None, *, disabled: bool = False, environ=None):
    """The catalog a run records into, or ``None``.

    ``--catalog PATH`` first; then ``JJPATTERN_CATALOG``; then the default
    catalog, only when it exists (``jjpattern catalog init`` is the opt-in).
    """
    if disabled:
        return None
    if explicit:
        return os.path.expanduser(os.fspath(explicit))
    path, why = configured_catalog(environ)
    if why != "default location" or os.path.isfile(path):
        return path
    return None


def catalog_for_reading(explicit=None, environ=None) -> str:
    """The catalog a query reads: ``--catalog``, ``JJPATTERN_CATALOG``, else the default."""
    if explicit:
        return os.path.expanduser(os.fspath(explicit))
    path, why = configured_catalog(environ)
    if not os.path.isfile(path):
        raise InputError(f"no catalog at {path} ({why}); give --catalog PATH, or make the "
                         "default one with `jjpattern catalog init`")
    return path
