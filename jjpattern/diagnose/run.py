"""Diagnostics of an analysis: current density, shape flags, geometry and materials."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..fit.engine import local_fit
from ..fit.models import MODELS
from ..physics import geometry as geo
from ..physics.patterns import node_flux
from ..result import stderr_key
from .reconstruct import reconstruct
from .shape import branch_flags, drift_flag, lifted_floor_A, long_junction_flag, shape_flags


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
    if fit.field_offset_T is None or fit.lmfit_result is None:
        return None
    x, y, b0, p = fit.field_T, fit.ic_A, fit.field_offset_T, fit.period_T
    first = float(node_flux(fit.model, 1)[0])
    model = MODELS[fit.model]()
    out = []
    for side in (x < b0, x > b0):
        if np.sum(side) < 20 or np.ptp(x[side]) < (first + 1.5) * p:
            return None
        params = fit.lmfit_result.params.copy()
        params["field_offset_T"].set(vary=False)
        params["floor_A"].set(vary=False)
        res = local_fit(model, y[side], x[side], params, "linear", 1.0)
        err = res.params["period_T"].stderr
        out.append((abs(res.params["period_T"].value), err))
    return out


def _density(fit, method, rng, resamples):
    return reconstruct(fit.field_T, fit.ic_A, fit.period_T, fit.field_offset_T, fit.noise_A,
                       rng, method=method, resamples=resamples)


def geometry_block(fits, inputs: GeometryInputs) -> dict | None:
    """Derived numbers from the measured period and whatever geometry was given.

    Each derived number also gets a standard error (key ``..._stderr`` before its
    unit) from the period's and Ic0's, by central differences (the geometry given
    is taken as exact).
    """
    given = inputs.given()
    fit = next((f for f in fits if f.period_T is not None), None)
    if not given or fit is None:
        return None
    area = fit.effective_area_m2
    block = _derived(fit.period_T, fit.ic0_A, area, inputs)
    errors = {}
    for which, err in ((0, fit.period_stderr_T), (1, fit.ic0_stderr_A)):
        if not err or (which == 1 and fit.ic0_A is None):
            continue
        args = [fit.period_T, fit.ic0_A]
        up, down = list(args), list(args)
        up[which] += err
        down[which] -= err
        hi = _derived(up[0], up[1], geo.PHI0_WB / up[0], inputs)
        lo = _derived(down[0], down[1], geo.PHI0_WB / down[0], inputs)
        for key, value in block.items():
            if isinstance(value, float) and isinstance(hi.get(key), float) and isinstance(
                    lo.get(key), float):
                errors[key] = errors.get(key, 0.0) + (0.5 * (hi[key] - lo[key])) ** 2
    out = {"inputs": given, "branch": fit.branch}
    for key, value in block.items():
        out[key] = value
        if key in errors:
            out[stderr_key(key)] = float(np.sqrt(errors[key]))
    return out


def _derived(period_T, ic0_A, area_m2, inputs: GeometryInputs) -> dict:
    out = {}
    length = inputs.length_m
    if length:
        out["magnetic_thickness_m"] = geo.PHI0_WB / (period_T * length)
    if inputs.barrier_m is not None and inputs.t1_m and inputs.lambda1_m and length:
        dm = geo.magnetic_thickness_m(inputs.barrier_m, inputs.lambda1_m, inputs.t1_m,
                                      inputs.lambda2_m, inputs.t2_m)
        out["expected_magnetic_thickness_m"] = dm
        out["expected_period_T"] = geo.expected_period_T(length, dm)
        out["period_over_expected"] = period_T / out["expected_period_T"]
    if inputs.barrier_m is not None and inputs.t1_m and length:
        lam = geo.london_depth_from_period(period_T, length, inputs.barrier_m, inputs.t1_m,
                                           inputs.t2_m, inputs.lambda2_m)
        out["london_depth_from_period_m"] = lam
        out["london_depth_assumption"] = ("lambda1 with lambda2 as given" if inputs.lambda2_m
                                          else "both electrodes share one lambda")
    jc = inputs.jc_A_m2
    if jc is None and ic0_A and length and inputs.width_m:
        jc = ic0_A / (length * inputs.width_m)
        out["jc_from_ic0_A_m2"] = jc
    lam1 = inputs.lambda1_m or out.get("london_depth_from_period_m")
    if jc and inputs.barrier_m is not None and inputs.t1_m and lam1:
        ds = geo.current_thickness_m(inputs.barrier_m, lam1, inputs.t1_m, inputs.lambda2_m,
                                     inputs.t2_m)
        out["current_thickness_m"] = float(ds)
        out["josephson_depth_m"] = float(geo.josephson_depth_m(jc, ds))
        if length:
            out["length_over_josephson_depth"] = length / out["josephson_depth_m"]
    if inputs.planar and inputs.width_m:
        out["planar_expected_period_T"] = geo.planar_period_T(inputs.width_m)
        out["planar_period_over_expected"] = period_T / out["planar_expected_period_T"]
    if inputs.planar and length and inputs.width_m:
        # Planar films focus the field: the effective area exceeds the junction's own.
        out["focusing_factor"] = geo.focusing_factor(area_m2, length * inputs.width_m)
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
        if fit.period_T is None:
            continue
        density = None
        centred = (fit.field_offset_T is not None
                   and fit.field_T[0] < fit.field_offset_T < fit.field_T[-1])
        if centred:
            # Lifted nodes mean an asymmetric profile: then do not assume symmetry.
            lifted = lifted_floor_A(fit, criterion_floor_A) is not None
            density = _density(fit, "support" if lifted else "symmetric", rng, resamples)
            densities[fit.branch] = density
        flags += shape_flags(fit, criterion_floor_A=criterion_floor_A, density=density)
        halves = _half_periods(fit)
        if halves:
            flags += drift_flag(fit, halves)
    flags += branch_flags(fits)
    block = geometry_block(fits, geometry or GeometryInputs())
    if block and "length_over_josephson_depth" in block:
        flags += long_junction_flag(block["branch"], geometry.length_m,
                                    block["josephson_depth_m"])
    return {"current_density": densities, "geometry": block, "flags": flags}
