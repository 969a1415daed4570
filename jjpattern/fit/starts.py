"""Starting values of one model from another's period and offset.

A model's start needs no scan of its own where another model (a scan's best candidate,
or the reference model's converged fit) has already placed the pattern: the period that
puts the model's first node where the other's fell is tried at a few factors and at
every value of a shape-parameter grid, with the amplitude in closed form, on a few
hundred of the points.
"""

from __future__ import annotations

import numpy as np

__all__ = ["rival_start", "shape_start"]

#: Shape-parameter starts: the period found by the scan is also tried at these factors.
_PERIOD_FACTORS = (0.7, 0.85, 1.0, 1.2, 1.45)
#: Points (every k-th) on which starts are ranked.
_START_POINTS = 256
#: A rival started from the reference fit tries these factors of the period that puts its
#: first node on the reference's (patterns whose node spacing differs from their first
#: node's distance, such as the disc's, settle within them).
_RIVAL_FACTORS = (0.5, 0.7, 0.85, 1.0, 1.2, 1.45, 2.0)
#: ... and with a shape-parameter grid, these at every grid value (the grid moves the first
#: node itself; where the reference fits too poorly for this, the rival is scanned anyway).
_GRID_RIVAL_FACTORS = (0.85, 1.0, 1.2)


def _ranked(spec, x, y, periods, offset_T, shape):
    """Least-squares cost and closed-form amplitude of the model at each period in
    ``periods`` (one broadcast evaluation; one per period for a formula that does not
    broadcast)."""
    t = spec.formula(x[None, :], 1.0, periods[:, None], offset_T, 0.0, **shape)
    if np.shape(t) != (periods.size, x.size):
        t = np.array([spec.formula(x, 1.0, p, offset_T, 0.0, **shape) for p in periods])
    amp = (t @ y) / np.maximum(np.einsum("ij,ij->i", t, t), 1e-300)
    return np.sum((amp[:, None] * t - y[None, :]) ** 2, axis=1), amp


def shape_start(spec, x, y, period_T, offset_T, first_T=None, factors=_PERIOD_FACTORS):
    """Start of a model from another model's period and offset: the period that puts its
    first node where the other's was (``first_T`` from the offset; by default where the
    model's own default shape puts it), tried at ``factors`` and at every value of a
    shape-parameter grid, the amplitude solved in closed form. Returns a start dict.
    """
    grid_param = next((p for p in spec.extra if p.grid), None)
    values = grid_param.grid if grid_param else (None,)
    # A few hundred points rank the starts as well as all of them (the fit uses all).
    stride = max(1, x.size // _START_POINTS)
    x, y = x[::stride], y[::stride]
    if first_T is None:
        first_T = float(spec.nodes(1)[0]) * period_T
    best = (np.inf, None)
    for value in values:
        shape = {} if grid_param is None else {grid_param.name: value}
        periods = first_T / float(spec.nodes(1, shape or None)[0]) * np.asarray(factors)
        cost, amp = _ranked(spec, x, y, periods, offset_T, shape)
        i = int(np.argmin(cost))
        if cost[i] < best[0]:
            best = (float(cost[i]), {"ic0_A": float(amp[i]), "period_T": float(periods[i]),
                                     "field_offset_T": offset_T, **shape})
    return best[1]


def rival_start(spec, reference_spec, reference: dict, x, y) -> dict:
    """A model's start from the reference model's converged fit: the period that puts its
    first node where the reference's first node fell, a few factors around it (and the
    shape-parameter grid), the reference's offset; amplitude in closed form."""
    extras = {p.name: reference[p.name] for p in reference_spec.extra}
    first = float(reference_spec.nodes(1, extras or None)[0]) * abs(reference["period_T"])
    factors = _GRID_RIVAL_FACTORS if any(p.grid for p in spec.extra) else _RIVAL_FACTORS
    start = shape_start(spec, x, y, abs(reference["period_T"]), reference["field_offset_T"],
                        first_T=first, factors=factors)
    start["floor_A"] = 0.0
    return start
