"""Automatic model choice: fit every registered model quickly, rank them by BIC.

The reference model (the first registered, the uniform rectangle) gets the start the
full fit would use (its own scan, the far-lobe start when the main lobe may lie outside)
and every other model starts from the reference's converged fit (``starts.rival_start``),
fitted first on every k-th point and screened there when far behind; where no model
then describes the data, each also gets its own scan. Each is a plain scipy
least-squares fit with the node floor decided as in the full fit. The criterion is the
Bayesian information criterion with the model-free noise as the known variance,

    BIC = chi^2 / sigma^2 + k ln(n)

(Schwarz, Ann. Stat. 6, 461 (1978)); k counts the fitted parameters. The model
with the lowest BIC is a clear winner when every other model is at least
``MARGIN`` above it (Kass and Raftery, J. Am. Stat. Assoc. 90, 773 (1995): a
difference above 10 is very strong evidence); otherwise the choice is a near
tie and the simplest model within the margin of the lowest is reported (fewest
parameters, then registry order). A model other than the reference is reported only
where it describes the data (``_unlike``). Because the noise
estimate never underestimates (see ``noise.py``), the criterion errs towards the
simpler model."""

from __future__ import annotations

from dataclasses import dataclass
from types import SimpleNamespace

import numpy as np

from ..physics.models import get_model, model_names
from .far import far_lobe_start, periodic_candidate
from .floor import floor_trial_start
from .lsq import Units, expected_weighted_chisq, free_names, full_params, robust_weight, solve
from .runs import runs_ratio, runs_z
from .scan import scan_pattern
from .starts import rival_start, shape_start
from .verdict import (
    CRITERION,
    DESCRIBES_REDCHI,
    MARGIN,
    RUNS_RATIO,
    RUNS_Z,
    Trial,
    decide,
    describes,
    joint_choice,
)

__all__ = ["CRITERION", "DESCRIBES_REDCHI", "MARGIN", "RUNS_RATIO", "RUNS_Z", "ModelChoice",
           "Trial", "choose_model", "joint_choice", "quick_fit", "trial_fit"]

#: Rivals are first fitted on about this many points (every k-th) ...
_SCREEN_POINTS = 250
#: ... and left there when that fit (with the floor decided on the subset), evaluated on all
#: points, stays this far (BIC, noise units) above the reference: twenty margins, where the
#: subset fit's distance from the least chi-square on all points (a few units) cannot matter.
SCREEN_BIC = 200.0


@dataclass
class ModelChoice:
    """The outcome: the model to report, the start for its full fit, the evidence."""

    chosen: str
    start: dict
    block: dict


def quick_fit(spec, x, y, start: dict, *, floor: bool, loss: str, f_scale: float,
              tol: float | None = None):
    """Least squares of one model from ``start`` with scipy alone,
    in the normalised units of ``lsq`` (``x``, ``y`` and ``start`` all normalised).

    Returns ``(params, weighted chi-square, number of fitted parameters)``; with a
    robust loss the chi-square uses the robust weights at the solution, as the full
    fit's reduced chi-square does.
    """
    local = solve(spec, x, y, start, floor=floor, loss=loss, f_scale=f_scale, tol=tol)
    return dict(local.params), local.chisq, len(local.free)


#: After the first model's scan, the others search periods within these factors of its
#: best period (a 0-pi pattern fitted as a sinc shows twice its period, a circular one
#: about 1.2 times); this halves their cost.
_PERIOD_REACH = (0.25, 4.0)
#: ... and a periodic pattern within these: its field period is the spacing of the side
#: lobes the first scan matched (or twice it, where its minima sit half a period apart).
_PERIODIC_REACH = (0.45, 2.5)


class _Scans:
    """Scans shared between models: one per distinct unit shape, one periodic scan."""

    def __init__(self, x, y):
        self.x, self.y = x, y
        self._cache = {}
        self._scale = None

    def best(self, shape, periodic=False):
        if shape not in self._cache:
            factors = _PERIODIC_REACH if periodic else _PERIOD_REACH
            reach = (None if self._scale is None else
                     (factors[0] * self._scale, factors[1] * self._scale))
            # A periodic pattern's offset is modulo a period: offsets within the window.
            found = scan_pattern(self.x, self.y, shape, extend=0.0 if periodic else 1.0,
                                 period_range=reach)
            self._cache[shape] = found.candidates[0] if found.candidates else None
            if self._scale is None and self._cache[shape] is not None:
                self._scale = self._cache[shape].period_T
        return self._cache[shape]

    def far(self, shape):
        key = ("far", shape)
        if key not in self._cache:
            if "periodic" not in self._cache:
                self._cache["periodic"] = periodic_candidate(self.x, self.y)
            self._cache[key] = far_lobe_start(self.x, self.y, shape,
                                              periodic=self._cache["periodic"])
        return self._cache[key]


