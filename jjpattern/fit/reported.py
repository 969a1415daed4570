"""The reported fit: weighted least squares from the converged inner fit, with its
covariance, in SI.

The fit that is reported runs MINPACK's Levenberg-Marquardt (``lmder`` with the
model's analytic gradient) through scipy, from the converged inner fit, on the
normalised data weighted by the model-free noise (and by the robust weights of a
robust loss), so that its reduced chi-square is the tool's. The covariance is
``(J^T W J)^-1`` at the solution scaled by the reduced chi-square, as lmfit reports
by default (Newville et al., LMFIT documentation, "scale_covar"). lmfit itself is
not imported here, so that an analysis does not pay its import (about a second);
:meth:`ReportedFit.to_lmfit` runs lmfit from the same point for its report and
confidence intervals, and a test holds the two to the same numbers.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np

from ..physics.constants import PHI0_WB
from .lsq import (
    Local,
    Units,
    expected_weighted_chisq,
    full_params,
    remember_last,
    robust_slope,
    robust_weight,
)

__all__ = ["Param", "ReportedFit", "final_fit", "weighted_fit"]


@dataclass
class Param:
    """One reported parameter in SI: value, standard error, whether it was fitted."""

    value: float
    stderr: float | None = None
    vary: bool = False
    init_value: float | None = None


@dataclass
class ReportedFit:
    """The reported fit of one model in SI.

    ``params`` maps each formula argument (and ``effective_area_m2``) to a
    :class:`Param`; ``covar`` is the covariance over ``var_names``; ``residual`` is in
    units of the noise (weighted), so ``redchi`` is the tool's reduced chi-square;
    ``best_fit`` is the model at the data (A).
    """

    spec: object
    params: dict
    var_names: list
    covar: np.ndarray | None
    residual: np.ndarray
    best_fit: np.ndarray
    nfree: int
    robust_weights: np.ndarray
    units: Units
    field_T: np.ndarray = field(repr=False, default=None)
    ic_A: np.ndarray = field(repr=False, default=None)
    noise_A: float = 0.0
    gof_scale: float = 1.0

    @property
    def chisqr(self) -> float:
        return float(np.sum(self.residual**2))

    @property
    def redchi(self) -> float:
        """Weighted chi-square per degree of freedom over what a model that describes the
        data gives (``gof_scale``, 1 for least squares), so about 1 for the right model
        under any loss."""
        return self.chisqr / max(self.nfree, 1) / self.gof_scale

    def __repr__(self) -> str:
        fitted = ", ".join(f"{n}={self.params[n].value:.6g}" for n in self.var_names)
        return (f"ReportedFit({getattr(self.spec, 'name', '?')}: {fitted}; reduced chi-square "
                f"{self.redchi:.3g}, {self.residual.size} points)")

    def values(self) -> dict:
        """Every parameter's value by name (SI)."""
        return {k: p.value for k, p in self.params.items()}

    def to_lmfit(self):
        """lmfit's ``MinimizerResult`` of the same fit, run from this solution in SI
        parameters scaled to the normalised units (imports lmfit)."""
        from .lmfit_view import lmfit_result

        return lmfit_result(self)


def _weighted_jacobian(spec, x, names, fixed, values, weight):
    """Jacobian (points x parameters) of the weighted residual at ``values``: the model's
    analytic gradient, or central differences without one."""
    args = dict(fixed, **dict(zip(names, values, strict=True)))
    if spec.gradient is not None:
        grads = spec.gradient(x, **args)
        return np.column_stack([grads[n] * weight for n in names])
    cols = []
    for n in names:
        step = 1e-7 * max(abs(args[n]), 1e-3)
        up, down = dict(args), dict(args)
        up[n] += step
        down[n] -= step
        cols.append((spec.formula(x, **up) - spec.formula(x, **down)) / (2 * step) * weight)
    return np.column_stack(cols)


