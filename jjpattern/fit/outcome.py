"""From a finished local fit to the reported numbers: what is given, what is withheld.

A number is given only where the data fix it: the period needs two nodes in the
window, the offset and Ic0 a located main lobe, and all of them a model that
describes the data (reduced chi-square against the model-free noise at most
``POOR_FIT_REDCHI``). Otherwise they are ``None`` and a flag says why.
"""

from __future__ import annotations

import numpy as np

from ..flags import make_flag
from .lobes import extras_of, node_list, nodes_in_window
from .result import FIT_KEYS

#: Nodes that must lie inside the window for the period to be identified.
MIN_NODES = 2
#: Fewer field steps (median) per fitted period than this: the sampling cannot tell the
#: period from its aliases (the scan itself searches down to four steps per period, and
#: about four points per period is the least that shows a lobe and its node).
MIN_STEPS_PER_PERIOD = 4.0
#: Reduced chi-square (against the model-free noise) above which the fit is poor and
#: its numbers are withheld.
POOR_FIT_REDCHI = 4.0
#: With a robust loss, points further than this from the fit (in noise units) are
#: counted as down-weighted outliers.
OUTLIER_SIGMAS = 4.0
#: Numbers withheld from a poor fit (with their standard errors).
WITHHELD = ("period_T", "field_offset_T", "ic0_A", "effective_area_m2", "node_floor_A",
            "asymmetry")


def _value(result, name):
    return float(result.params[name].value)


def _stderr(result, name):
    err = result.params[name].stderr
    return None if err is None or not np.isfinite(err) else float(err)


def fill(out, result, spec, x, offset_ok):
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
    out.fit_result = result
    out.residual_rms_A = float(np.sqrt(np.mean((out.ic_A - result.best_fit) ** 2)))
    # Residuals in noise units, weighted: for a robust fit the down-weighted points count
    # less, and the sum is scaled by what the right model gives under that loss.
    out.reduced_chisq = float(result.redchi)

    extras = extras_of(spec, result.params)
    out.nodes_observed = nodes_in_window(spec, x, period, offset, extras)
    u_nodes = node_list(spec, x, period, offset, extras)
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
    if spec.derive is not None:
        out.derived, out.derived_stderr = derived_numbers(spec, result, offset_ok)


def derived_numbers(spec, result, offset_ok):
    """The model's own derived numbers with standard errors from the covariance.

    Numbers that rest on Ic0 (keys ending in ``_A``) are left out when the main lobe
    is not located, as Ic0 itself is.
    """
    names = list(result.var_names or [])
    values = {k: float(v.value) for k, v in result.params.items()}
    base = {k: float(v) for k, v in spec.derive(values).items()}
    if not offset_ok:
        base = {k: v for k, v in base.items() if not k.endswith("_A")}
    errors = dict.fromkeys(base)
    covar = getattr(result, "covar", None)
    if covar is not None and names and covar.shape == (len(names), len(names)):
        grads = np.zeros((len(base), len(names)))
        for j, name in enumerate(names):
            step = 1e-6 * max(abs(values[name]), 1e-300)
            up, down = dict(values), dict(values)
            up[name] += step
            down[name] -= step
            hi, lo = spec.derive(up), spec.derive(down)
            grads[:, j] = [(hi[k] - lo[k]) / (2 * step) for k in base]
        var = np.einsum("ij,jk,ik->i", grads, covar, grads)
        errors = {k: float(np.sqrt(v)) if np.isfinite(v) and v >= 0 else None
                  for k, v in zip(base, var, strict=True)}
    return base, errors


def withhold_if_undersampled(out, x) -> bool:
    """Null the numbers of a fit whose period spans too few field steps; ``True`` if so."""
    step = float(np.median(np.diff(x)))
    steps = out.best_params["period_T"] / step if step > 0 else np.inf
    if steps >= MIN_STEPS_PER_PERIOD:
        return False
    _null_numbers(out)
    out.withheld = {
        "reason": "undersampled", "steps_per_period": round(float(steps), 3),
        "threshold": MIN_STEPS_PER_PERIOD, "field_step_T": step,
        "numbers": list(WITHHELD),
        "text": (f"the fitted period spans {steps:.2g} field steps, fewer than "
                 f"{MIN_STEPS_PER_PERIOD:g}: the sampling cannot tell it from its aliases, "
                 "so the period, field offset, Ic0, node floor and everything derived from "
                 "them are not given"),
    }
    return True