def model_start(spec, scans: _Scans, x, y) -> dict | None:
    """The start of the local fit: the scan's best candidate (and the shape grid)."""
    cand = scans.best(spec.unit_shape, spec.periodic)
    if cand is None:
        return None
    start = {"ic0_A": cand.amplitude_A + cand.background_A, "period_T": cand.period_T,
             "field_offset_T": cand.field_offset_T, "floor_A": 0.0}
    if any(p.grid for p in spec.extra):
        start.update(shape_start(spec, x, y, cand.period_T, cand.field_offset_T))
    return start


def _nodes_inside(spec, x, params):
    period, offset = abs(params["period_T"]), params["field_offset_T"]
    extras = {p.name: params[p.name] for p in spec.extra}
    reach = max(abs(x[0] - offset), abs(x[-1] - offset)) / period
    u = np.asarray(spec.nodes(int(np.ceil(reach)) + 2, extras), dtype=float)
    nodes = np.concatenate([offset - u * period, offset + u * period])
    margin = 0.1 * period
    return int(np.sum((nodes > x[0] + margin) & (nodes < x[-1] - margin)))


def trial_fit(spec, x, y, noise, scans: _Scans | None, *, node_floor, loss, floor_dchi2,
              min_nodes, start=None, beat=None):
    """One model's quick fit with the full fit's choices of start and floor.

    Without ``start`` the model is started from its own scan (and, with its main lobe
    at or beyond an edge, from the far-lobe start and a short walk over lobes); with
    ``start`` (a rival started from the reference model's fit, see ``rival_start``)
    from there alone. ``beat``, the reference's criterion, lets a rival that no floor
    could bring near it skip its floor trial (``_beyond_floor``).
    """
    if start is None:
        start = model_start(spec, scans, x, y)
        if start is None:
            return None
    f_scale = 2.0 * noise
    floored = node_floor == "on" and not spec.periodic
    if scans is None and beat is not None and x.size >= 2 * _SCREEN_POINTS:
        return _rival_trial(spec, x, y, noise, start, beat, node_floor=node_floor, loss=loss,
                            floor_dchi2=floor_dchi2)
    params, chisq, k = quick_fit(spec, x, y, start, floor=floored, loss=loss, f_scale=f_scale)
    if scans is not None and not spec.periodic:
        offset = params["field_offset_T"]
        if not x[0] <= offset <= x[-1] or _nodes_inside(spec, x, params) < min_nodes:
            far = scans.far(spec.unit_shape)
            if far is not None:
                alt_start = dict(params, ic0_A=far.amplitude_A, period_T=far.period_T,
                                 field_offset_T=far.field_offset_T)
                alt = quick_fit(spec, x, y, alt_start, floor=floored, loss=loss,
                                f_scale=f_scale)
                if alt[1] < chisq:
                    params, chisq, k = alt
        params, chisq, k = _walk_lobes(spec, x, y, params, chisq, k, floored, loss, f_scale)
    gain = None
    if node_floor == "auto" and not spec.periodic and (
            beat is None or not _beyond_floor(spec, x, y, params, chisq, k, noise, beat,
                                              loss, f_scale)):
        fstart = _floor_start(spec, x, y, params, chisq, noise, loss, floor_dchi2)
        if fstart is not None:
            fp, fchisq, fk = quick_fit(spec, x, y, fstart, floor=True, loss=loss,
                                       f_scale=f_scale)
            gain = (chisq - fchisq) / max(fchisq / max(x.size - fk, 1), 1e-300)
            if gain > floor_dchi2:
                params, chisq, k, floored = fp, fchisq, fk, True
    return _trial(spec, x, y, params, chisq, k, noise, floored, gain if floored else None)


def _floor_start(spec, x, y, params, chisq, noise, loss, threshold):
    """Start of a trial's floor refit (5 % of Ic0, or where a quick estimate ends), or
    ``None`` where the estimate spares it (``fit.floor``)."""
    usual = dict(params, floor_A=0.05 * abs(params["ic0_A"]))
    values = full_params(spec, params, False)
    local = SimpleNamespace(params=values, free=free_names(spec, False), chisq=chisq,
                            residual=spec.formula(x, **values) - y)
    return floor_trial_start(spec, x, y, local, usual, sigma=noise, loss=loss,
                             threshold=threshold)


