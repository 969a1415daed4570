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
from ..physics.models import get_model
from ..sampling import tidy
from .far import far_lobe_start
from .models import PatternModel
from .noise import difference_noise
from .result import FIT_KEYS, PatternFit

#: Below this drop in chi-square (in noise units) from a flat line to the fitted
#: pattern, the data show no modulation.
MODULATION_DCHI2 = 30.0
#: Nodes that must lie inside the window for the period to be identified.
MIN_NODES = 2
#: A node floor is kept when it lowers chi-square by more than this (noise units).
FLOOR_DCHI2 = 10.0
#: The next-best lobe assignment must be worse by this much (noise units), or
#: the offset is withheld.
OFFSET_DCHI2 = 16.0
#: Most lobe-to-lobe steps taken when looking for the main lobe outside the window.
MAX_LOBE_WALK = 40
#: Reduced chi-square (against the model-free noise) above which the fit is poor.
POOR_FIT_REDCHI = 4.0
#: Robust loss scale in units of the model-free noise.
ROBUST_SCALE = 2.0
#: With a robust loss, points further than this from the fit (in noise units) are
#: counted as down-weighted outliers.
OUTLIER_SIGMAS = 4.0

LOSSES = ("linear", "soft_l1", "huber", "cauchy")
NODE_FLOOR = ("auto", "on", "off")


def robust_weight(z2, loss):
    """IRLS weight of each point for a scipy loss, ``rho'(z)`` with ``z = (r / f_scale)^2``."""
    if loss == "soft_l1":
        return 1.0 / np.sqrt(1.0 + z2)
    if loss == "huber":
        return np.where(z2 <= 1.0, 1.0, 1.0 / np.sqrt(np.maximum(z2, 1.0)))
    if loss == "cauchy":
        return 1.0 / (1.0 + z2)
    return np.ones_like(z2)


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


def _stderr(result, name):
    err = result.params[name].stderr
    return None if err is None or not np.isfinite(err) else float(err)


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
    geometry: str = "rectangular",
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
        Name of the pattern model to fit, one of
        :func:`jjpattern.physics.models.model_names` (``rectangular``, ``circular``,
        ``two-channel``, ...); a model's extra parameters (the two-channel
        asymmetry) are fitted too.
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
        the data cannot tell.
    """
    spec = get_model(geometry)
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
    model = PatternModel(spec)
    noise = difference_noise(x, y)
    scale = float(np.max(np.abs(y)))
    noise = max(noise, 1e-9 * scale) if np.isfinite(noise) else 1e-9 * scale
    out = PatternFit(
        branch=branch, model=geometry, points_used=int(x.size), noise_A=noise,
        ic_max_A=float(np.max(y)), field_min_T=float(x[0]), field_max_T=float(x[-1]),
        loss=loss, uncertainty=_uncertainty_text(loss), field_T=x, ic_A=y,
    )
    if scale <= 0:
        out.flags.append(make_flag("no-modulation", branch, reason="the current is zero"))
        return out

    best = model.scan(y, x).candidates[0]
    f_scale = ROBUST_SCALE * noise
    params = model.make_params(
        ic0_A=best.amplitude_A + best.background_A,
        period_T=best.period_T,
        field_offset_T=best.field_offset_T,
    )
    result = local_fit(model, y, x, params, loss, f_scale)
    offset = _value(result, "field_offset_T")
    if not x[0] <= offset <= x[-1] or _nodes_in_window(
            spec, x, abs(_value(result, "period_T")), offset) < MIN_NODES:
        far = far_lobe_start(x, y, model.unit_shape)
        if far is not None:
            start = model.make_params(ic0_A=far.amplitude_A, period_T=far.period_T,
                                      field_offset_T=far.field_offset_T)
            alt = local_fit(model, y, x, start, loss, f_scale)
            if _chisq(alt) < _chisq(result):
                result = alt
    floor_evidence = None
    if node_floor != "off" and not spec.periodic:
        with_floor = result.params.copy()
        ic0 = abs(_value(result, "ic0_A"))
        with_floor["floor_A"].set(value=max(best.background_A, 0.05 * ic0), vary=True)
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
        result, offset_ok, offset_evidence = _check_lobe_assignment(
            model, y, x, result, loss, f_scale)
    _fill(out, result, spec, x, offset_ok)
    _add_flags(out, result, branch, offset_ok, offset_evidence, floor_evidence, f_scale)
    return out


def _node_list(spec, x, period, offset):
    """Reduced flux of every node that could fall between the window's ends."""
    reach = max(abs(x[0] - offset), abs(x[-1] - offset)) / period
    return np.asarray(spec.node_flux(int(np.ceil(reach)) + 2), dtype=float)


def _nodes_in_window(spec, x, period, offset):
    """Nodes inside the window with data on both sides (a tenth of a period)."""
    u_nodes = _node_list(spec, x, period, offset)
    nodes = np.concatenate([offset - u_nodes * period, offset + u_nodes * period])
    margin = 0.1 * period
    return int(np.sum((nodes > x[0] + margin) & (nodes < x[-1] - margin)))


