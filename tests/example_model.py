"""Worked example of a model file: a junction whose current density is a cosine.

Written exactly as ``jjpattern/physics/models/<name>.py`` would be; as a real
model it would need only the line ``"cosine_profile",`` in ``registry._MODULES``.
Here the tests register it for the length of a ``with`` block.

The profile ``J(x) = cos(pi x / L)`` over ``|x| <= L/2`` (current crowding in the
middle, e.g. a barrier thinnest at the centre) has the Dynes-Fulton pattern

    Ic(u) = Ic0 (pi/4) |sinc(u - 1/2) + sinc(u + 1/2)| = Ic0 |cos(pi u) / (1 - 4 u^2)|

from the rect <-> sinc pair and the shift (modulation) theorem (R. N. Bracewell,
The Fourier Transform and Its Applications, tables of pairs and theorems). The
sinc form has no 0/0 at ``u = 1/2``. Nodes at ``u = 3/2, 5/2, ...``: a main lobe
three times as wide as the side lobes, which are lower than a uniform junction's.
"""

from jjpattern.physics.models import PatternModelSpec


def formula(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0):
    """``sqrt((Ic0 (pi/4) |sinc(u - 1/2) + sinc(u + 1/2)|)^2 + floor^2)``."""
    import numpy as np

    u = (np.asarray(field_T, dtype=float) - field_offset_T) / period_T
    shape = 0.25 * np.pi * (np.sinc(u - 0.5) + np.sinc(u + 0.5))
    return np.hypot(ic0_A * shape, floor_A)


def node_flux(count):
    """Nodes at ``u = k + 1/2`` for ``k = 1, 2, ...``."""
    import numpy as np

    return np.arange(1, count + 1, dtype=float) + 0.5


MODEL = PatternModelSpec(
    name="cosine-profile",
    formula=formula,
    node_flux=node_flux,
    description="current density cos(pi x/L), Ic0 |cos(pi u)/(1 - 4 u^2)|",
    methods_text=("the pattern of a junction whose current density follows cos(pi x/L) "
                  "across its length L, Ic(B) = Ic0 |cos(pi Phi/Phi0) / (1 - 4 (Phi/Phi0)^2)|"),
    references={
        "df": "R. C. Dynes and T. A. Fulton, Phys. Rev. B 3, 3015 (1971).",
        "bracewell": "R. N. Bracewell, The Fourier Transform and Its Applications, "
                     "3rd ed. (McGraw-Hill, Boston, 2000).",
    },
)