def _rival_trial(spec, x, y, noise, start, beat, *, node_floor, loss, floor_dchi2):
    """A rival's trial, fitted first on every k-th point (without and with a floor, the
    floor kept where its gain there times k passes the threshold). That fit, evaluated
    on all points, bounds the rival's least chi-square from above: where even that bound
    lies ``SCREEN_BIC`` above the reference's criterion ``beat`` the rival stays screened;
    otherwise it is refitted on all points from there (a few iterations). The full fit
    of a rival so chosen decides its floor again on all points."""
    f_scale = 2.0 * noise
    stride = x.size // _SCREEN_POINTS
    xs, ys = x[::stride], y[::stride]
    floored = node_floor == "on" and not spec.periodic
    params, sub_chisq, k = quick_fit(spec, xs, ys, start, floor=floored, loss=loss,
                                     f_scale=f_scale)
    fstart = None
    if node_floor == "auto" and not spec.periodic:
        fstart = _floor_start(spec, xs, ys, params, sub_chisq, noise, loss,
                              floor_dchi2 / stride)
    if fstart is not None:
        fsub = solve(spec, xs, ys, fstart, floor=True, loss=loss, f_scale=f_scale)
        gain = stride * (sub_chisq - fsub.chisq) / max(fsub.chisq / fsub.nfree, 1e-300)
        if gain > floor_dchi2:
            params, k, floored = dict(fsub.params), len(fsub.free), True
    r = spec.formula(x, **full_params(spec, params, floored)) - y
    bound = float(np.sum(robust_weight((r / f_scale) ** 2, loss) * r * r))
    if bound / noise**2 + k * np.log(x.size) - beat > SCREEN_BIC:
        trial = _trial(spec, x, y, params, bound, k, noise, floored, decided=False,
                       residual=r)
        trial.screened = stride
        return trial
    # Ranking needs the chi-square to a noise unit (a tenth of the margin); the full fit of
    # a rival so chosen polishes it.
    local = solve(spec, x, y, params, floor=floored, loss=loss, f_scale=f_scale,
                  tol=min(1e-3, 1.0 / x.size))
    return _trial(spec, x, y, dict(local.params), local.chisq, len(local.free), noise,
                  floored, decided=False, residual=local.residual)


def _trial(spec, x, y, params, chisq, k, noise, floored, floor_gain=None, *,
           decided=True, residual=None) -> Trial:
    """The trial of a finished quick fit. The full fit of the chosen model takes its floor
    decision (``floor_gain`` in the parameters, ``None`` for no floor) where ``decided``,
    and decides again on all points otherwise (no ``floor_gain`` key). ``residual`` (model
    minus data at ``params``) saves an evaluation where the fit has it."""
    params = dict(params, floor_gain=floor_gain) if decided else dict(params)
    trial = Trial(spec.name, params, chisq / noise**2, k, floored, points=int(x.size))
    if residual is None:
        residual = spec.formula(x, **full_params(spec, params, floored)) - y
    trial.runs_z, trial.runs_ratio = runs_z(residual), runs_ratio(residual)
    trial.at_limit = [p.name for p in spec.extra if p.at_limit(params[p.name])]
    return trial


def _beyond_floor(spec, x, y, params, chisq, k, noise, beat, loss, f_scale) -> bool:
    """Whether a floor cannot bring a rival near the criterion ``beat`` to beat: its
    criterion without a floor exceeds ``beat`` by more than three times what a floor
    alone recovers at its fit (the rest held; the best of a grid of floors from 0.1 % to
    half the largest current; residuals weighted as the loss weights them) and three
    margins. The floor alone is a lower bound of the floored fit's gain; a refit of the
    rest moves it by a fraction, not threefold."""
    m = spec.formula(x, **full_params(spec, params, False))
    floors = np.geomspace(1e-3, 0.5, 16) * max(float(np.max(np.abs(m))), 1e-300)
    r = y[None, :] - np.sqrt(m[None, :] ** 2 + floors[:, None] ** 2)
    sums = np.sum(robust_weight((r / f_scale) ** 2, loss) * r * r, axis=1)
    alone = (chisq - float(np.min(sums))) / noise**2
    deficit = chisq / noise**2 + (k + 1) * np.log(x.size) - beat
    return deficit > 3.0 * max(alone, MARGIN)


