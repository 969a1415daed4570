"""Diagnostics of an analysis: current density, shape flags, geometry and materials."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from ..fit.reported import weighted_fit
from ..physics import geometry as geo
from ..physics.models import get_model
from ..result import stderr_key
from .reconstruct import reconstruct
from .shape import (
    branch_flags,
    drift_flag,
    floor_test,
    long_junction_flag,
    shape_flags,
)


@dataclass
class GeometryInputs:
    """Optional junction geometry and materials, SI (metres, A/m^2)."""

    length_m: float | None = None
    width_m: float | None = None
    barrier_m: float | None = None
    t1_m: float | None = None
    t2_m: float | None = None
    lambda1_m: float | None = None
    lambda2_m: float | None = None
    jc_A_m2: float | None = None
    planar: bool = False

    def given(self) -> dict:
        return {k: v for k, v in self.__dict__.items() if v not in (None, False)}


def _half_periods(fit):
    """Period fitted separately below and above the offset (offset and floor held)."""
    result = fit.fit_result
    if fit.field_offset_T is None or result is None:
        return None
    x, y, b0, p = fit.field_T, fit.ic_A, fit.field_offset_T, fit.period_T
    spec = get_model(fit.model)
    first = float(spec.nodes(1, fit.extra_params)[0])
    units = result.units
    start = units.to_unit({k: q.value for k, q in result.params.items()
                           if k != "effective_area_m2"})
    names = [n for n in result.var_names if n not in ("field_offset_T", "floor_A")]
    out = []
    for side in (x < b0, x > b0):
        if np.sum(side) < 20 or np.ptp(x[side]) < (first + 1.5) * p:
            return None
        params, covar, _ = weighted_fit(spec, units.field(x[side]), y[side] / units.scale_A,
                                        start, names, 1.0)
        k = names.index("period_T")
        err = None if covar is None else float(np.sqrt(covar[k, k])) * units.span_T
        out.append((abs(params["period_T"]) * units.span_T, err))
    return out


def _density(fit, method, rng, resamples):
    # Read against a uniform junction of the fitted model (a disc is not a rectangle).
    return reconstruct(fit.field_T, fit.ic_A, fit.period_T, fit.field_offset_T, fit.noise_A,
                       rng, method=method, resamples=resamples, model=fit.model)


def geometry_block(fits, inputs: GeometryInputs) -> dict | None:
    """Derived numbers from the measured period and whatever geometry was given.

    Each derived number also gets a standard error (key ``..._stderr`` before its
    unit) from the period's and Ic0's, by central differences combined with their
    correlation in the fit's covariance (the geometry given is taken as exact). A
    withheld fit gives none. Where the model says what Ic0 is (a long junction's
    ``jc_times_area_A``), Jc uses that.
    """
    given = inputs.given()
    fit = next((f for f in fits if f.period_T is not None), None)
    if not given or fit is None:
        return None
    ic0 = fit.derived.get("jc_times_area_A", fit.ic0_A) if fit.ic0_A is not None else None
    ic0_err = fit.derived_stderr.get("jc_times_area_A", fit.ic0_stderr_A) if ic0 else None
    block = _derived(fit.period_T, ic0, fit.effective_area_m2, inputs, fit)
    # Each number's change for one standard error of the period and of Ic0; the two
    # combine with their correlation from the fit's covariance.
    steps = [{}, {}]
    for which, err in ((0, fit.period_stderr_T), (1, ic0_err)):
        if not err or (which == 1 and ic0 is None):
            continue
        args = [fit.period_T, ic0]
        up, down = list(args), list(args)
        up[which] += err
        down[which] -= err
        hi = _derived(up[0], up[1], geo.PHI0_WB / up[0], inputs, fit)
        lo = _derived(down[0], down[1], geo.PHI0_WB / down[0], inputs, fit)
        for key, value in block.items():
            if isinstance(value, float) and isinstance(hi.get(key), float) and isinstance(
                    lo.get(key), float):
                steps[which][key] = 0.5 * (hi[key] - lo[key])
    rho = 0.0 if "jc_times_area_A" in fit.derived else _correlation(fit, "period_T", "ic0_A")
    errors = {}
    for key in set(steps[0]) | set(steps[1]):
        a, b = steps[0].get(key, 0.0), steps[1].get(key, 0.0)
        errors[key] = max(a * a + b * b + 2.0 * rho * a * b, 0.0)
    ell, ell_err = fit.derived.get("length_over_josephson_depth"), fit.derived_stderr.get(
        "length_over_josephson_depth")
    if "josephson_depth_from_pattern_m" in block and ell and ell_err:
        errors["josephson_depth_from_pattern_m"] = (inputs.length_m * ell_err / ell**2) ** 2
    out = {"inputs": given, "branch": fit.branch, "model": fit.model}
    for key, value in block.items():
        out[key] = value
        if key in errors:
            out[stderr_key(key)] = float(np.sqrt(errors[key]))
    return out


def _correlation(fit, first: str, second: str) -> float:
    """Correlation of two reported magnitudes in the fit's covariance (0 if unknown).

    The patterns are even in period and Ic0 and the fit is unbounded, so a parameter
    may converge negative; the magnitudes' correlation carries the signs' product.
    """
    result = getattr(fit, "fit_result", None)
    names = list(getattr(result, "var_names", None) or [])
    covar = getattr(result, "covar", None)
    if covar is None or first not in names or second not in names:
        return 0.0
    i, j = names.index(first), names.index(second)
    scale = np.sqrt(covar[i, i] * covar[j, j])
    if not np.isfinite(scale) or scale <= 0:
        return 0.0
    sign = np.sign(result.params[first].value) * np.sign(result.params[second].value)
    return float(np.clip(sign * covar[i, j] / scale, -1.0, 1.0))


def _derived(period_T, ic0_A, area_m2, inputs: GeometryInputs, fit=None) -> dict:
    """The numbers; ``ic0_A`` is Jc times the junction area for the model fitted."""
    out = {}
    length = inputs.length_m
    long_fit = fit is not None and "length_over_josephson_depth" in fit.derived
    if length:
        out["magnetic_thickness_m"] = geo.PHI0_WB / (period_T * length)
    if inputs.barrier_m is not None and inputs.t1_m and inputs.lambda1_m:
        dm = geo.magnetic_thickness_m(inputs.barrier_m, inputs.lambda1_m, inputs.t1_m,
                                      inputs.lambda2_m, inputs.t2_m)
        out["expected_magnetic_thickness_m"] = dm
        if length:
            out["expected_period_T"] = geo.expected_period_T(length, dm)
            out["period_over_expected"] = period_T / out["expected_period_T"]
    if inputs.barrier_m is not None and inputs.t1_m and length:
        lam = geo.london_depth_from_period(period_T, length, inputs.barrier_m, inputs.t1_m,
                                           inputs.t2_m, inputs.lambda2_m)
        out["london_depth_from_period_m"] = lam
        out["london_depth_assumption"] = ("lambda1 with lambda2 as given" if inputs.lambda2_m
                                          else "both electrodes share one lambda")
    jc = inputs.jc_A_m2
    if long_fit and length:
        # The pattern itself gives L / lambda_J, so lambda_J needs only the length.
        out["josephson_depth_from_pattern_m"] = length / max(
            fit.derived["length_over_josephson_depth"], 1e-300)
    if jc is None and ic0_A and length and inputs.width_m:
        jc = ic0_A / (length * inputs.width_m)
        out["jc_from_pattern_A_m2" if long_fit else "jc_from_ic0_A_m2"] = jc
    lam1 = inputs.lambda1_m or out.get("london_depth_from_period_m")
    if jc and inputs.barrier_m is not None and inputs.t1_m and lam1:
        ds = geo.current_thickness_m(inputs.barrier_m, lam1, inputs.t1_m, inputs.lambda2_m,
                                     inputs.t2_m)
        out["current_thickness_m"] = float(ds)
        out["josephson_depth_m"] = float(geo.josephson_depth_m(jc, ds))
        if length:
            out["length_over_josephson_depth"] = length / out["josephson_depth_m"]
    if inputs.planar:
        out.update(_planar(period_T, area_m2, inputs, out.get("expected_magnetic_thickness_m")))
    return out


def _planar(period_T, area_m2, inputs: GeometryInputs, thickness_m) -> dict:
    """Numbers of a planar (thin-film) junction, kept apart from the bulk ones.

    The focusing factor is the trade's: the effective area over the bulk area
    W d' that the field would thread without focusing by the films.
    """
    out = {"applies": ("planar junction: the period is set by flux focusing in the films "
                       "(1.84 Phi0/W^2 for a thin strip), so the bulk numbers above (magnetic "
                       "thickness and London depth from the period, which assume a field "
                       "threading L d') do not apply; the planar numbers do")}
    if inputs.width_m:
        out["planar_expected_period_T"] = geo.planar_period_T(inputs.width_m)
        out["planar_period_over_expected"] = period_T / out["planar_expected_period_T"]
        out["planar_area_over_thin_film_estimate"] = (
            area_m2 / (inputs.width_m**2 / 1.84))
        if thickness_m:
            out["focusing_factor"] = geo.focusing_factor(area_m2, inputs.width_m * thickness_m)
    return out


def diagnose(fits, *, seed=0, resamples=200, geometry: GeometryInputs | None = None,
             criterion_floor_A=0.0) -> dict:
    """Current densities, shape flags and the geometry block of fitted branches.

    Returns ``{"current_density": {branch: ...}, "geometry": dict | None, "flags": [...]}``.
    """
    rng = np.random.default_rng(seed)
    densities = {}
    flags = []
    for fit in fits:
        if fit.period_T is None and getattr(fit, "withheld", None):
            # A model that misses the data gives no numbers, but the shape of the data
            # still speaks: the shape flags read it at the trial period and offset.
            flags += shape_flags(_trial(fit), criterion_floor_A=criterion_floor_A)
            continue
        if fit.period_T is None:
            continue
        density = None
        # The node-floor test once, for the reconstruction's method and the flags.
        floor = floor_test(fit, criterion_floor_A)
        centred = (fit.field_offset_T is not None
                   and fit.field_T[0] < fit.field_offset_T < fit.field_T[-1])
        if centred and _reconstructable(fit):
            # Lifted nodes mean an asymmetric profile: then do not assume symmetry.
            lifted = bool(floor and floor["lifted"])
            density = _density(fit, "support" if lifted else "symmetric", rng, resamples)
            densities[fit.branch] = density
        flags += shape_flags(fit, criterion_floor_A=criterion_floor_A, density=density,
                             floor=floor)
        halves = _half_periods(fit)
        if halves:
            flags += drift_flag(fit, halves)
    flags += branch_flags(fits)
    block = geometry_block(fits, geometry or GeometryInputs())
    pattern_long = next((f for f in fits if f.derived.get("length_over_josephson_depth")), None)
    if pattern_long is not None:
        flags += long_junction_flag(pattern_long.branch, None, None,
                                    pattern_ratio=pattern_long.derived[
                                        "length_over_josephson_depth"], model=pattern_long.model)
    elif block and "length_over_josephson_depth" in block:
        flags += long_junction_flag(block["branch"], geometry.length_m,
                                    block["josephson_depth_m"])
    return {"current_density": densities, "geometry": block, "flags": flags}


def _reconstructable(fit) -> bool:
    """The Dynes-Fulton reconstruction assumes a short junction with a central maximum: not
    for a long junction (self-field), a 0-pi pattern or a periodic (two-channel) one."""
    spec = get_model(fit.model)
    return (spec.central_peak and not spec.periodic
            and "length_over_josephson_depth" not in fit.derived)


def _trial(fit):
    """A copy of a withheld fit carrying its trial numbers, for the shape flags only.

    The node floor goes with them where one was fitted to a pattern that misses the
    model, with its standard error (scaled by the poor reduced chi-square, so wider):
    lifted nodes are one reason a pattern misses the sinc, and the node-floor test is
    what says so. Not for an undersampled pattern, whose nodes fall between the points.
    """
    p = fit.best_params
    floor = err = None
    result = fit.fit_result
    if (fit.withheld.get("reason") != "undersampled" and result is not None
            and "floor_A" in result.params and result.params["floor_A"].vary):
        floor, err = p["floor_A"], result.params["floor_A"].stderr
        err = float(err) if err is not None and np.isfinite(err) else None
        if not _minima_lifted(fit, p):
            floor = err = None
    # Not withheld in the copy, so that its curve (model_A) is drawn at the trial numbers.
    return dataclasses.replace(fit, period_T=p["period_T"], field_offset_T=p["field_offset_T"],
                               ic0_A=p["ic0_A"], node_floor_A=floor, node_floor_stderr_A=err,
                               extra_params={k: p[k] for k in fit.extra_params if k in p},
                               withheld=None)


def _minima_lifted(fit, p) -> bool:
    """Whether the data themselves stay up near the first trial nodes of a withheld fit.

    A model that misses the data can fit a floor for nodes that are only displaced
    (current at the edges moves them off the sinc's): then the data still fall to zero
    within a third of a period of the trial node, where some point measured as
    ``|Ic + noise|`` comes within the noise (and one step's rise) of zero. Lifted: the
    smallest Ic near each first node (the most lifted and least displaced ones), less
    its rise to the next point, exceeds twice the noise.
    Only withheld fits are read so, and those are the low-noise ones.
    """
    x, y, period, b0 = fit.field_T, fit.ic_A, p["period_T"], p["field_offset_T"]
    extras = {k: p[k] for k in fit.extra_params if k in p}
    first = float(get_model(fit.model).nodes(1, extras)[0])
    lows = []
    for node in (b0 - first * period, b0 + first * period):
        near = np.flatnonzero(np.abs(x - node) < period / 3)
        if near.size >= 3 and x[0] < node < x[-1]:
            i = near[np.argmin(y[near])]
            # A sampled zero is a V: the lowest point sits up to one step's rise above it.
            rise = max(abs(y[j] - y[i]) for j in (i - 1, i + 1) if 0 <= j < y.size)
            lows.append(float(y[i] - rise))
    return bool(lows) and min(lows) > 2.0 * fit.noise_A