def _check_lobe_assignment(model, y, x, result, loss, f_scale):
    """When the main lobe is near or beyond an edge, test which lobe is the main one.

    Refits with the offset started one lobe over walk downhill in chi-square
    until no neighbour is better; the margin to the next-best assignment then
    decides whether the offset can be trusted. Returns the best result, that
    verdict and its evidence.
    """
    period = abs(_value(result, "period_T"))
    origin = _value(result, "field_offset_T")
    reach = float(model.spec.node_flux(1)[0]) * period
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
        alt = local_fit(model, y, x, params, loss, f_scale)
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


def _fill(out, result, spec, x, offset_ok):
    """Copy the fitted numbers into ``out``, withholding what the data do not fix."""
    period = abs(_value(result, "period_T"))
    offset = _value(result, "field_offset_T")
    if spec.periodic:
        offset = (offset + 0.5 * period) % period - 0.5 * period  # the copy nearest zero field
    floor = abs(_value(result, "floor_A"))
    out.best_params = {
        "ic0_A": abs(_value(result, "ic0_A")), "period_T": period,
        "field_offset_T": offset, "floor_A": floor,
    }
    for p in spec.extra:
        value = _value(result, p.name)
        value = abs(value) if p.even else value
        out.best_params[p.name] = out.extra_params[p.name] = value
        out.extra_stderr[p.name] = _stderr(result, p.name)
        if p.name in FIT_KEYS:  # the JSON keys that exist, such as asymmetry
            setattr(out, p.name, value)
            setattr(out, f"{p.name}_stderr", out.extra_stderr[p.name])
    out.lmfit_result = result
    nfree = max(result.nfree, 1)
    out.residual_rms_A = float(np.sqrt(np.mean((out.ic_A - result.best_fit) ** 2)))
    # Weighted residuals: for a robust fit the down-weighted points count less.
    out.reduced_chisq = float(np.sum(result.residual**2) / nfree / out.noise_A**2)

    out.nodes_observed = _nodes_in_window(spec, x, period, offset)
    u_nodes = _node_list(spec, x, period, offset)
    centres = np.concatenate([[0.0], 0.5 * (u_nodes[:-1] + u_nodes[1:])])
    lobes = np.concatenate([offset - centres[1:] * period, offset + centres * period])
    out.lobes_observed = int(np.sum((lobes >= x[0]) & (lobes <= x[-1])))
    if out.nodes_observed < MIN_NODES:
        return
    out.period_T = period
    out.period_stderr_T = _stderr(result, "period_T")
    out.effective_area_m2 = _value(result, "effective_area_m2")
    out.effective_area_stderr_m2 = _stderr(result, "effective_area_m2")
    if result.params["floor_A"].vary:
        out.node_floor_A = floor
        out.node_floor_stderr_A = _stderr(result, "floor_A")
    if offset_ok:
        out.field_offset_T = offset
        out.field_offset_stderr_T = _stderr(result, "field_offset_T")
        out.ic0_A = out.best_params["ic0_A"]
        out.ic0_stderr_A = _stderr(result, "ic0_A")


def _add_flags(out, result, branch, offset_ok, offset_evidence, floor_evidence, f_scale):
    if out.period_T is None:
        out.flags.append(make_flag(
            "few-lobes", branch, nodes_in_window=out.nodes_observed, required=MIN_NODES,
            trial_period_T=out.best_params["period_T"],
        ))
        return
    offset = out.best_params["field_offset_T"]
    if not offset_ok:
        out.flags.append(make_flag("main-lobe-ambiguous", branch, **offset_evidence))
    elif not out.field_min_T <= offset <= out.field_max_T:
        evidence = dict(offset_evidence or {})
        evidence.update(field_offset_T=offset, window_T=[out.field_min_T, out.field_max_T])
        out.flags.append(make_flag("main-lobe-outside", branch, **evidence))
    if out.reduced_chisq > POOR_FIT_REDCHI:
        out.flags.append(make_flag(
            "poor-fit", branch, reduced_chisq=round(out.reduced_chisq, 3),
            threshold=POOR_FIT_REDCHI, noise_A=out.noise_A,
        ))
    if floor_evidence is not None:
        out.floor_evidence = floor_evidence
    if out.loss != "linear":
        far = np.abs(out.ic_A - result.best_fit) > OUTLIER_SIGMAS * out.noise_A
        out.points_downweighted = int(np.sum(far))
        if out.points_downweighted:
            out.flags.append(make_flag(
                "outliers-downweighted", branch, points=out.points_downweighted,
                loss=out.loss, f_scale_A=f_scale, beyond_noise_units=OUTLIER_SIGMAS,
                lowest_weight=round(float(np.min(result.robust_weights)), 4),
            ))
