"""Least squares in normalised units for the inner loops (scipy, analytic gradients).

Every fit runs on ``xn = (B - centre) / span`` and ``yn = Ic / max|Ic|`` with the
parameters in the same units, so that the numerics (step sizes, tolerances, the
covariance) are the same at Ic0 = 1e-15 A and at 1e3 A; values and errors are
converted to SI once, at the end. The inner loops (scan refinement, lobe walks,
node-floor and model-choice trials) call scipy directly with the model's analytic
gradient where it has one; the reported fit (``reported``) starts at the converged
point.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from ..physics.models.spec import BASE_PARAMETERS

#: Chi-square accuracy of the inner fits in noise units: the relative tolerance is this over
#: the number of points (the chi-square over the noise is about that number), at most
#: ``_TOL``; a hundredth of the smallest threshold (10) they are compared with.
_CHISQ_ACCURACY = 0.1
#: Largest relative tolerance of the inner fits; the reported fit (MINPACK's default
#: tolerances) polishes the chosen one.
_TOL = 1e-4


@dataclass(frozen=True)
class Units:
    """The normalisation of one data set: field centre and span (T), current scale (A)."""

    centre_T: float
    span_T: float
    scale_A: float

    @classmethod
    def of(cls, x, y) -> Units:
        """Centre and span of the sorted field ``x``, largest magnitude of ``y``."""
        span = float(x[-1] - x[0])
        scale = float(np.max(np.abs(y)))
        return cls(0.5 * float(x[0] + x[-1]), span if span > 0 else 1.0,
                   scale if scale > 0 else 1.0)

    def field(self, x):
        """The normalised field of ``x`` (T)."""
        return (np.asarray(x, dtype=float) - self.centre_T) / self.span_T

    def factor(self, name) -> float:
        """SI over normalised units of one parameter (offsets also shift by the centre)."""
        if name.endswith("_A"):
            return self.scale_A
        if name.endswith("_T"):
            return self.span_T
        return 1.0

    def to_unit(self, params: dict) -> dict:
        """SI parameters (by name, ``None`` kept) in normalised units."""
        out = {k: None if v is None else float(v) / self.factor(k) for k, v in params.items()}
        if "field_offset_T" in out:
            out["field_offset_T"] -= self.centre_T / self.span_T
        return out

    def to_si(self, params: dict) -> dict:
        """Normalised parameters (by name, ``None`` kept) in SI."""
        out = {k: None if v is None else float(v) * self.factor(k) for k, v in params.items()}
        if "field_offset_T" in out:
            out["field_offset_T"] += self.centre_T
        return out


@dataclass
class Local:
    """One local fit in normalised units.

    ``chisq`` is the sum of squared residuals (model minus data), each weighted by its
    robust weight for a robust loss (as the reported reduced chi-square is); ``free``
    names the fitted parameters, ``weights`` the robust weights (ones for least squares).
    """

    params: dict
    free: tuple
    chisq: float
    weights: np.ndarray
    residual: np.ndarray

    @property
    def nfree(self) -> int:
        return max(self.weights.size - len(self.free), 1)


def robust_weight(z2, loss):
    """IRLS weight of each point for a scipy loss, ``rho'(z)`` with ``z = (r / f_scale)^2``."""
    if loss == "soft_l1":
        return 1.0 / np.sqrt(1.0 + z2)
    if loss == "huber":
        return np.where(z2 <= 1.0, 1.0, 1.0 / np.sqrt(np.maximum(z2, 1.0)))
    if loss == "cauchy":
        return 1.0 / (1.0 + z2)
    return np.ones_like(z2)


def robust_slope(z2, loss):
    """Derivative of the influence ``psi(r) = rho'(z) r`` by ``r`` for a scipy loss,
    ``rho'(z) + 2 z rho''(z)`` with ``z = (r / f_scale)^2`` (1 for least squares)."""
    z2 = np.asarray(z2, dtype=float)
    if loss == "soft_l1":
        return (1.0 + z2) ** -1.5
    if loss == "huber":
        return np.where(z2 <= 1.0, 1.0, 0.0)
    if loss == "cauchy":
        return (1.0 - z2) / (1.0 + z2) ** 2
    return np.ones_like(z2)


