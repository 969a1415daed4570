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
from .choice import choose_model, robust_weight, shape_start
from .far import far_lobe_start
from .lobes import OFFSET_DCHI2, check_lobe_assignment, extras_of, nodes_in_window
from .models import PatternModel
from .noise import difference_noise
from .outcome import (
    MIN_NODES,
    OUTLIER_SIGMAS,
    POOR_FIT_REDCHI,
    add_flags,
    fill,
    withhold_if_poor,
)
from .result import PatternFit

#: Below this drop in chi-square (in noise units) from a flat line to the fitted
#: pattern, the data show no modulation.
MODULATION_DCHI2 = 30.0
#: A node floor is kept when it lowers chi-square by more than this (noise units).
FLOOR_DCHI2 = 10.0
#: Robust loss scale in units of the model-free noise.
ROBUST_SCALE = 2.0
#: ``geometry`` value that fits every registered model and chooses one (``fit.choice``).
AUTO = "auto"

__all__ = ["AUTO", "FLOOR_DCHI2", "MIN_NODES", "MODULATION_DCHI2", "OFFSET_DCHI2",
           "OUTLIER_SIGMAS", "POOR_FIT_REDCHI", "ROBUST_SCALE", "fit_pattern", "local_fit"]

LOSSES = ("linear", "soft_l1", "huber", "cauchy")
NODE_FLOOR = ("auto", "on", "off")


def local_fit(model, y, x, params, loss, f_scale):
    """One local fit. A robust fit ends with a weighted least-squares step at the
    robust weights (the fixed point of iteratively reweighted least squares), so
    that its covariance and reduced chi-square use the down-weighted residuals."""
    if loss == "linear":
        return model.fit(y, params, field_T=x, method="leastsq")
    fit_kws = {"loss": loss, "f_scale": f_scale, "x_scale": "jac"}
    robust = model.fit(y, params, field_T=x, method="least_squares", fit_kws=fit_kws)
    weights = robust_weight((robust.residual / f_scale) ** 2, loss)
    result = model.fit(y, robust.params, field_T=x, weights=np.sqrt(weights), method="leastsq")
    result.robust_weights = weights
    return result


def _chisq(result):
    return float(np.sum(np.square(result.residual)))


def _value(result, name):
    return float(result.params[name].value)


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
        Bayesian information criterion prefers by a margin (the evidence is in
        ``model_choice``); or the name of one model from
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


def _start_params(model, spec, x, y, start):
    """lmfit parameters from a start dict, or from the scan (and a shape-parameter grid)."""
    if start is None:
        best = model.scan(y, x).candidates[0]
        start = {"ic0_A": best.amplitude_A + best.background_A, "period_T": best.period_T,
                 "field_offset_T": best.field_offset_T, "background_A": best.background_A}
        if any(p.grid for p in spec.extra):
            start.update(shape_start(spec, x, y, best.period_T, best.field_offset_T))
    params = model.make_params(ic0_A=start["ic0_A"], period_T=start["period_T"],
                               field_offset_T=start["field_offset_T"])
    for p in spec.extra:
        if p.name in start:
            params[p.name].set(value=start[p.name])
    return params, max(float(start.get("background_A", 0.0)), 0.0)


def _fit_model(spec, x, y, noise, node_floor, loss, branch, start=None) -> PatternFit:
    """The fit of one model: start, local fit, far lobe, node floor, checks, numbers."""
    model = PatternModel(spec)
    scale = float(np.max(np.abs(y)))
    out = PatternFit(
        branch=branch, model=spec.name, points_used=int(x.size), noise_A=noise,
        ic_max_A=float(np.max(y)), field_min_T=float(x[0]), field_max_T=float(x[-1]),
        loss=loss, uncertainty=_uncertainty_text(loss), field_T=x, ic_A=y,
    )
    if scale <= 0:
        out.flags.append(make_flag("no-modulation", branch, reason="the current is zero"))
        return out

    f_scale = ROBUST_SCALE * noise
    params, background = _start_params(model, spec, x, y, start)
    result = local_fit(model, y, x, params, loss, f_scale)
    offset = _value(result, "field_offset_T")
    if start is None and not spec.periodic and (not x[0] <= offset <= x[-1] or nodes_in_window(
            spec, x, abs(_value(result, "period_T")), offset,
            extras_of(spec, result.params)) < MIN_NODES):
        far = far_lobe_start(x, y, model.unit_shape)
        if far is not None:
            alt_start = result.params.copy()
            for name, value in (("ic0_A", far.amplitude_A), ("period_T", far.period_T),
                                ("field_offset_T", far.field_offset_T)):
                alt_start[name].set(value=value)
            alt = local_fit(model, y, x, alt_start, loss, f_scale)
            if _chisq(alt) < _chisq(result):
                result = alt
    floor_evidence = None
    # With node_floor auto, the automatic choice has already tried the floor.
    decided = node_floor == "auto" and start is not None and "floor_gain" in start
    if decided and start["floor_gain"] is not None and not spec.periodic:
        with_floor = result.params.copy()
        with_floor["floor_A"].set(value=max(abs(start.get("floor_A", 0.0)),
                                            0.05 * abs(_value(result, "ic0_A"))), vary=True)
        result = local_fit(model, y, x, with_floor, loss, f_scale)
        floor_evidence = {"chisq_gain_over_noise": round(float(start["floor_gain"]), 2),
                          "threshold": FLOOR_DCHI2}
    elif not decided and node_floor != "off" and not spec.periodic:
        with_floor = result.params.copy()
        ic0 = abs(_value(result, "ic0_A"))
        with_floor["floor_A"].set(value=max(background, 0.05 * ic0), vary=True)
        floored = local_fit(model, y, x, with_floor, loss, f_scale)
        gain = (_chisq(result) - _chisq(floored)) / (_chisq(floored) / max(floored.nfree, 1))
        if node_floor == "on" or gain > FLOOR_DCHI2:
            result = floored
            floor_evidence = {"chisq_gain_over_noise": round(float(gain), 2),
                              "threshold": FLOOR_DCHI2}

    drop = (float(np.sum((y - y.mean()) ** 2)) - _chisq(result)) / noise**2
    if drop < MODULATION_DCHI2:
        out.flags.append(make_flag(
            "no-modulation", branch, chisq_drop_over_noise=round(drop, 2),
            threshold=MODULATION_DCHI2, noise_A=noise,
        ))
        return out
    if spec.periodic:
        offset_ok, offset_evidence = True, None  # no main lobe: the offset is modulo a period
    else:
        result, offset_ok, offset_evidence = check_lobe_assignment(
            model, y, x, result, lambda p: local_fit(model, y, x, p, loss, f_scale))
    fill(out, result, spec, x, offset_ok)
    if out.period_T is not None:
        withhold_if_poor(out, spec)
    add_flags(out, result, branch, offset_ok, offset_evidence, floor_evidence, f_scale)
    return out
