"""Nodes and lobes of a fitted pattern inside the window, and which lobe is the main one."""

from __future__ import annotations

import numpy as np

#: The next-best lobe assignment must be worse by this much (noise units), or
#: the offset is withheld.
OFFSET_DCHI2 = 16.0
#: Most lobe-to-lobe steps taken when looking for the main lobe outside the window.
MAX_LOBE_WALK = 40


def extras_of(spec, params) -> dict:
    """The model's extra parameters from an lmfit Parameters or a plain dict."""
    out = {}
    for p in spec.extra:
        value = params[p.name]
        out[p.name] = float(getattr(value, "value", value))
    return out


def node_list(spec, x, period, offset, extras=None):
    """Reduced flux of every node that could fall between the window's ends."""
    reach = max(abs(x[0] - offset), abs(x[-1] - offset)) / period
    return np.asarray(spec.nodes(int(np.ceil(reach)) + 2, extras), dtype=float)


def nodes_in_window(spec, x, period, offset, extras=None):
    """Nodes inside the window with data on both sides (a tenth of a period)."""
    u_nodes = node_list(spec, x, period, offset, extras)
    nodes = np.concatenate([offset - u_nodes * period, offset + u_nodes * period])
    margin = 0.1 * period
    return int(np.sum((nodes > x[0] + margin) & (nodes < x[-1] - margin)))


def _chisq(result):
    return float(np.sum(np.square(result.residual)))


def _value(result, name):
    return float(result.params[name].value)


def check_lobe_assignment(model, y, x, result, refit):
    """When the main lobe is near or beyond an edge, test which lobe is the main one.

    Refits (``refit(params) -> result``) with the offset started one lobe over walk
    downhill in chi-square until no neighbour is better; the margin to the
    next-best assignment then decides whether the offset can be trusted. Returns
    the best result, that verdict and its evidence.
    """
    spec = model.spec
    period = abs(_value(result, "period_T"))
    origin = _value(result, "field_offset_T")
    reach = float(spec.nodes(1, extras_of(spec, result.params))[0]) * period
    if x[0] <= origin - reach and origin + reach <= x[-1]:
        return result, True, None
    fits = {0: result}  # by lobe index of the fitted offset
    tried = {0}

    def lobe(fit):
        return int(round((_value(fit, "field_offset_T") - origin) / period))

    def explore(k):
        if k in tried:
            return
        tried.add(k)
        params = fits[current].params.copy()
        params["field_offset_T"].set(value=origin + k * period)
        alt = refit(params)
        j = lobe(alt)
        if j not in fits or _chisq(alt) < _chisq(fits[j]):
            fits[j] = alt

    current = 0
    for _ in range(MAX_LOBE_WALK):
        for k in (current - 2, current - 1, current + 1, current + 2):
            explore(k)
        best = min(fits, key=lambda j: _chisq(fits[j]))
        if best == current:
            break
        current = best
    ranked = sorted(fits, key=lambda j: _chisq(fits[j]))
    best_fit = fits[ranked[0]]
    if len(ranked) < 2:
        return best_fit, True, None
    runner_up = fits[ranked[1]]
    sigma2 = _chisq(best_fit) / max(best_fit.nfree, 1)
    delta = (_chisq(runner_up) - _chisq(best_fit)) / sigma2
    evidence = {
        "chisq_margin_over_noise": round(float(delta), 2),
        "threshold": OFFSET_DCHI2,
        "best_offset_T": _value(best_fit, "field_offset_T"),
        "next_offset_T": _value(runner_up, "field_offset_T"),
    }
    return best_fit, bool(delta >= OFFSET_DCHI2), evidence
