"""Flags about the shape of a pattern: departures from a uniform junction, with evidence.

Every threshold is in units of the measured noise or of a standard error, so a
uniform junction measured with realistic noise raises none of these flags.
"""

from __future__ import annotations

import numpy as np

from ..flags import make_flag
from .mirror import mirror_centre, mirror_redchi

#: A node floor this many standard errors above the floor that true zeros measured as
#: magnitudes would give (folded noise, and the extraction criterion's own) means lifted
#: nodes.
FLOOR_SIGMAS = 4.0
#: Points whose curve stays above this many noise units cannot fold: their noise is
#: the noise that folds at the nodes.
FLOOR_CLEAR = 2.0
#: The floor must lift some measured point by this many noise units to count.
FLOOR_VISIBLE = 0.5
#: Fewest points away from the nodes for a noise estimate of their own.
FLOOR_MIN_POINTS = 30
#: MAD to standard deviation for Gaussian noise.
_MAD = 1.482602218505602
#: Mirror differences about the pattern centre: reduced chi-square above this is asymmetry.
MIRROR_REDCHI = 2.0
#: Central dip: the centre must lie this many noise units below the nearby maximum ...
DIP_SIGMAS = 5.0
#: ... and below this fraction of it.
DIP_FRACTION = 0.8
#: Side-lobe heights (over the main lobe) against those of a uniform junction: above
#: this ratio current crowds at the edges, below the other it gathers in the middle.
EDGE_RATIO_HIGH = 1.8
EDGE_RATIO_LOW = 0.65
#: Branches differ when Ic0 or the offset differ by this many combined standard errors.
BRANCH_SIGMAS = 5.0
#: Periods of the two halves of the sweep differ by this many combined standard errors ...
DRIFT_SIGMAS = 5.0
#: ... and by this fraction of the period (a noiseless pattern fits both halves to 1e-15,
#: with standard errors from rounding residuals that make that many "sigmas").
DRIFT_FRACTION = 0.005
#: L / lambda_J above which the junction is not short.
LONG_RATIO = 1.0


def _lobe_maxima(geometry, count, extras=None):
    """Side-lobe maxima of the pattern of ``geometry`` over its main-lobe maximum, lobes
    1..count (the main lobe of a 0-pi pattern is the pair around its central zero)."""
    from ..physics.models import get_model

    spec = get_model(geometry)
    extras = extras or {}
    nodes = spec.nodes(count + 1, extras)
    main = float(np.max(spec.formula(np.linspace(0.0, nodes[0], 801), **extras)))
    out = []
    for a, b in zip(nodes[:-1], nodes[1:], strict=True):
        u = np.linspace(a, b, 401)
        out.append(float(np.max(spec.formula(u, **extras))) / main)
    return np.asarray(out)


def side_lobe_ratio(fit, max_lobes=4):
    """Mean of the measured side-lobe heights over those of a uniform junction.

    Heights are relative to the measured main lobe; each is the largest value of
    the data (smoothed over a tenth of a period) between two fitted nodes, on both
    sides where measured. Returns ``(ratio, stderr, lobes used)`` or ``None``.
    """
    from ..physics.models import get_model

    x, y, b0, p = fit.field_T, fit.ic_A, fit.field_offset_T, fit.period_T
    if b0 is None:
        return None
    extras = {k: v for k, v in (getattr(fit, "extra_params", None) or {}).items()
              if v is not None}
    spec = get_model(fit.model)
    width = max(1, int(round(0.1 * p / np.median(np.diff(x)))))
    smooth = np.convolve(y, np.ones(width) / width, mode="same")
    first = float(spec.nodes(1, extras)[0])
    # Within the main lobe: its middle half, or up to the first node for a 0-pi pattern.
    main = np.abs(x - b0) < (0.5 if spec.central_peak else 1.0) * first * p
    if main.sum() < 3:
        return None
    h0 = float(np.max(smooth[main]))
    nodes = spec.nodes(max_lobes + 1, extras)
    ideal = _lobe_maxima(fit.model, max_lobes, extras)
    ratios = []
    for n in range(max_lobes):
        for sign in (1.0, -1.0):
            lo, hi = sorted((b0 + sign * nodes[n] * p, b0 + sign * nodes[n + 1] * p))
            inside = (x > lo) & (x < hi)
            # A lobe cut by the window still counts when most of it was measured.
            measured = min(hi, x[-1]) - max(lo, x[0])
            if measured < 0.6 * (hi - lo) or inside.sum() < 3:
                continue
            ratios.append(float(np.max(smooth[inside])) / h0 / ideal[n])
    if not ratios:
        return None
    ratios = np.asarray(ratios)
    # Each height carries the noise of a smoothed point; h0 its own share too.
    sigma = fit.noise_A / np.sqrt(width) / h0
    err = float(np.sqrt(np.mean((sigma / ideal[:1]) ** 2) / ratios.size + (sigma) ** 2))
    return float(np.mean(ratios)), err, int(ratios.size)


