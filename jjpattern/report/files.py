"""Atomic file writes (see :mod:`jjpattern.outdir`): a temporary file in the same folder,
made with ``O_EXCL`` under an unpredictable name, flushed to disk, then renamed."""

from __future__ import annotations

from ..outdir import write_bytes, write_text

__all__ = ["write_bytes", "write_text"]
