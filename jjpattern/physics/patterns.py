"""Critical current versus field for Josephson junctions.

Each function takes the applied field first (tesla) and returns the critical
current in ampere. ``period_T`` is always the field that threads one flux
quantum through the effective magnetic area, ``Phi0 / A_eff``.

The closed-form models are defined one per file in :mod:`jjpattern.physics.models`;
this module keeps the general Dynes-Fulton integral and, for older callers,
name-based views of that registry.
"""

from __future__ import annotations

import numpy as np
from scipy import integrate

from .models.registry import ModelView, PeriodicNames, get_model

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


#: The closed-form patterns; each lives in its own file under ``physics/models``.
rectangular_pattern = get_model("rectangular").formula
circular_pattern = get_model("circular").formula
circular_node_flux = get_model("circular").node_flux
two_channel_pattern = get_model("two-channel").formula


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


#: Closed-form patterns by geometry name, a read-only view of the model registry.
PATTERNS = ModelView(lambda spec: spec.formula)
#: Names of the patterns that repeat without decay (no main lobe to locate).
PERIODIC = PeriodicNames()


def node_flux(geometry, count):
    """Reduced flux of the first ``count`` nodes on one side of the centre.

    Raises :class:`~jjpattern.errors.InputError` (a ``ValueError``) for an unknown
    geometry.
    """
    return get_model(geometry).node_flux(count)