def folded_mean(m, sigma):
    """Mean of ``|m + e|`` for Gaussian ``e`` of standard deviation ``sigma`` (folded normal).

    ``sigma sqrt(2/pi)`` at ``m = 0``, ``|m|`` far from it (Leone, Nelson and
    Nottingham, Technometrics 3, 543 (1961)).
    """
    from scipy import special

    m = np.abs(np.asarray(m, dtype=float))
    z = m / sigma
    return sigma * np.sqrt(2.0 / np.pi) * np.exp(-0.5 * z**2) + m * special.erf(z / np.sqrt(2.0))


def _noise_off_nodes(x, y, curve, noise):
    """Point-to-point noise from points whose curve and neighbours stay clear of the nodes.

    The same neighbour-line residual as the fit's noise estimate, but where the
    magnitude cannot fold: near the nodes folding narrows the spread, which would
    understate the noise that folds. Returns ``(noise, points used)``.
    """
    gap = x[2:] - x[:-2]
    w = (x[2:] - x[1:-1]) / gap
    z = (y[1:-1] - (w * y[:-2] + (1.0 - w) * y[2:])) / np.sqrt(1.0 + w**2 + (1.0 - w) ** 2)
    clear = np.minimum(np.minimum(curve[:-2], curve[1:-1]), curve[2:]) > FLOOR_CLEAR * noise
    z = z[clear]
    if z.size < FLOOR_MIN_POINTS:
        return noise, int(z.size)
    return float(_MAD * np.median(np.abs(z - np.median(z)))), int(z.size)


def _null_floor_squared(m2, y, top):
    """``F`` in ``[0, top]`` minimising ``sum (sqrt(m2 + F) - y)^2`` (``fit.floor``: a convex
    problem in ``F``, solved by Newton steps)."""
    from ..fit.floor import best_floor_squared

    return min(best_floor_squared(m2, y, top), top)


