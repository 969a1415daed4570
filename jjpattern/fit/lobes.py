"""Nodes and lobes of a fitted pattern inside the window, and which lobe is the main one."""

from __future__ import annotations

import numpy as np

#: The next-best lobe assignment must be worse by this much (noise units), or
#: the offset is withheld.
OFFSET_DCHI2 = 16.0
#: Most lobe-to-lobe steps taken when looking for the main lobe outside the window.
MAX_LOBE_WALK = 40


def extras_of(spec, params) -> dict:
    """The model's extra parameters from a dict of values or of parameters with ``value``."""
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


def check_lobe_assignment(spec, x, local, refit, units):
    """When the main lobe is near or beyond an edge, test which lobe is the main one.

    ``local`` is a :class:`~jjpattern.fit.lsq.Local` on the normalised field ``x``.
    Refits (``refit(params) -> Local``) with the offset started one lobe over walk
    downhill in chi-square until no neighbour is better; the margin to the
    next-best assignment then decides whether the offset can be trusted. Returns
    the best fit, that verdict and its evidence (offsets in T through ``units``).
    """
    period = abs(local.params["period_T"])
    origin = local.params["field_offset_T"]
    reach = float(spec.nodes(1, extras_of(spec, local.params))[0]) * period
    if x[0] <= origin - reach and origin + reach <= x[-1]:
        return local, True, None
    fits = {0: local}  # by lobe index of the fitted offset
    tried = {0}

    def lobe(fit):
        return int(round((fit.params["field_offset_T"] - origin) / period))

    def explore(k):
        if k in tried:
            return
        tried.add(k)
        alt = refit(dict(fits[current].params, field_offset_T=origin + k * period))
        j = lobe(alt)
        if j not in fits or alt.chisq < fits[j].chisq:
            fits[j] = alt

    current = 0
    for _ in range(MAX_LOBE_WALK):
        for k in (current - 2, current - 1, current + 1, current + 2):
            explore(k)
        best = min(fits, key=lambda j: fits[j].chisq)
        if best == current:
            break
        current = best
    ranked = sorted(fits, key=lambda j: fits[j].chisq)
    best_fit = fits[ranked[0]]
    if len(ranked) < 2:
        return best_fit, True, None
    runner_up = fits[ranked[1]]
    sigma2 = max(best_fit.chisq / best_fit.nfree, 1e-300)
    delta = (runner_up.chisq - best_fit.chisq) / sigma2
    evidence = {
        "chisq_margin_over_noise": round(float(delta), 2),
        "threshold": OFFSET_DCHI2,
        "best_offset_T": units.to_si({"field_offset_T": best_fit.params["field_offset_T"]})[
            "field_offset_T"],
        "next_offset_T": units.to_si({"field_offset_T": runner_up.params["field_offset_T"]})[
            "field_offset_T"],
    }
    return best_fit, bool(delta >= OFFSET_DCHI2), evidence
