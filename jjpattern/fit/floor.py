"""A quick estimate of what a node floor gains, to spare the floor refit where it cannot
pass its threshold.

The floor enters in quadrature, ``sqrt(m^2 + F)`` with ``F = floor^2``. With the other
parameters held at the fit without a floor, the sum of squares is convex in ``F`` for
non-negative data (its second derivative is ``sum y / (2 (m^2 + F)^1.5)``), so its minimum
is one root; one Gauss-Newton step in every parameter from there adds what freeing the
others gains. The estimate only decides whether the full refit is worth running: a gain
estimated at less than ``SKIP_FRACTION`` of the threshold is not refitted.
"""

from __future__ import annotations

import numpy as np

#: Estimated gains below this fraction of the floor's threshold skip the refit.
SKIP_FRACTION = 0.5
#: Only a fit without the floor whose reduced chi-square (over the model-free noise) is at
#: most this is near enough to the floored one for the estimate to speak for the refit.
SKIP_REDCHI = 2.0


def best_floor_squared(m2, y, top=None):
    """``F`` in ``[0, top]`` (default ``max(y)^2``) minimising ``sum (sqrt(m2 + F) - y)^2``.

    Its derivative ``sum (1 - y / sqrt(m2 + F))`` increases, and for ``y >= 0`` is concave:
    with every ``m2 > 0`` (finite at zero) Newton steps started at ``F = 0``, left of the
    root, climb to it without overshooting (a few passes). Otherwise the root is zero
    where the derivative is already non-negative at zero, else found by Newton steps kept
    inside a shrinking bracket.
    """
    hi = float(np.max(y)) ** 2 if top is None else float(top)
    if hi <= 0.0:
        return 0.0
    if np.all(m2 > 0) and np.all(y >= 0):
        f = 0.0
        for _ in range(100):
            inv = 1.0 / np.sqrt(m2 + f)
            ratio = y * inv
            slope = m2.size - float(np.sum(ratio))
            if slope >= 0.0:
                break
            step = -slope / (0.5 * float(np.sum(ratio * inv * inv)))
            f += step
            if f >= hi:
                return hi
            if step <= 1e-12 * f:
                break
        return f
    if np.all(m2 > 0) and float(np.sum(1.0 - y / np.sqrt(m2))) >= 0.0:
        return 0.0
    lo, f = 0.0, 0.0025 * hi
    for _ in range(60):
        root = np.sqrt(m2 + f)
        d1 = float(np.sum(1.0 - y / root))
        if d1 > 0.0:
            hi = f
        else:
            lo = f
        d2 = float(np.sum(y / (2.0 * root**3)))
        step = f - d1 / d2 if d2 > 0.0 else -1.0
        f_new = step if lo < step < hi else 0.5 * (lo + hi)
        if abs(f_new - f) <= 1e-10 * hi:
            return f_new
        f = f_new
    return f


def estimated_floor_gain(spec, x, y, local):
    """Estimated drop in chi-square (data units squared) from adding a floor to ``local``
    (a least-squares fit without one, normalised units: anything with ``params``,
    ``free``, ``residual`` and ``chisq``) and the parameters the estimate ends at (a start
    for the refit); ``(None, None)`` where it cannot be estimated (no analytic gradient, a
    singular step)."""
    if spec.gradient is None:
        return None, None
    model = y + local.residual
    m2 = model * model
    f2 = best_floor_squared(m2, y)
    if f2 <= 0.0:
        return 0.0, None
    params = dict(local.params, floor_A=float(np.sqrt(f2)))
    names = tuple(local.free) + ("floor_A",)
    r = np.sqrt(m2 + f2) - y
    grads = spec.gradient(x, **params)
    j = np.column_stack([grads[n] for n in names])
    g = j.T @ r
    try:
        step = np.linalg.solve(j.T @ j, g)
    except np.linalg.LinAlgError:
        return None, None
    step_gain = float(g @ step)
    if not np.isfinite(step_gain):
        return None, None
    moved = dict(params)
    for name, delta in zip(names, step, strict=True):
        moved[name] = params[name] - float(delta)
    # The step is undamped: where a parameter is nearly free (a long junction's L/lambda_J
    # near zero, where the pattern is even in it) it can leave the model's range or land
    # worse than it started. The refit then starts at the floor alone instead.
    inside = all(p.min <= moved[p.name] <= p.max and not p.at_limit(moved[p.name])
                 for p in spec.extra)
    if inside:
        r_moved = spec.formula(x, **moved) - y
        inside = bool(np.isfinite(r_moved).all()) and float(r_moved @ r_moved) < float(r @ r)
    estimate = max(local.chisq - float(r @ r) + max(step_gain, 0.0), 0.0)
    return estimate, moved if inside else params


def floor_trial_start(spec, x, y, local, usual: dict, *, sigma: float, loss: str,
                      threshold: float) -> dict | None:
    """Where the floor refit of ``local`` starts, or ``None`` where it is not worth running.

    Under least squares, with a fit without the floor that already describes the data
    (reduced chi-square at most ``SKIP_REDCHI`` in units of the model-free noise
    ``sigma``), an estimated gain below ``SKIP_FRACTION`` of ``threshold`` (noise units)
    spares the refit, and the estimate's end point is its start. Otherwise the refit starts
    at ``usual``: from a fit that misses the data it can reach another minimum, which no
    local estimate sees.
    """
    nfree = max(local.residual.size - len(local.free), 1)
    if loss != "linear" or local.chisq / nfree > SKIP_REDCHI * sigma**2:
        return usual
    estimate, start = estimated_floor_gain(spec, x, y, local)
    if estimate is None:
        return usual
    if estimate / max(local.chisq / nfree, 1e-300) < SKIP_FRACTION * threshold:
        return None
    return start if start is not None and start["floor_A"] > 0 else usual
