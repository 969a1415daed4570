"""The measured period against the one the junction's geometry and materials give."""

from __future__ import annotations

from ..flags import make_flag
from ..physics.constants import PHI0_WB

#: A period within this factor of the expected one (or of the range the films allow)
#: passes: London depths and film thicknesses are rarely known to better than tens of
#: per cent, and flux focusing shortens the period of most real junctions somewhat.
PERIOD_TOLERANCE_FACTOR = 1.5


def period_geometry_flags(block: dict | None,
                          tolerance: float = PERIOD_TOLERANCE_FACTOR) -> list:
    """``period-unlike-geometry`` when the period disagrees with the geometry block's.

    With London depths given the expected period is ``block['expected_period_T']``;
    without them the films bound the magnetic thickness between ``d`` (lambda -> 0) and
    ``d + t1/2 + t2/2`` (lambda much longer than the films), so the period between
    ``Phi0 / (L (d + t1/2 + t2/2))`` and ``Phi0 / (L d)``. A planar junction is
    not checked: its period is set by the films' width, not by ``L d'``.
    """
    if not block or block.get("applies") or not block.get("magnetic_thickness_m"):
        return []
    inputs = block.get("inputs") or {}
    length = inputs.get("length_m")
    measured_thickness = block["magnetic_thickness_m"]
    if not length:
        return []
    period_T = PHI0_WB / (length * measured_thickness)
    if block.get("expected_period_T"):
        lo = hi = block["expected_period_T"]
    elif inputs.get("barrier_m") is not None and inputs.get("t1_m"):
        d, t1 = inputs["barrier_m"], inputs["t1_m"]
        t2 = inputs.get("t2_m") or t1
        lo = PHI0_WB / (length * (d + 0.5 * t1 + 0.5 * t2))
        hi = PHI0_WB / (length * d) if d > 0 else float("inf")
    else:
        return []
    if lo / tolerance <= period_T <= hi * tolerance:
        return []
    nearest = lo if period_T < lo else hi
    evidence = {"period_T": period_T, "period_over_expected": period_T / nearest,
                "tolerance_factor": tolerance}
    if lo == hi:
        evidence["expected_period_T"] = lo
    else:
        evidence.update(expected_period_min_T=lo, expected_period_max_T=hi)
    return [make_flag("period-unlike-geometry", block.get("branch"), **evidence)]