def floor_test(fit, criterion_floor_A=0.0) -> dict | None:
    """The fitted node floor against the floor true zeros would give; ``None`` without a floor.

    Null hypothesis: the nodes are true zeros (or the criterion's own floor in
    quadrature) and each point is measured as a magnitude, ``|Ic + noise|``, so
    near a node its mean is the folded normal's (:func:`folded_mean`), not zero.
    ``null_floor_A`` is the floor a least-squares fit of the floored pattern finds
    in that mean at the measured fields (other parameters held); it is about 0.6
    noise units on a uniform junction. Data holding negative values were not
    folded, and the null is then the criterion's floor alone. Nodes are lifted
    when the fitted floor exceeds the null by ``FLOOR_SIGMAS`` combined standard
    errors (the floor's, scaled up by the scatter of the points at the nodes when it
    exceeds the noise, and the null's, through the noise estimate) and lifts some
    measured point by :data:`FLOOR_VISIBLE` noise units.
    """
    from ..physics.models import get_model

    if fit.node_floor_A is None or not fit.node_floor_stderr_A or not fit.best_params:
        return None
    x, y = fit.field_T, fit.ic_A
    curve = get_model(fit.model).formula(x, **{**fit.best_params, "floor_A": 0.0})
    folded = bool(np.all(y >= 0))
    sigma, used = _noise_off_nodes(x, y, curve, fit.noise_A)
    # In noise units, so the bounded search is scale-free.
    f, c = curve / sigma, criterion_floor_A / sigma
    target = folded_mean(np.hypot(f, c), 1.0) if folded else np.hypot(f, c)
    null = float(np.sqrt(_null_floor_squared(f * f, target, (3.0 + 2.0 * c) ** 2))) * sigma
    # A MAD-based noise from n values has a relative standard error of about 1.17/sqrt(n)
    # (its efficiency against the standard deviation is 37 %; common practice).
    null_err = (null - criterion_floor_A if folded else 0.0) * 1.17 / np.sqrt(max(used, 1))
    # The floor rests on the few points at the nodes, its standard error on the scatter
    # of all residuals (the covariance is scaled by them); where the points at the nodes
    # scatter more (critical currents extracted near a node), its error grows so.
    near = curve < 3.0 * (fit.node_floor_A + fit.noise_A)
    spread = 1.0
    if near.sum() >= 3 and fit.residual_rms_A:
        left = y[near] - fit.model_A(x[near])
        spread = max(1.0, float(np.sqrt(np.mean(left**2))) / fit.residual_rms_A)
    err = float(np.hypot(spread * fit.node_floor_stderr_A, null_err))
    # A floor that lifts no measured point by a fair part of the noise is below what the
    # sampling of the nodes shows (a noiseless pattern fits a floor of 1e-8 Ic0 with a
    # standard error from rounding residuals).
    visible = float(np.max(np.hypot(curve, fit.node_floor_A) - curve))
    excess = fit.node_floor_A - null
    return {
        "node_floor_A": fit.node_floor_A, "criterion_floor_A": criterion_floor_A,
        "null_floor_A": null, "noise_model": "folded normal" if folded else "normal",
        "noise_A": sigma,
        "lifted_floor_A": float(np.sqrt(max(fit.node_floor_A**2 - null**2, 0.0))),
        "floor_stderr_A": fit.node_floor_stderr_A, "node_scatter_over_noise": round(spread, 3),
        "excess_sigmas": round(excess / err, 2), "threshold_sigmas": FLOOR_SIGMAS,
        "floor_visible_over_noise": round(visible / sigma, 3),
        "lifted": bool(excess > FLOOR_SIGMAS * err and visible > FLOOR_VISIBLE * sigma),
    }


def lifted_floor_A(fit, criterion_floor_A=0.0) -> float | None:
    """The node floor beyond what true zeros measured as magnitudes give, when significant.

    See :func:`floor_test`; ``None`` when the nodes are not lifted.
    """
    test = floor_test(fit, criterion_floor_A)
    return test["lifted_floor_A"] if test and test["lifted"] else None


def shape_flags(fit, *, criterion_floor_A=0.0, density=None, floor=None) -> list:
    """Flags for one fitted branch: lifted nodes, asymmetry, central dip, edge/centre current.

    ``floor`` is :func:`floor_test` of this fit where the caller has it already.
    """
    flags = []
    if fit.period_T is None:
        return flags
    x, y, noise = fit.field_T, fit.ic_A, fit.noise_A
    floor = dict(floor) if floor is not None else floor_test(fit, criterion_floor_A)
    if floor and floor.pop("lifted"):
        flags.append(make_flag(
            "nodes-lifted", fit.branch, **floor,
            # Over Ic0 only where Ic0 is given (a main lobe outside the window is never
            # measured), and always over the largest measured Ic.
            floor_over_ic0=(round(floor["lifted_floor_A"] / fit.ic0_A, 4) if fit.ic0_A
                            else None),
            floor_over_ic_max=round(floor["lifted_floor_A"] / fit.ic_max_A, 4)))
    if fit.field_offset_T is None or not (x[0] + fit.period_T < fit.field_offset_T
                                          < x[-1] - fit.period_T):
        return flags  # the centre of the pattern is not measured with a period either side
    centre = mirror_centre(x, y, fit.period_T)
    redchi, n = mirror_redchi(x, y, centre, noise)
    if redchi is not None and redchi > MIRROR_REDCHI:
        flags.append(make_flag("field-asymmetry", fit.branch, centre_T=centre,
                               mirror_reduced_chisq=round(redchi, 3), points=n,
                               threshold=MIRROR_REDCHI, noise_A=noise))
    near = np.abs(x - centre) < 0.1 * fit.period_T
    around = np.abs(x - centre) < 1.2 * fit.period_T
    if near.sum() >= 3 and around.any():
        middle, top = float(np.mean(y[near])), float(np.max(y[around]))
        if middle < top - DIP_SIGMAS * noise and middle < DIP_FRACTION * top:
            flags.append(make_flag("central-minimum", fit.branch, centre_T=centre,
                                   ic_at_centre_A=middle, nearby_maximum_A=top,
                                   noise_A=noise, threshold_sigmas=DIP_SIGMAS,
                                   threshold_fraction=DIP_FRACTION))
    decay = side_lobe_ratio(fit)
    if decay is not None:
        ratio, err, lobes = decay
        evidence = dict(side_lobe_ratio=round(ratio, 4), ratio_stderr=round(err, 4),
                        lobes_used=lobes)
        if density is not None:
            evidence["edge_fraction"] = round(density["edge_fraction"], 4)
        if ratio > EDGE_RATIO_HIGH and ratio - 1 > 5 * err:
            flags.append(make_flag("edge-current", fit.branch, threshold=EDGE_RATIO_HIGH,
                                   **evidence))
        elif ratio < EDGE_RATIO_LOW and 1 - ratio > 5 * err:
            flags.append(make_flag("center-current", fit.branch, threshold=EDGE_RATIO_LOW,
                                   **evidence))
    return flags