def _walk_lobes(spec, x, y, params, chisq, k, floor, loss, f_scale, max_steps=3):
    """With the main lobe near or beyond an edge, try the offset one and two lobes over,
    downhill in chi-square, a few steps (the full fit of the chosen model walks further
    before judging the offset; the far-lobe start has already placed it roughly)."""
    period, origin = abs(params["period_T"]), params["field_offset_T"]
    extras = {p.name: params[p.name] for p in spec.extra}
    reach = float(spec.nodes(1, extras)[0]) * period
    if x[0] <= origin - reach and origin + reach <= x[-1]:
        return params, chisq, k
    best, current, tried = (params, chisq, k), 0, {0}
    for _ in range(max_steps):
        moved = False
        for step in (current - 2, current - 1, current + 1, current + 2):
            if step in tried:
                continue
            tried.add(step)
            alt = quick_fit(spec, x, y, dict(params, field_offset_T=origin + step * period),
                            floor=floor, loss=loss, f_scale=f_scale)
            if alt[1] < best[1]:
                best, current, moved = alt, step, True
        if not moved:
            break
    return best


def choose_model(x, y, noise, *, node_floor="auto", loss="linear", names=None,
                 floor_dchi2=10.0, min_nodes=2) -> ModelChoice | None:
    """Quick-fit every model in ``names`` (default: all registered) and pick one by BIC.

    The first name (the reference, the uniform rectangle) is started from its own scan;
    the others from its converged fit (``rival_start``), which saves their scans. When
    none of them then describes the data (reduced chi-square above ``DESCRIBES_REDCHI``)
    each is fitted again from its own scan and the better of its two fits kept.
    Returns ``None`` when no model could be fitted at all.
    """
    names = tuple(names or model_names())
    order = {name: i for i, name in enumerate(names)}
    # The trials run in normalised units (see ``lsq``); the start handed back is SI.
    units = Units.of(x, y)
    noise_A, x, y, noise = noise, units.field(x), y / units.scale_A, noise / units.scale_A
    scans = _Scans(x, y)
    gof_scale = expected_weighted_chisq(loss, 2.0)

    def run(name, start=None):
        beat = None if start is None or reference is None else reference.bic
        try:
            trial = trial_fit(get_model(name), x, y, noise, None if start else scans,
                              node_floor=node_floor, loss=loss, floor_dchi2=floor_dchi2,
                              min_nodes=min_nodes, start=start, beat=beat)
        except (ValueError, FloatingPointError, np.linalg.LinAlgError):
            return None
        if trial is None or not np.isfinite(trial.chisq_over_noise):
            return None
        trial.bic = trial.chisq_over_noise + trial.parameters * np.log(x.size)
        trial.shaped = bool(get_model(name).extra)
        trial.gof_scale = gof_scale
        return trial

    reference = None  # read by run(): the reference itself has no criterion to beat
    reference = run(names[0])
    found = {names[0]: reference}
    for name in names[1:]:
        start, spec = None, get_model(name)
        if reference is not None:
            with np.errstate(all="ignore"):
                # A periodic pattern is not placed by the rectangle's fit (its lobes' phase
                # differs by half a period, its offset is modulo one): its own scan, within
                # the reference's period range, starts it.
                start = (model_start(spec, scans, x, y) if spec.periodic else
                         rival_start(spec, get_model(names[0]), reference.params, x, y))
        found[name] = run(name, start)
    starts = f"from the {names[0]} fit (periodic models from their own scan)"
    # Where no model describes the data from those starts (a periodic pattern is not placed
    # by the rectangle's fit, for one), every rival gets its own scan too.
    if reference is None or not any(describes(t) for t in found.values()
                                    if t is not None and not t.at_limit):
        starts = "from the reference fit and from each model's own scan"
        for name in names[1:]:
            own = run(name)
            if own is not None and (found[name] is None
                                    or own.chisq_over_noise < found[name].chisq_over_noise):
                found[name] = own
    trials = [t for t in found.values() if t is not None]
    # A model whose shape parameter ran to the end of its range does not fit: left out.
    excluded = [{"model": t.name, "reason": f"{', '.join(t.at_limit)} ran to the end of the "
                 "range the model describes"} for t in trials if t.at_limit]
    trials = [t for t in trials if not t.at_limit]
    if not trials:
        return None
    chosen, verdict = decide(trials, order)
    block = {"criterion": CRITERION, "margin": MARGIN, "noise_A": float(noise_A),
             "points": int(x.size), "chisq_scale": gof_scale, "rival_starts": starts,
             **verdict, "excluded": excluded}
    return ModelChoice(chosen.name, units.to_si(chosen.params), block)