def expected_weighted_chisq(loss, scale_over_noise) -> float:
    """Mean of ``w(z) r^2 / sigma^2`` for Gaussian residuals of standard deviation sigma,
    ``f_scale = scale_over_noise * sigma``: what one point adds to the weighted chi-square
    of a model that describes the data (1 for least squares; Gauss-Hermite quadrature)."""
    if loss == "linear":
        return 1.0
    t, w = np.polynomial.hermite_e.hermegauss(80)
    w = w / np.sqrt(2.0 * np.pi)
    return float(np.sum(w * robust_weight((t / scale_over_noise) ** 2, loss) * t * t))


def free_names(spec, floor: bool) -> tuple:
    """The fitted parameters: Ic0, period, offset, the floor when asked, the extras."""
    names = ("ic0_A", "period_T", "field_offset_T") + (("floor_A",) if floor else ())
    return names + tuple(p.name for p in spec.extra)


def full_params(spec, start: dict, floor: bool) -> dict:
    """Every formula argument from ``start``: the floor zero when not fitted, extras at
    their starts when not given."""
    params = {name: float(start.get(name, 0.0)) for name in BASE_PARAMETERS}
    if not floor:
        params["floor_A"] = 0.0
    elif params["floor_A"] == 0.0:
        params["floor_A"] = 0.05 * abs(params["ic0_A"])
    for p in spec.extra:
        params[p.name] = float(start.get(p.name, p.start))
    return params


def remember_last(fn):
    """``fn`` of one parameter vector, with its last result kept: scipy's ``leastsq`` calls
    the residual and the Jacobian at the start once to check their shapes and then again,
    and the residual at the solution is often the last one MINPACK asked for. Each call
    returns a copy: some scipy versions rescale what they are given in place (the
    trust-region solver under a robust loss)."""
    last = [None, None]

    def call(v):
        key = np.asarray(v, dtype=float).tobytes()
        if last[0] != key:
            last[0], last[1] = key, fn(v)
        return last[1].copy()
    return call


def _jacobian(spec, x, names, fixed):
    if spec.gradient is None:
        return None

    def jac(v):
        grads = spec.gradient(x, **fixed, **dict(zip(names, v, strict=True)))
        return np.array([grads[n] for n in names])
    return remember_last(jac)


def solve(spec, x, y, start: dict, *, floor: bool, loss: str, f_scale: float,
          tol: float | None = None) -> Local:
    """Least squares of ``spec`` from ``start`` with scipy alone, normalised units.

    ``loss == "linear"`` runs MINPACK (``lmder`` with the analytic gradient, else
    ``lmdif``) to relative tolerances ``tol`` (default ``_CHISQ_ACCURACY`` over the number
    of points, at most ``_TOL``); a robust loss runs scipy's trust-region
    reflective solver.
    """
    from scipy import optimize

    params = full_params(spec, start, floor)
    names = free_names(spec, floor)
    tol = min(_TOL, _CHISQ_ACCURACY / max(x.size, 1)) if tol is None else tol
    fixed = {k: v for k, v in params.items() if k not in names}
    v0 = np.array([params[n] for n in names])

    @remember_last
    def residual(v):
        return spec.formula(x, **fixed, **dict(zip(names, v, strict=True))) - y

    jac = _jacobian(spec, x, names, fixed)
    with np.errstate(all="ignore"), warnings.catch_warnings():
        # An unfinished search still gives an honest (if high) chi-square to rank by.
        warnings.simplefilter("ignore", RuntimeWarning)
        if loss == "linear":
            best = optimize.leastsq(residual, v0, Dfun=jac, col_deriv=True, ftol=tol,
                                    xtol=tol, maxfev=200 * (len(names) + 1))[0]
        else:
            best = optimize.least_squares(
                residual, v0, jac=(lambda v: jac(v).T) if jac else "2-point", method="trf",
                loss=loss, f_scale=f_scale, x_scale="jac").x
    r = residual(best)
    weights = robust_weight((r / f_scale) ** 2, loss)
    params.update(zip(names, (float(b) for b in best), strict=True))
    return Local(params, names, float(np.sum(weights * r * r)), weights, r)


def evaluate(spec, x, y, params: dict, *, floor: bool, loss: str, f_scale: float) -> Local:
    """A :class:`Local` at ``params`` without fitting (parameters already converged)."""
    values = full_params(spec, params, floor)
    r = spec.formula(x, **values) - y
    weights = robust_weight((r / f_scale) ** 2, loss)
    return Local(values, free_names(spec, floor), float(np.sum(weights * r * r)), weights, r)
