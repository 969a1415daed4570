"""Uniform rectangular junction: the Fraunhofer pattern ``Ic0 |sin(pi u) / (pi u)|``.

``u = (B - B0) / period`` is the flux through the junction in flux quanta; the
nodes sit at every non-zero integer ``u``. numpy is imported inside the functions
so that listing the models does not load it.
"""

from .gradient import quadrature_gradient
from .spec import PatternModelSpec


def formula(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0):
    """``sqrt((Ic0 |sinc(u)|)^2 + floor^2)`` with ``sinc(u) = sin(pi u) / (pi u)``."""
    import numpy as np

    u = (np.asarray(field_T, dtype=float) - field_offset_T) / period_T
    return np.hypot(ic0_A * np.sinc(u), floor_A)


def unit_shape(u):
    """``|sinc(u)|``, the formula at its defaults without the floor (the scan evaluates
    it on large grids)."""
    import numpy as np

    return np.abs(np.sinc(u))


def shape_and_slope(u):
    """``sinc(u)`` and its derivative ``(cos(pi u) - sinc(u)) / u`` (zero at u = 0) from
    one sine and one cosine."""
    import numpy as np

    t = np.pi * u
    zero = t == 0
    some_zero = bool(zero.any())
    if some_zero:
        t = np.where(zero, 1.0, t)
    s = np.sin(t)
    s /= t
    ds = np.cos(t)
    ds -= s
    ds /= t
    ds *= np.pi
    if some_zero:
        s, ds = np.where(zero, 1.0, s), np.where(zero, 0.0, ds)
    return s, ds


def gradient(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0):
    """Partial derivatives of :func:`formula` by each parameter (the fit's Jacobian)."""
    return quadrature_gradient(field_T, ic0_A, period_T, field_offset_T, floor_A,
                               shape_and_slope)


def node_flux(count):
    """Nodes at ``u = 1, 2, ..., count``."""
    import numpy as np

    return np.arange(1, count + 1, dtype=float)


MODEL = PatternModelSpec(
    name="rectangular",
    formula=formula,
    node_flux=node_flux,
    description="uniform rectangular junction, Ic0 |sin(pi u)/(pi u)| (Fraunhofer)",
    methods_text=("the Fraunhofer pattern of a rectangular junction with uniform current "
                  "density, Ic(B) = Ic0 |sin(pi Phi/Phi0) / (pi Phi/Phi0)|"),
    references={
        "rowell": "J. M. Rowell, Phys. Rev. Lett. 11, 200 (1963).",
        "barone": "A. Barone and G. Paterno, Physics and Applications of the Josephson "
                  "Effect (Wiley, New York, 1982).",
    },
    unit_shape=unit_shape,
    gradient=gradient,
)
