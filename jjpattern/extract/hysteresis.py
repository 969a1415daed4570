"""Retrapping over switching at the main lobe, and the Stewart-McCumber estimate of beta_c.

In an underdamped junction of fixed R and C the McCumber parameter
beta_c = 2 pi Ic R^2 C / Phi0 grows with Ic, so the retrapping ratio changes
along the pattern: near the nodes (small Ic) it approaches 1, and a median
over every field row says little about the junction. The ratio is quoted over
the rows of the main lobe within its half width at half maximum, with its
spread over those rows. For beta_c >> 1 the retrapping current is
I_r = (4 / pi) Ic / sqrt(beta_c) (W. C. Stewart, Appl. Phys. Lett. 12, 277
(1968); D. E. McCumber, J. Appl. Phys. 39, 3113 (1968)), which gives an
estimate of beta_c at the largest Ic from that scaling, I_r proportional to
sqrt(Ic): beta_c = (4 / (pi r))^2 with r = I_r / sqrt(Ic Ic_max) at each row.
"""

from __future__ import annotations

import numpy as np

#: Rows of the main lobe: contiguous with the largest Ic and above this fraction of it.
MAIN_LOBE_FRACTION = 0.5
#: Fewest main-lobe rows with both currents for a ratio.
MIN_ROWS = 3
#: The asymptotic formula holds for beta_c >> 1: no estimate above this ratio.
BETA_C_MAX_RATIO = 0.7

BETA_C_METHOD = ("estimate from I_r = (4/pi) Ic / sqrt(beta_c) (Stewart 1968, McCumber "
                 "1968; beta_c >> 1), beta_c proportional to Ic, at the largest Ic")


def main_lobe_rows(field_T, ic_A, fraction=MAIN_LOBE_FRACTION) -> np.ndarray:
    """Mask of the rows of the main lobe within its half width at half maximum.

    Rows taken in field order from the largest Ic outwards while Ic stays above
    ``fraction`` of it; rows without an Ic (censored) neither count nor stop the walk.
    """
    ic = np.asarray(ic_A, dtype=float)
    out = np.zeros(ic.size, dtype=bool)
    if not np.isfinite(ic).any():
        return out
    order = np.argsort(np.asarray(field_T, dtype=float), kind="stable")
    sorted_ic = ic[order]
    top = int(np.nanargmax(sorted_ic))
    low = fraction * sorted_ic[top]
    keep = np.zeros(ic.size, dtype=bool)
    for direction in (-1, 1):
        i = top
        while 0 <= i < ic.size and not (sorted_ic[i] < low):
            keep[i] = np.isfinite(sorted_ic[i])
            i += direction
    out[order] = keep
    return out


def retrapping_summary(field_T, ic_A, retrap_A) -> dict:
    """Main-lobe retrapping ratio, its spread over rows, and the beta_c estimate.

    Keys (values ``None`` where fewer than :data:`MIN_ROWS` rows have both
    currents): ``main_lobe_rows``, ``retrapping_over_switching_main_lobe`` (median
    over the rows), ``retrapping_over_switching_main_lobe_spread`` (standard
    deviation over the rows), ``beta_c_estimate`` (dimensionless; ``None`` where
    the ratio is above :data:`BETA_C_MAX_RATIO`), ``beta_c_method``.
    """
    ic, ret = np.asarray(ic_A, dtype=float), np.asarray(retrap_A, dtype=float)
    rows = main_lobe_rows(field_T, ic) & np.isfinite(ret) & (ret > 0)
    out = {"main_lobe_rows": int(rows.sum()), "retrapping_over_switching_main_lobe": None,
           "retrapping_over_switching_main_lobe_spread": None, "beta_c_estimate": None,
           "beta_c_method": BETA_C_METHOD}
    if rows.sum() < MIN_ROWS:
        return out
    ratio = ret[rows] / ic[rows]
    out["retrapping_over_switching_main_lobe"] = float(np.median(ratio))
    out["retrapping_over_switching_main_lobe_spread"] = float(np.std(ratio, ddof=1))
    at_top = float(np.median(ret[rows] / np.sqrt(ic[rows] * np.nanmax(ic))))
    if at_top < BETA_C_MAX_RATIO:
        out["beta_c_estimate"] = float((4.0 / (np.pi * at_top)) ** 2)
    return out
