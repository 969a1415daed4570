"""lmfit's view of a reported fit, for its text report and confidence intervals.

The analysis never imports lmfit (its import costs about a second); a user who wants
lmfit's ``fit_report``, ``conf_interval`` or uncertainties variables asks for
:meth:`jjpattern.fit.reported.ReportedFit.to_lmfit`, which runs lmfit's ``leastsq``
from the reported solution on the same weighted, normalised problem and converts its
parameters to SI. Its numbers agree with the reported ones for least squares (a test holds
them to it); for a robust loss lmfit's errors and reduced chi-square are those of weighted
least squares at the robust weights, while the reported fit gives the M-estimator's
sandwich covariance and a goodness of fit scaled for the loss (``reported.final_fit``).
"""

from __future__ import annotations

import numpy as np

from ..physics.constants import PHI0_WB


def lmfit_result(reported):
    """An :class:`lmfit.minimizer.MinimizerResult` in SI for ``reported``."""
    import lmfit

    spec, units = reported.spec, reported.units
    xn = units.field(reported.field_T)
    yn = reported.ic_A / units.scale_A
    weight = np.sqrt(reported.robust_weights) / (reported.noise_A / units.scale_A)
    free = list(reported.var_names)
    normal = units.to_unit({k: p.value for k, p in reported.params.items()
                            if k != "effective_area_m2"})
    fixed = {k: v for k, v in normal.items() if k not in free}
    bounds = {p.name: (p.min, p.max) for p in spec.extra}
    params = lmfit.Parameters()
    for name in free:
        lo, hi = bounds.get(name, (-np.inf, np.inf))
        params.add(name, value=normal[name], min=lo, max=hi)

    def residual(p):
        return (spec.formula(xn, **fixed, **p.valuesdict()) - yn) * weight

    with np.errstate(all="ignore"):
        result = lmfit.Minimizer(residual, params).leastsq()
    _to_si(result, fixed, units)
    result.best_fit = reported.best_fit
    result.robust_weights = reported.robust_weights
    return result


def _to_si(result, fixed, units):
    """Turn the normalised lmfit parameters into SI ones in place (values, bounds, errors,
    covariance), add the fixed ones and ``effective_area_m2`` with its error."""
    params = result.params
    names = list(result.var_names or [])
    factors = np.array([units.factor(n) for n in names])
    if result.covar is not None and result.covar.shape == (len(names), len(names)):
        result.covar = result.covar * np.outer(factors, factors)
    values = units.to_si({k: p.value for k, p in params.items()})
    starts = units.to_si({k: p.init_value for k, p in params.items()})
    for name, p in params.items():
        f = units.factor(name)
        p.min, p.max = p.min * f, p.max * f
        p.value, p.init_value = values[name], starts[name]
        if p.stderr is not None:
            p.stderr = float(p.stderr) * f
    for name, value in units.to_si(fixed).items():
        params.add(name, value=value, vary=False)
    params.add("phi0_Wb", value=PHI0_WB, vary=False)
    params.add("effective_area_m2", expr="phi0_Wb / abs(period_T)")
    period, err = abs(params["period_T"].value), params["period_T"].stderr
    params["effective_area_m2"].stderr = None if err is None else PHI0_WB * err / period**2