def branch_flags(fits) -> list:
    """Ic+ against |Ic-|: amplitudes or offsets that differ beyond their errors."""
    pos = next((f for f in fits if f.branch == "positive"), None)
    neg = next((f for f in fits if f.branch == "negative"), None)
    if pos is None or neg is None or pos.ic0_A is None or neg.ic0_A is None:
        return []
    evidence = {}
    for key in ("ic0_A", "field_offset_T"):
        a, b = getattr(pos, key), getattr(neg, key)
        ea = getattr(pos, key.replace("_A", "_stderr_A").replace("_T", "_stderr_T")) or 0.0
        eb = getattr(neg, key.replace("_A", "_stderr_A").replace("_T", "_stderr_T")) or 0.0
        sigma = float(np.hypot(ea, eb))
        if sigma > 0 and abs(a - b) > BRANCH_SIGMAS * sigma:
            evidence[f"{key}_positive"] = a
            evidence[f"{key}_negative"] = b
            evidence[f"{key}_difference_sigmas"] = round(abs(a - b) / sigma, 2)
    if not evidence:
        return []
    return [make_flag("branch-asymmetry", None, threshold_sigmas=BRANCH_SIGMAS, **evidence)]


def drift_flag(fit, half_periods) -> list:
    """Periods fitted on the two halves of the sweep ``[(P, err), (P, err)]`` compared."""
    (p1, e1), (p2, e2) = half_periods
    if not (e1 and e2):
        return []
    sigma = float(np.hypot(e1, e2))
    relative = abs(p1 - p2) / (0.5 * (p1 + p2))
    if abs(p1 - p2) <= DRIFT_SIGMAS * sigma or relative <= DRIFT_FRACTION:
        return []
    return [make_flag("period-drift", fit.branch, period_low_field_T=p1, period_high_field_T=p2,
                      difference_sigmas=round(abs(p1 - p2) / sigma, 2),
                      threshold_sigmas=DRIFT_SIGMAS, relative_difference=round(relative, 5),
                      threshold_fraction=DRIFT_FRACTION)]


def long_junction_flag(branch, length_m, josephson_depth_m, *, pattern_ratio=None,
                       model=None) -> list:
    """L / lambda_J from the pattern itself (a long-junction model was fitted), or from the
    geometry and Jc given by the user."""
    if pattern_ratio is not None:
        if pattern_ratio <= LONG_RATIO:
            return []
        return [make_flag("long-junction", branch, source="pattern", model=model,
                          length_over_josephson_depth=pattern_ratio, threshold=LONG_RATIO)]
    ratio = length_m / josephson_depth_m
    if ratio <= LONG_RATIO:
        return []
    return [make_flag("long-junction", branch, source="geometry", length_m=length_m,
                      josephson_depth_m=josephson_depth_m, length_over_josephson_depth=ratio,
                      threshold=LONG_RATIO)]
