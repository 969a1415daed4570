"""Starting values when the main lobe may lie far outside the measured window.

Far from the main lobe the side lobes look periodic with the field period
and decay slowly (as ``1 / (n + 1/2)`` for a uniform junction). The period
comes from a scan with a periodic template ``|sin(pi u)|``; the offset from
the decay of the lobe heights, by trying every lobe assignment with the real
pattern shape and the amplitude solved in closed form.
"""

from __future__ import annotations

import numpy as np

from .scan import Candidate, scan_pattern


def periodic_shape(u):
    """Unit periodic template with nodes at integer ``u``."""
    return np.abs(np.sin(np.pi * u))


def periodic_candidate(x, y) -> Candidate | None:
    """The best period of the periodic template, or ``None`` when the scan finds nothing."""
    found = scan_pattern(x, y, periodic_shape, extend=0.0).candidates
    return found[0] if found else None


def far_lobe_start(x, y, unit_shape, *, lobes_away: int = 60,
                   per_period: int = 16, periodic: Candidate | None = None) -> Candidate | None:
    """Best (period, offset, amplitude) with the main lobe up to ``lobes_away`` periods out.

    ``periodic`` is the periodic scan's candidate when already known (it does not
    depend on ``unit_shape``). Returns ``None`` when the periodic scan finds nothing.
    """
    found = periodic or periodic_candidate(x, y)
    if found is None:
        return None
    period = found.period_T
    offsets = np.arange(x[0] - lobes_away * period, x[-1] + lobes_away * period,
                        period / per_period)
    shapes = unit_shape((x[None, :] - offsets[:, None]) / period)
    s_yf = shapes @ y
    s_ff = np.einsum("ij,ij->i", shapes, shapes)
    gain = np.where(s_yf > 0, s_yf**2 / np.maximum(s_ff, 1e-300), 0.0)
    best = int(np.argmax(gain))
    chisq = float(np.dot(y, y) - gain[best])
    return Candidate(period, float(offsets[best]), float(s_yf[best] / s_ff[best]), 0.0, chisq)