def weighted_fit(spec, x, y, start: dict, names, weight):
    """Least squares of ``spec`` over the parameters ``names`` (others held at ``start``)
    with residuals multiplied by ``weight``; normalised units.

    Returns ``(params, covariance scaled by the reduced chi-square or None, weighted
    residual)``. Parameters with finite bounds (the extras that have them) are kept
    inside by scipy's trust-region solver; otherwise MINPACK ``lmder``/``lmdif`` at its
    default tolerances.
    """
    from scipy import optimize

    names = tuple(names)
    params = dict(start)
    fixed = {k: v for k, v in params.items() if k not in names}
    v0 = np.array([params[n] for n in names], dtype=float)
    bounds = {p.name: (p.min, p.max) for p in spec.extra if p.name in names}

    @remember_last
    def residual(v):
        return (spec.formula(x, **fixed, **dict(zip(names, v, strict=True))) - y) * weight

    @remember_last
    def jac(v):
        return _weighted_jacobian(spec, x, names, fixed, v, weight)

    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        if any(np.isfinite(b).any() for b in bounds.values()):
            lo = np.array([bounds.get(n, (-np.inf, np.inf))[0] for n in names])
            hi = np.array([bounds.get(n, (-np.inf, np.inf))[1] for n in names])
            best = optimize.least_squares(residual, np.clip(v0, lo, hi), jac=jac,
                                          bounds=(lo, hi), method="trf", x_scale="jac").x
        elif spec.gradient is not None:
            best = optimize.leastsq(residual, v0, Dfun=lambda v: jac(v).T, col_deriv=True,
                                    maxfev=2000 * (len(names) + 1))[0]
        else:
            best = optimize.leastsq(residual, v0, maxfev=2000 * (len(names) + 1))[0]
    params.update(zip(names, (float(b) for b in best), strict=True))
    r = residual(best)
    nfree = max(r.size - len(names), 1)
    covar = None
    j = jac(best)
    if np.all(np.isfinite(j)):
        try:
            covar = np.linalg.inv(j.T @ j) * (float(np.sum(r * r)) / nfree)
        except np.linalg.LinAlgError:
            covar = None
        if covar is not None and (not np.all(np.isfinite(covar))
                                  or np.any(np.diag(covar) < 0)):
            covar = None
    return params, covar, r


def final_fit(spec, x_T, y_A, local: Local, units: Units, noise_A: float, *,
              loss: str = "linear", scale_over_noise: float = 2.0) -> ReportedFit:
    """The reported fit from the converged ``local`` (normalised units), weighted by the
    noise and the robust weights, converted to SI.

    With a robust loss the covariance is the M-estimator's sandwich ``A^-1 B A^-1``,
    ``A = J^T diag(psi') J``, ``B = J^T diag(psi^2) J`` (Huber, Robust Statistics, 1981;
    the weighted least-squares covariance at the robust weights is 13-25 % too narrow for
    a Cauchy loss), and the goodness of fit is scaled by what a model that describes the
    data gives under that loss (``lsq.expected_weighted_chisq``).
    """
    x_T = np.asarray(x_T, dtype=float)
    xn, yn = units.field(x_T), np.asarray(y_A, dtype=float) / units.scale_A
    sigma = noise_A / units.scale_A
    weight = np.sqrt(local.weights) / sigma
    start = full_params(spec, local.params, "floor_A" in local.free)
    fitted, covar, r = weighted_fit(spec, xn, yn, start, local.free, weight)
    gof = 1.0
    if loss != "linear":
        gof = expected_weighted_chisq(loss, scale_over_noise)
        sandwich = _sandwich(spec, xn, yn, fitted, local.free, sigma,
                             loss, scale_over_noise * sigma)
        covar = sandwich if sandwich is not None else covar
    out = _in_si(spec, fitted, local, covar, r, units, x_T, y_A, noise_A)
    out.gof_scale = gof
    return out


def _sandwich(spec, x, y, params, names, sigma, loss, f_scale):
    """The M-estimator covariance of a robust fit (normalised units), or ``None`` where
    the sensitivity matrix is not positive definite (a redescending loss with many points
    far out)."""
    names = tuple(names)
    fixed = {k: v for k, v in params.items() if k not in names}
    u = spec.formula(x, **params) - y
    z2 = (u / f_scale) ** 2
    psi = robust_weight(z2, loss) * u / sigma
    j = _weighted_jacobian(spec, x, names, fixed, [params[n] for n in names], 1.0 / sigma)
    a = j.T @ (robust_slope(z2, loss)[:, None] * j)
    b = j.T @ ((psi * psi)[:, None] * j)
    try:
        np.linalg.cholesky(a)
        a_inv = np.linalg.inv(a)
    except np.linalg.LinAlgError:
        return None
    covar = a_inv @ b @ a_inv * (u.size / max(u.size - len(names), 1))
    return covar if np.all(np.isfinite(covar)) else None


def _in_si(spec, fitted, local, covar, r, units, x_T, y_A, noise_A) -> ReportedFit:
    names = list(local.free)
    factors = np.array([units.factor(n) for n in names])
    if covar is not None:
        covar = covar * np.outer(factors, factors)
    values, starts = units.to_si(fitted), units.to_si(dict(local.params))
    params = {}
    for name, value in values.items():
        vary = name in names
        err = None
        if vary and covar is not None:
            err = float(np.sqrt(np.diag(covar)[names.index(name)]))
        params[name] = Param(float(value), err, vary, starts.get(name))
    period, err = abs(params["period_T"].value), params["period_T"].stderr
    params["effective_area_m2"] = Param(
        PHI0_WB / period if period > 0 else float("nan"),
        None if err is None or period <= 0 else PHI0_WB * err / period**2)
    best_fit = spec.formula(x_T, **values)
    return ReportedFit(spec, params, names, covar, r, best_fit, max(r.size - len(names), 1),
                       local.weights, units, x_T, np.asarray(y_A, dtype=float), noise_A)
