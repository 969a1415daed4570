"""A 0-pi junction: uniform |Jc| with the phase stepped by pi halfway across.

With J(x) = +Jc on one half and -Jc on the other, the Dynes-Fulton integral gives
``Ic = Ic0 |sin^2(pi u / 2) / (pi u / 2)|``: zero at zero flux, maxima of
0.7246 Ic0 at ``u = +-0.742`` (tan x = 2x with x = pi u / 2), nodes at
``u = +-2, +-4, ...``. Here ``Ic0 = Jc W L`` is the critical current the same
junction would carry without the step (the two halves' critical currents
together) and ``period_T`` the field for one flux quantum through the whole
junction, as for the rectangular pattern; the lobe spacing of the data is twice
that. numpy is imported inside the functions so that listing the models does
not load it.
"""

from .gradient import quadrature_gradient
from .spec import PatternModelSpec

#: Largest Ic over Ic0, and the reduced flux where it sits (tan x = 2x, x = pi u / 2).
PEAK_OVER_IC0 = 0.7246113537767085
PEAK_FLUX = 0.742019290879282


def formula(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0):
    """``sqrt((Ic0 |sin(pi u/2) sinc(u/2)|)^2 + floor^2)``, i.e. Ic0 |sin^2(x)/x|."""
    import numpy as np

    u = (np.asarray(field_T, dtype=float) - field_offset_T) / period_T
    return np.hypot(ic0_A * unit_shape(u), floor_A)


def unit_shape(u):
    """``|sin(pi u / 2) sinc(u / 2)|``; no 0/0 at ``u = 0``."""
    import numpy as np

    return np.abs(np.sin(0.5 * np.pi * u) * np.sinc(0.5 * u))


def _shape(u):
    import numpy as np

    return np.sin(0.5 * np.pi * u) * np.sinc(0.5 * u)


def _slope(u):
    """d/du of sin^2(z)/z with z = pi u/2: (pi/2)(sin 2z / z - sin^2 z / z^2), pi/2 at 0."""
    import numpy as np

    z = 0.5 * np.pi * u
    small = np.abs(z) < 1e-6
    safe = np.where(small, 1.0, z)
    return 0.5 * np.pi * np.where(small, 1.0 - 2.0 * z * z / 3.0,
                                  np.sin(2 * safe) / safe - (np.sin(safe) / safe) ** 2)


def gradient(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0):
    """Partial derivatives of :func:`formula` by each parameter (the fit's Jacobian)."""
    return quadrature_gradient(field_T, ic0_A, period_T, field_offset_T, floor_A,
                               _shape, _slope)


def node_flux(count):
    """Nodes at ``u = 2, 4, 6, ...`` (the zero at the centre is not a node between lobes)."""
    import numpy as np

    return 2.0 * np.arange(1, count + 1, dtype=float)


def derive(params):
    """The largest critical current of the pattern and the flux where it sits."""
    return {"pattern_max_A": PEAK_OVER_IC0 * abs(params["ic0_A"]),
            "pattern_max_field_from_offset_T": PEAK_FLUX * abs(params["period_T"])}


MODEL = PatternModelSpec(
    name="zero-pi",
    formula=formula,
    node_flux=node_flux,
    description="0-pi junction (phase step of pi halfway across), Ic0 |sin^2(pi u/2)/(pi u/2)|",
    methods_text=("the pattern of a 0-pi junction, uniform |Jc| with a phase step of pi "
                  "halfway across, Ic(B) = Ic0 |sin^2(pi Phi/2Phi0) / (pi Phi/2Phi0)|, "
                  "from the Dynes-Fulton integral; Ic0 is the critical current without the "
                  "step, and Ic peaks at 0.7246 Ic0 at Phi = +-0.742 Phi0"),
    references={
        "df": "R. C. Dynes and T. A. Fulton, Phys. Rev. B 3, 3015 (1971).",
        "vanharlingen": "D. J. Van Harlingen, Rev. Mod. Phys. 67, 515 (1995).",
    },
    unit_shape=unit_shape,
    central_peak=False,
    derive=derive,
    gradient=gradient,
    ic0_meaning=("the critical current without the pi step, Jc W L; the pattern peaks at "
                 "0.7246 Ic0 at Phi = +-0.742 Phi0 and vanishes at zero flux"),
)
