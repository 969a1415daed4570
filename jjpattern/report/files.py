"""Atomic file writes: a temporary file in the same folder, then a rename."""

from __future__ import annotations

import os

from ..errors import InputError


def write_text(path: str, text: str) -> None:
    """Write ``text`` to ``path`` so that no reader ever sees a half-written file."""
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise InputError(f"{path}: the folder {folder} does not exist; create it first")
    tmp = f"{path}.tmp{os.getpid()}"
    try:
        with open(tmp, "w", encoding="utf-8", newline="\n") as handle:
            handle.write(text)
        os.replace(tmp, path)
    finally:
        if os.path.exists(tmp):
            os.remove(tmp)
