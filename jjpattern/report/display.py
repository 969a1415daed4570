"""Numbers for people: the report's names for the shared formatting in :mod:`jjpattern.fmt`."""

from __future__ import annotations

from ..fmt import (  # noqa: F401  (re-exported for the report, batch and catalog)
    AREA_UNITS,
    CURRENT_UNITS,
    FIELD_UNITS,
    LENGTH_UNITS,
    PLAIN,
    RESISTANCE_UNITS,
    VOLTAGE_UNITS,
    evidence_text,
    pick_unit,
    plural,
)
from ..fmt import measure as format_measure  # noqa: F401
from ..fmt import si_key as format_si_key  # noqa: F401
