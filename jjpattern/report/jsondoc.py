"""The JSON document of an analysis (the contract of ``analyze --json``)."""

from __future__ import annotations

import datetime
import json
import math

import numpy as np

from .. import __version__


def _plain(value):
    """JSON-safe copy: numpy scalars to Python, non-finite floats to null."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [_plain(v) for v in value.tolist()]
    if isinstance(value, (np.floating, np.integer, np.bool_)):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


#: The one key whose value changes from run to run.
TIMESTAMP_KEY = "generated_utc"


def build_document(analysis, extra_settings: dict | None = None) -> dict:
    """``{input, fits, flags, tool, settings}`` (plus ``extraction``, ``icrn`` for maps).

    ``generated_utc`` is the only value that differs between identical runs.
    """
    settings = dict(analysis.settings)
    settings.update(extra_settings or {})
    doc = {
        "input": analysis.sweep.summary(),
        "fits": [fit.to_dict() for fit in analysis.fits],
        "flags": [flag.to_dict() for flag in analysis.flags],
        "tool": {"name": "jjpattern", "version": __version__},
        "settings": settings,
        TIMESTAMP_KEY: datetime.datetime.now(datetime.timezone.utc).strftime(
            "%Y-%m-%dT%H:%M:%SZ"),
    }
    if analysis.extraction is not None:
        doc["extraction"] = analysis.extraction.settings()
        doc["icrn"] = analysis.icrn
    if analysis.current_density:
        doc["current_density"] = analysis.current_density
    if analysis.geometry:
        doc["geometry"] = analysis.geometry
    return _plain(doc)


def dumps(document: dict) -> str:
    """Stable, readable JSON text (sorted keys are avoided so sections keep their order)."""
    return json.dumps(document, indent=2, ensure_ascii=False, allow_nan=False)
