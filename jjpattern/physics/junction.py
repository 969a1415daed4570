"""Single-junction electrodynamics: RSJ current-voltage curve, BCS gap, Ambegaokar-Baratoff."""

from __future__ import annotations

import numpy as np
from scipy import constants, integrate, optimize

#: Weak-coupling BCS ratio Delta(0) / (k_B Tc) = pi * exp(-Euler gamma) = 1.764.
BCS_RATIO = float(np.pi * np.exp(-np.euler_gamma))


def rsj_voltage(bias_A, ic_A, rn_ohm):
    """Overdamped RSJ (Stewart-McCumber, beta_c -> 0) time-averaged voltage.

    ``V = sign(I) Rn sqrt(I^2 - Ic^2)`` above ``Ic``, zero below.
    """
    bias = np.asarray(bias_A, dtype=float)
    excess = np.clip(bias**2 - np.asarray(ic_A, dtype=float) ** 2, 0.0, None)
    return np.sign(bias) * rn_ohm * np.sqrt(excess)


def bcs_gap_J(tc_K: float, temperature_K: float = 0.0) -> float:
    """Weak-coupling BCS energy gap Delta(T) in joule, from the gap equation.

    Solves ``ln(Delta0 / Delta) = 2 int_0^inf f(E) / E dxi`` with
    ``E = sqrt(xi^2 + Delta^2)`` and ``Delta0 = 1.764 k_B Tc``.
    """
    k = constants.k
    delta0 = BCS_RATIO * k * tc_K
    if temperature_K <= 0:
        return delta0
    if temperature_K >= tc_K:
        return 0.0
    # Energies in units of k_B T keep the integrand of order one for quad.
    d0 = delta0 / (k * temperature_K)

    def mismatch(d):
        def integrand(x):
            e = np.hypot(x, d)
            return 1.0 / (e * (np.exp(min(e, 700.0)) + 1.0))

        tail, _ = integrate.quad(integrand, 0.0, np.inf, limit=200)
        return np.log(d0 / d) - 2.0 * tail

    d = optimize.brentq(mismatch, 1e-9 * d0, d0, xtol=1e-13 * d0)
    return float(d * k * temperature_K)


def ambegaokar_baratoff_V(gap_J: float, temperature_K: float = 0.0) -> float:
    """IcRn of a tunnel junction with equal gaps, ``(pi Delta / 2e) tanh(Delta / 2 k_B T)``.

    Ambegaokar & Baratoff, Phys. Rev. Lett. 10, 486 (1963).
    """
    factor = 1.0 if temperature_K <= 0 else np.tanh(gap_J / (2 * constants.k * temperature_K))
    return float(np.pi * gap_J / (2 * constants.e) * factor)
