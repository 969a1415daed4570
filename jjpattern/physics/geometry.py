"""Junction geometry and materials: magnetic thickness, expected period, penetration depths.

All lengths in metres, current densities in A/m^2, fields in tesla.
"""

from __future__ import annotations

import numpy as np
from scipy import constants, optimize

from .constants import PHI0_WB

MU0 = constants.mu_0


def magnetic_thickness_m(barrier_m, lambda1_m, t1_m, lambda2_m=None, t2_m=None):
    """Effective magnetic thickness of a junction with thin electrodes.

    ``d' = d + l1 tanh(t1 / 2 l1) + l2 tanh(t2 / 2 l2)`` (Weihnacht, Phys. Status
    Solidi B 32, 169 (1969)); electrode 2 defaults to electrode 1.
    """
    lambda2_m = lambda1_m if lambda2_m is None else lambda2_m
    t2_m = t1_m if t2_m is None else t2_m
    return (barrier_m + lambda1_m * np.tanh(t1_m / (2 * lambda1_m))
            + lambda2_m * np.tanh(t2_m / (2 * lambda2_m)))


def current_thickness_m(barrier_m, lambda1_m, t1_m, lambda2_m=None, t2_m=None):
    """``d_s = d + l1 coth(t1 / l1) + l2 coth(t2 / l2)``, the thickness in lambda_J."""
    lambda2_m = lambda1_m if lambda2_m is None else lambda2_m
    t2_m = t1_m if t2_m is None else t2_m
    return (barrier_m + lambda1_m / np.tanh(t1_m / lambda1_m)
            + lambda2_m / np.tanh(t2_m / lambda2_m))


def expected_period_T(length_m, magnetic_thickness):
    """Field that threads one flux quantum through ``length x d'``: ``Phi0 / (L d')``."""
    return PHI0_WB / (length_m * magnetic_thickness)


def london_depth_from_period(period_T, length_m, barrier_m, t1_m, t2_m=None,
                             lambda2_m=None) -> float | None:
    """Invert a measured period for the London depth.

    With ``lambda2_m`` given it returns lambda1; otherwise both electrodes are
    assumed to share one lambda. ``None`` when no positive lambda fits (the
    measured magnetic thickness is outside what the electrode thicknesses allow).
    """
    target = PHI0_WB / (period_T * length_m)
    t2_m = t1_m if t2_m is None else t2_m

    def mismatch(lam):
        l2 = lam if lambda2_m is None else lambda2_m
        return magnetic_thickness_m(barrier_m, lam, t1_m, l2, t2_m) - target

    lo, hi = 1e-10, 1e-4
    if mismatch(lo) * mismatch(hi) > 0:
        return None
    return float(optimize.brentq(mismatch, lo, hi, xtol=1e-15))


def josephson_depth_m(jc_A_m2, current_thickness):
    """Josephson penetration depth ``lambda_J = sqrt(Phi0 / (2 pi mu0 Jc d_s))``."""
    return np.sqrt(PHI0_WB / (2 * np.pi * MU0 * jc_A_m2 * current_thickness))


def planar_period_T(width_m):
    """Period of a planar thin-film junction across a strip of width ``W``.

    ``1.84 Phi0 / W^2`` for a strip much narrower than the Pearl length
    (Rosenthal et al., Appl. Phys. Lett. 59, 3482 (1991); Clem, Phys. Rev. B 81,
    144515 (2010)); the coefficient is quoted from memory.
    """
    return 1.84 * PHI0_WB / width_m**2


def focusing_factor(effective_area_m2, geometric_area_m2):
    """Flux focusing: the effective magnetic area over the geometric area it is compared with."""
    return effective_area_m2 / geometric_area_m2
