"""The automatic fit: global scan, local least squares, node floor, robust loss, checks.

Thresholds are in units of the noise, so they mean the same at any current
scale. Each one is written down here once and reported in the evidence of
the flag it triggers.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..flags import make_flag
from ..io.sweep import MIN_POINTS
from ..physics.models import get_model, model_names
from ..sampling import tidy
from .choice import choose_model
from .far import far_lobe_start
from .floor import floor_trial_start
from .lobes import OFFSET_DCHI2, check_lobe_assignment, extras_of, nodes_in_window
from .lsq import Units, evaluate, solve
from .noise import difference_noise
from .outcome import (
    MIN_NODES,
    OUTLIER_SIGMAS,
    POOR_FIT_REDCHI,
    add_flags,
    fill,
    withhold_if_poor,
    withhold_if_undersampled,
)
from .reported import final_fit
from .result import PatternFit
from .scan import scan_pattern
from .starts import shape_start

#: Below this drop in chi-square (in noise units) from a flat line to the fitted
#: pattern, the data show no modulation.
MODULATION_DCHI2 = 30.0
#: The modulation must stand without the points that carry most of it: this many are
#: left out for the second test (a single spike on zero is no pattern).
MODULATION_POINTS = 2
#: A node floor is kept when it lowers chi-square by more than this (noise units).
FLOOR_DCHI2 = 10.0
#: Robust loss scale in units of the model-free noise.
ROBUST_SCALE = 2.0
#: ``geometry`` value that fits every registered model and chooses one (``fit.choice``).
AUTO = "auto"

__all__ = ["AUTO", "FLOOR_DCHI2", "MIN_NODES", "MODULATION_DCHI2", "MODULATION_POINTS",
           "OFFSET_DCHI2",
           "OUTLIER_SIGMAS", "POOR_FIT_REDCHI", "ROBUST_SCALE", "fit_pattern"]

LOSSES = ("linear", "soft_l1", "huber", "cauchy")
NODE_FLOOR = ("auto", "on", "off")


def _uncertainty_text(loss):
    base = (
        "standard errors from the fit covariance scaled by the reduced chi-square, i.e. the "
        "noise is estimated from the fit residuals"
    )
    if loss != "linear":
        base += (f"; the {loss} robust fit is finished by weighted least squares at its "
                 "robust weights, whose covariance gives the errors")
    return base


def fit_pattern(
    field_T,
    ic_A,
    *,
    geometry: str = AUTO,
    node_floor: str = "auto",
    loss: str = "linear",
    branch: str = "positive",
) -> PatternFit:
    """Fit an Ic(B) pattern with no starting values from the user.

    Parameters
    ----------
    field_T, ic_A : array_like
        Applied field (T) and critical current (A). Negative currents are
        taken as the magnitude of a negative branch; non-finite pairs are
        dropped and equal fields averaged.
    geometry : str
        ``"auto"`` (default) fits every registered model and reports the one the
        Bayesian information criterion prefers by a margin, a model other than the
        rectangle only where it describes the data and the rectangle where none does
        (the evidence is in ``model_choice``); or the name of one model from
        :func:`jjpattern.physics.models.model_names` (``rectangular``, ``circular``,
        ``two-channel``, ``zero-pi``, ``long-inline``, ``long-overlap``, ...), whose
        extra parameters are fitted too.
    node_floor : {'auto', 'on', 'off'}
        Fit a floor in quadrature for lifted nodes; ``auto`` keeps it only when
        it improves the fit beyond ``FLOOR_DCHI2``.
    loss : {'linear', 'soft_l1', 'huber', 'cauchy'}
        ``linear`` is ordinary least squares (efficient on clean data); the
        others down-weight points far from the pattern, such as premature
        switching events.
    branch : str
        Label carried into the result and its flags.

    Returns
    -------
    PatternFit
        Headline numbers with standard errors, or ``None`` and a flag where
        the data cannot tell; when the best model misses the data (reduced
        chi-square above ``POOR_FIT_REDCHI``) its numbers are withheld too.
    """
    spec = None if geometry == AUTO else get_model(geometry)
    if loss not in LOSSES:
        raise InputError(f"unknown loss {loss!r}; use one of {', '.join(LOSSES)}")
    if node_floor not in NODE_FLOOR:
        raise InputError(f"unknown node-floor mode {node_floor!r}; use auto, on or off")
    clean = tidy(field_T, ic_A)
    x, y = clean.x, clean.y
    if x.size < MIN_POINTS:
        raise InputError(f"only {x.size} usable points; a fit needs at least {MIN_POINTS}")
    if np.median(y) < 0:
        y = -y
    noise = difference_noise(x, y)
    scale = float(np.max(np.abs(y)))
    noise = max(noise, 1e-9 * scale) if np.isfinite(noise) else 1e-9 * scale
    choice = None
    if spec is None and scale > 0:
        choice = choose_model(x, y, noise, node_floor=node_floor, loss=loss,
                              floor_dchi2=FLOOR_DCHI2, min_nodes=MIN_NODES)
    if spec is None:
        spec = get_model(choice.chosen if choice else model_names()[0])
    out = _fit_model(spec, x, y, noise, node_floor, loss, branch,
                     start=choice.start if choice else None)
    out.model_choice = choice.block if choice else None
    return out


def _drop_without_top(y, local, count):
    """Drop in chi-square from a flat line to the fit with the ``count`` points that gain
    the most left out: a pattern carried by one or two points (a spike) is no pattern."""
    r2 = local.weights * local.residual**2
    gain = (y - y.mean()) ** 2 - r2
    keep = np.ones(y.size, dtype=bool)
    keep[np.argsort(gain)[-count:]] = False
    rest = y[keep]
    return float(np.sum((rest - rest.mean()) ** 2) - np.sum(r2[keep]))


def _scan_start(spec, xn, yn):
    """Start (normalised units) from the scan, and the shape-parameter grid."""
    model_scan = scan_pattern(xn, yn, spec.unit_shape, **({"extend": 0.0} if spec.periodic
                                                           else {}))
    if not model_scan.candidates:
        return None, 0.0
    best = model_scan.candidates[0]
    start = {"ic0_A": best.amplitude_A + best.background_A, "period_T": best.period_T,
             "field_offset_T": best.field_offset_T}
    if any(p.grid for p in spec.extra):
        start.update(shape_start(spec, xn, yn, best.period_T, best.field_offset_T))
    return start, max(best.background_A, 0.0)


def _floor_start(spec, xn, yn, local, node_floor, loss, background, sigma):
    """Start of the floor refit (the scan's background or 5 % of Ic0, or where a quick
    estimate ends), ``None`` where the estimate spares it (``fit.floor``)."""
    usual = dict(local.params, floor_A=max(background, 0.05 * abs(local.params["ic0_A"])))
    if node_floor != "auto":
        return usual
    return floor_trial_start(spec, xn, yn, local, usual, sigma=sigma, loss=loss,
                             threshold=FLOOR_DCHI2)


def _fit_model(spec, x, y, noise, node_floor, loss, branch, start=None) -> PatternFit:
    """The fit of one model: start, local fit, far lobe, node floor, checks, numbers.

    Everything up to the reported fit runs in normalised units (``lsq.Units``) with
    scipy; the reported fit (``reported.final_fit``) starts at the converged point.
    """
    scale = float(np.max(np.abs(y)))
    out = PatternFit(
        branch=branch, model=spec.name, points_used=int(x.size), noise_A=noise,
        ic_max_A=float(np.max(y)), field_min_T=float(x[0]), field_max_T=float(x[-1]),
        loss=loss, uncertainty=_uncertainty_text(loss), field_T=x, ic_A=y,
    )
    if scale <= 0:
        out.flags.append(make_flag("no-modulation", branch, reason="the current is zero"))
        return out
    units = Units.of(x, y)
    xn, yn, sigma = units.field(x), y / units.scale_A, noise / units.scale_A
    f_scale = ROBUST_SCALE * sigma
    given = start is not None
    background, decided, choice_gain = 0.0, False, None
    if given:
        # With node_floor auto, the automatic choice has already tried the floor.
        decided = node_floor == "auto" and "floor_gain" in start
        choice_gain = start.get("floor_gain")
        start = units.to_unit({k: v for k, v in start.items() if k != "floor_gain"})
    else:
        start, background = _scan_start(spec, xn, yn)
        if start is None:
            out.flags.append(make_flag("no-modulation", branch, reason="no period found"))
            return out

    def refit(params, floor=False):
        return solve(spec, xn, yn, params, floor=floor, loss=loss, f_scale=f_scale)

    # The choice's parameters, converged on all points with the floor it decided on, are
    # taken as they are (the reported fit polishes them).
    chosen_floor = decided and choice_gain is not None and not spec.periodic
    local = (evaluate(spec, xn, yn, start, floor=chosen_floor, loss=loss, f_scale=f_scale)
             if decided else refit(start, floor=chosen_floor))
    offset = local.params["field_offset_T"]
    if not given and not spec.periodic and (not xn[0] <= offset <= xn[-1] or nodes_in_window(
            spec, xn, abs(local.params["period_T"]), offset,
            extras_of(spec, local.params)) < MIN_NODES):
        far = far_lobe_start(xn, yn, spec.unit_shape)
        if far is not None:
            alt = refit(dict(local.params, ic0_A=far.amplitude_A, period_T=far.period_T,
                             field_offset_T=far.field_offset_T))
            if alt.chisq < local.chisq:
                local = alt
    gain = None
    if chosen_floor:
        gain = choice_gain
    elif not decided and node_floor != "off" and not spec.periodic and (
            trial_start := _floor_start(spec, xn, yn, local, node_floor, loss, background,
                                        sigma)) is not None:
        floored = refit(trial_start, floor=True)
        trial = (local.chisq - floored.chisq) / max(floored.chisq / floored.nfree, 1e-300)
        if node_floor == "on" or trial > FLOOR_DCHI2:
            local, gain = floored, trial
    floor_evidence = None if gain is None else {
        "chisq_gain_over_noise": round(float(gain), 2), "threshold": FLOOR_DCHI2}
    floor = "floor_A" in local.free

    drop = (float(np.sum((yn - yn.mean()) ** 2)) - local.chisq) / sigma**2
    if drop < MODULATION_DCHI2:
        out.flags.append(make_flag(
            "no-modulation", branch, chisq_drop_over_noise=round(drop, 2),
            threshold=MODULATION_DCHI2, noise_A=noise,
        ))
        return out
    spread = _drop_without_top(yn, local, MODULATION_POINTS) / sigma**2
    if spread < MODULATION_DCHI2:
        out.flags.append(make_flag(
            "no-modulation", branch, chisq_drop_over_noise=round(drop, 2),
            chisq_drop_without_top_points=round(spread, 2), points_left_out=MODULATION_POINTS,
            threshold=MODULATION_DCHI2, noise_A=noise,
            reason=f"the drop in chi-square rests on {MODULATION_POINTS} points or fewer",
        ))
        return out
    if spec.periodic:
        offset_ok, offset_evidence = True, None  # no main lobe: the offset is modulo a period
    else:
        local, offset_ok, offset_evidence = check_lobe_assignment(
            spec, xn, local, lambda p: refit(p, floor=floor), units)
    result = final_fit(spec, x, y, local, units, noise, loss=loss,
                       scale_over_noise=ROBUST_SCALE)
    fill(out, result, spec, x, offset_ok)
    if not withhold_if_undersampled(out, x) and out.period_T is not None:
        withhold_if_poor(out, spec)
    add_flags(out, result, branch, offset_ok, offset_evidence, floor_evidence, f_scale * scale)
    return out
