"""Critical current versus field for Josephson junctions.

Each function takes the applied field first (tesla) and returns the critical
current in ampere. ``period_T`` is always the field that threads one flux
quantum through the effective magnetic area, ``Phi0 / A_eff``.
"""

from __future__ import annotations

import numpy as np
from scipy import integrate, special

# The kernel matrix of ``profile_pattern`` is built in chunks of this many
# field points so that long sweeps times fine profiles stay within memory.
_CHUNK_ELEMENTS = 2_000_000


def reduced_flux(field_T, period_T, field_offset_T=0.0):
    """Flux through the junction in units of the flux quantum, ``(B - B0) / period``."""
    return (np.asarray(field_T, dtype=float) - field_offset_T) / period_T


def with_floor(ic_A, floor_A=0.0):
    """Combine a pattern with a node floor in quadrature, ``sqrt(Ic^2 + floor^2)``.

    A floor models minima that do not reach zero (lifted nodes) without
    shifting the lobes, so that it does not bias the period.
    """
    return np.hypot(ic_A, floor_A)


def rectangular_pattern(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0):
    """Uniform rectangular junction: ``Ic0 |sin(pi u) / (pi u)|``, ``u = (B - B0) / period``."""
    u = reduced_flux(field_T, period_T, field_offset_T)
    return with_floor(ic0_A * np.abs(np.sinc(u)), floor_A)


def circular_pattern(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0):
    """Uniform circular junction: ``Ic0 |2 J1(pi u) / (pi u)|``.

    Here ``A_eff`` is the diameter times the magnetic thickness, so the nodes
    sit at ``u = j_{1,k} / pi`` (zeros of J1) and are not equally spaced.
    """
    x = np.pi * reduced_flux(field_T, period_T, field_offset_T)
    small = np.abs(x) < 1e-8
    safe = np.where(small, 1.0, x)
    shape = np.where(small, 1.0, 2.0 * special.j1(safe) / safe)
    return with_floor(ic0_A * np.abs(shape), floor_A)


def circular_node_flux(count):
    """Reduced flux ``u`` of the first ``count`` circular-pattern nodes, ``j_{1,k} / pi``."""
    return special.jn_zeros(1, count) / np.pi


def profile_pattern(field_T, x_over_length, j_A, period_T=1.0, field_offset_T=0.0):
    """Critical current for any current-density profile (Dynes & Fulton 1971).

    ``Ic(B) = |integral j(x) exp(2 pi i u x) dx|`` with ``x`` in units of the
    junction length across the field (the junction spans -1/2 to 1/2) and
    ``j_A`` the current per unit of ``x / L``, so that a uniform ``j = Ic0``
    gives ``Ic0 |sinc(u)|``. The integral is done with Simpson's rule on the
    given samples, which must cover the whole junction.

    Parameters
    ----------
    field_T : array_like
        Applied field.
    x_over_length, j_A : array_like
        Samples of the profile, ``x`` increasing.
    period_T, field_offset_T : float
        Field period and offset, as for the closed-form patterns.
    """
    x = np.asarray(x_over_length, dtype=float)
    j = np.asarray(j_A, dtype=float)
    u = np.atleast_1d(reduced_flux(field_T, period_T, field_offset_T))
    out = np.empty(u.shape, dtype=float)
    flat_u, flat_out = u.ravel(), out.reshape(-1)
    step = max(1, _CHUNK_ELEMENTS // max(x.size, 1))
    for start in range(0, flat_u.size, step):
        phase = 2.0 * np.pi * np.outer(flat_u[start:start + step], x)
        re = integrate.simpson(j * np.cos(phase), x=x, axis=1)
        im = integrate.simpson(j * np.sin(phase), x=x, axis=1)
        flat_out[start:start + step] = np.hypot(re, im)
    return out.reshape(np.shape(field_T)) if np.ndim(field_T) else float(out[0])


def two_channel_pattern(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0,
                        asymmetry=0.0):
    """Two narrow parallel channels (a SQUID-like interferometer) with unequal currents.

    ``Ic = (I1 + I2) sqrt(cos^2(pi u) + a^2 sin^2(pi u))`` with the asymmetry
    ``a = (I1 - I2) / (I1 + I2)``; ``period_T`` is the field per flux quantum
    through the area between the channels. The pattern is periodic, so the offset
    is only defined modulo one period.
    """
    u = reduced_flux(field_T, period_T, field_offset_T)
    shape = np.sqrt(np.cos(np.pi * u) ** 2 + (asymmetry * np.sin(np.pi * u)) ** 2)
    return with_floor(ic0_A * shape, floor_A)


#: Closed-form patterns by geometry name; the fit layer wraps each one.
PATTERNS = {
    "rectangular": rectangular_pattern,
    "circular": circular_pattern,
    "two-channel": two_channel_pattern,
}
#: Patterns that repeat without decay: no main lobe to locate.
PERIODIC = {"two-channel"}


def node_flux(geometry, count):
    """Reduced flux of the first ``count`` nodes on one side of the centre."""
    if geometry == "rectangular":
        return np.arange(1, count + 1, dtype=float)
    if geometry == "circular":
        return circular_node_flux(count)
    if geometry == "two-channel":
        return np.arange(count, dtype=float) + 0.5
    raise ValueError(f"unknown geometry {geometry!r}")