def _null_numbers(out):
    for key in WITHHELD:
        setattr(out, key, None)
        setattr(out, _stderr_name(key), None)
    for name in list(out.extra_params):
        out.extra_params[name] = None
        out.extra_stderr[name] = None
    out.derived, out.derived_stderr = {}, {}


def withhold_if_poor(out, spec) -> bool:
    """Null the numbers of a fit that does not describe the data; ``True`` if it did.

    Poor means a reduced chi-square above ``POOR_FIT_REDCHI``, or a shape parameter
    that ran to the end of the range the model describes (the long-junction table).
    """
    at_limit = [p.name for p in spec.extra if out.best_params.get(p.name) is not None
                and p.at_limit(out.best_params[p.name])]
    if not at_limit and (out.reduced_chisq is None or out.reduced_chisq <= POOR_FIT_REDCHI):
        return False
    given = [k for k in WITHHELD if getattr(out, k) is not None]
    _null_numbers(out)
    out.withheld = {
        "reason": "poor-fit",
        "reduced_chisq": round(out.reduced_chisq, 3),
        "threshold": POOR_FIT_REDCHI,
        "numbers": given + [p.name for p in spec.extra],
        "text": (f"the {spec.name} model misses the data (reduced chi-square "
                 f"{out.reduced_chisq:.3g} against the point-to-point noise, above "
                 f"{POOR_FIT_REDCHI:g}), so its period, field offset, Ic0, node floor and "
                 "everything derived from them are not given"),
    }
    if at_limit:
        out.withheld.update(reason="at-limit", parameters=at_limit, text=(
            f"the {spec.name} fit ran {', '.join(at_limit)} to the end of the range the "
            "model describes, so it does not describe the data and its period, Ic0 and "
            "everything derived from them are not given"))
    return True


def _stderr_name(key):
    for unit in ("_m2", "_T", "_A"):
        if key.endswith(unit):
            return f"{key[:-len(unit)]}_stderr{unit}"
    return f"{key}_stderr"


def add_flags(out, result, branch, offset_ok, offset_evidence, floor_evidence, f_scale):
    """The fit's flags: few lobes, main lobe outside or ambiguous, poor fit, outliers."""
    if floor_evidence is not None:
        out.floor_evidence = floor_evidence
    if out.period_T is None and out.withheld is None:
        out.flags.append(make_flag(
            "few-lobes", branch, nodes_in_window=out.nodes_observed, required=MIN_NODES,
            trial_period_T=out.best_params["period_T"],
        ))
        return
    if out.withheld is not None and out.withheld["reason"] == "undersampled":
        evidence = {k: out.withheld[k] for k in ("steps_per_period", "threshold",
                                                 "field_step_T")}
        out.flags.append(make_flag("undersampled", branch, **evidence,
                                   trial_period_T=out.best_params["period_T"]))
    elif out.withheld is not None:
        out.flags.append(make_flag(
            "poor-fit", branch, reduced_chisq=round(out.reduced_chisq, 3),
            threshold=POOR_FIT_REDCHI, noise_A=out.noise_A, model=out.model,
            reason=out.withheld["reason"], withheld=out.withheld["numbers"]))
    else:
        offset = out.best_params["field_offset_T"]
        if not offset_ok:
            out.flags.append(make_flag("main-lobe-ambiguous", branch, **offset_evidence))
        elif not out.field_min_T <= offset <= out.field_max_T:
            evidence = dict(offset_evidence or {})
            evidence.update(field_offset_T=offset, window_T=[out.field_min_T, out.field_max_T])
            out.flags.append(make_flag("main-lobe-outside", branch, **evidence))
    if out.loss != "linear":
        far = np.abs(out.ic_A - result.best_fit) > OUTLIER_SIGMAS * out.noise_A
        out.points_downweighted = int(np.sum(far))
        if out.points_downweighted:
            out.flags.append(make_flag(
                "outliers-downweighted", branch, points=out.points_downweighted,
                loss=out.loss, f_scale_A=f_scale, beyond_noise_units=OUTLIER_SIGMAS,
                lowest_weight=round(float(np.min(result.robust_weights)), 4),
            ))
