"""Partial derivatives of a pattern ``sqrt((Ic0 s(u))^2 + floor^2)``, u = (B - B0) / period.

Shared by the model files that give an analytic gradient (the fit's Jacobian). Where
the pattern has a cusp (a node, ``|s| = 0`` with no floor) the derivative of the
magnitude is taken as zero, its mean over the two sides. numpy is imported inside
the function so that listing the models does not load it.
"""


def quadrature_gradient(field_T, ic0_A, period_T, field_offset_T, floor_A, shape, slope=None):
    """``{parameter: dIc/dparameter}`` for the four base parameters.

    Parameters
    ----------
    shape, slope : callable
        The signed unit shape ``s(u)`` and its derivative ``ds/du``; with ``slope``
        None, ``shape(u)`` returns both, ``(s, ds/du)`` (they often share their costly
        parts, a sine or a Bessel function).
    """
    import numpy as np

    u = (np.asarray(field_T, dtype=float) - field_offset_T) / period_T
    s, ds = shape(u) if slope is None else (shape(u), slope(u))
    if floor_A == 0.0:
        # |Ic0 s|: its derivative by Ic0 s is the sign (zero at a node), no division.
        along = np.sign(ic0_A * s)
        d_floor = np.zeros_like(u)
    else:
        total = np.hypot(ic0_A * s, floor_A)
        inv = np.divide(1.0, total, out=np.zeros_like(total), where=total > 0)
        along = ic0_A * s * inv  # dIc / d(Ic0 s)
        d_floor = floor_A * inv
    d_u = along * ds
    d_u *= ic0_A / period_T
    return {"ic0_A": along * s, "period_T": -d_u * u,
            "field_offset_T": -d_u, "floor_A": d_floor}
