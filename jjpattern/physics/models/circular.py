"""Uniform circular junction: the Airy pattern ``Ic0 |2 J1(pi u) / (pi u)|``.

``A_eff`` is the diameter times the magnetic thickness, so the nodes sit at
``u = j_{1,k} / pi`` (zeros of J1) and are not equally spaced. numpy and scipy
are imported inside the functions so that listing the models loads neither.
"""

from .gradient import quadrature_gradient
from .spec import PatternModelSpec


def formula(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0):
    """``sqrt((Ic0 |2 J1(pi u) / (pi u)|)^2 + floor^2)``."""
    import numpy as np
    from scipy import special

    x = np.pi * (np.asarray(field_T, dtype=float) - field_offset_T) / period_T
    # 2 J1(x)/x = 1 - x^2/8 + ...: below 1e-8 the limit 1 is exact in double precision.
    small = np.abs(x) < 1e-8
    safe = np.where(small, 1.0, x)
    shape = np.where(small, 1.0, 2.0 * special.j1(safe) / safe)
    return np.hypot(ic0_A * shape, floor_A)


def _shape_slope(u):
    """``2 J1(x)/x`` with x = pi u and its derivative by u, ``-2 pi J2(x)/x`` (Abramowitz
    and Stegun 9.1.30), with ``J2(x) = 2 J1(x)/x - J0(x)`` (A&S 9.1.27; j0 and j1 are much
    faster than jv, and J1 is computed once for both)."""
    import numpy as np
    from scipy import special

    x = np.pi * u
    small = np.abs(x) < 1e-8
    safe = np.where(small, 1.0, x)
    s = 2.0 * special.j1(safe) / safe
    ds = (s - special.j0(safe)) * (-2.0 * np.pi) / safe
    if small.any():
        s, ds = np.where(small, 1.0, s), np.where(small, 0.0, ds)
    return s, ds


def gradient(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0):
    """Partial derivatives of :func:`formula` by each parameter (the fit's Jacobian)."""
    return quadrature_gradient(field_T, ic0_A, period_T, field_offset_T, floor_A,
                               _shape_slope)


def node_flux(count):
    """Nodes at ``u = j_{1,k} / pi``, the zeros of J1 over pi."""
    import numpy as np
    from scipy import special

    return special.jn_zeros(1, count) / np.pi


MODEL = PatternModelSpec(
    name="circular",
    formula=formula,
    node_flux=node_flux,
    description="uniform circular junction, Ic0 |2 J1(pi u)/(pi u)| (Airy)",
    methods_text=("the Airy pattern of a circular junction with uniform current density, "
                  "Ic(B) = Ic0 |2 J1(pi Phi/Phi0) / (pi Phi/Phi0)|"),
    references={
        "barone": "A. Barone and G. Paterno, Physics and Applications of the Josephson "
                  "Effect (Wiley, New York, 1982).",
    },
    gradient=gradient,
)
