"""Two narrow parallel channels (a SQUID-like interferometer) with unequal currents.

``Ic = (I1 + I2) sqrt(cos^2(pi u) + a^2 sin^2(pi u))`` with the asymmetry
``a = (I1 - I2) / (I1 + I2)``; ``period_T`` is the field per flux quantum through
the area between the channels. The pattern is periodic, so the offset is only
defined modulo one period. numpy is imported inside the functions so that
listing the models does not load it.
"""

from .spec import ExtraParameter, PatternModelSpec


def formula(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0,
            asymmetry=0.0):
    """``sqrt((Ic0 sqrt(cos^2(pi u) + a^2 sin^2(pi u)))^2 + floor^2)``."""
    import numpy as np

    phase = np.pi * (np.asarray(field_T, dtype=float) - field_offset_T) / period_T
    shape = np.hypot(np.cos(phase), asymmetry * np.sin(phase))
    return np.hypot(ic0_A * shape, floor_A)


def unit_shape(u):
    """``|cos(pi u)|``, the formula at its defaults, without its two hypotenuses (the
    scan evaluates it on large grids)."""
    import numpy as np

    return np.abs(np.cos(np.pi * u))


def gradient(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0,
             asymmetry=0.0):
    """Partial derivatives of :func:`formula` by each parameter (the fit's Jacobian)."""
    import numpy as np

    u = (np.asarray(field_T, dtype=float) - field_offset_T) / period_T
    sin, cos = np.sin(np.pi * u), np.cos(np.pi * u)
    s2 = cos**2 + (asymmetry * sin) ** 2
    total = np.sqrt(ic0_A**2 * s2 + floor_A**2)
    inv = np.divide(1.0, total, out=np.zeros_like(total), where=total > 0)
    d_u = ic0_A**2 * inv * np.pi * (asymmetry**2 - 1.0) * sin * cos
    return {"ic0_A": ic0_A * s2 * inv, "period_T": -d_u * u / period_T,
            "field_offset_T": -d_u / period_T, "floor_A": floor_A * inv,
            "asymmetry": ic0_A**2 * asymmetry * sin**2 * inv}


def node_flux(count):
    """Nodes (of the symmetric pattern) at ``u = 1/2, 3/2, ...``."""
    import numpy as np

    return np.arange(count, dtype=float) + 0.5


MODEL = PatternModelSpec(
    name="two-channel",
    formula=formula,
    node_flux=node_flux,
    description="two parallel channels, Ic0 sqrt(cos^2(pi u) + a^2 sin^2(pi u)), periodic",
    methods_text=("the interference pattern of two parallel channels with unequal critical "
                  "currents, Ic(B) = Ic0 sqrt(cos^2(pi Phi/Phi0) + a^2 sin^2(pi Phi/Phi0)) "
                  "with a = (I1 - I2)/(I1 + I2)"),
    references={
        "jaklevic": "R. C. Jaklevic, J. Lambe, A. H. Silver and J. E. Mercereau, Phys. Rev. "
                    "Lett. 12, 159 (1964).",
    },
    # Even in the asymmetry too; its magnitude is reported.
    extra=(ExtraParameter("asymmetry", start=0.1, even=True,
                          description="(I1 - I2) / (I1 + I2) of the two channels"),),
    periodic=True,
    unit_shape=unit_shape,
    gradient=gradient,
)
