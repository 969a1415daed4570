"""Coarse global search for the period and field offset of a pattern.

For every candidate period the unit-height pattern is slid along the field
axis; at each offset the best ``amplitude * pattern + background`` is solved
in closed form, so the whole (period, offset) cost surface comes from FFT
correlations on a uniform resampling of the data. Matching the full pattern
shape (central lobe twice as wide as the side lobes) is what keeps the
search off harmonics and sub-harmonics of the period.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import fft as sfft

#: Largest number of grid points the data are resampled onto.
_MAX_GRID = 4096


@dataclass(frozen=True)
class Candidate:
    """One local minimum of the scan cost."""

    period_T: float
    field_offset_T: float
    amplitude_A: float
    background_A: float
    chisq_A2: float


@dataclass(frozen=True)
class ScanResult:
    """Scan outcome: candidates best first, and the cost of a flat line."""

    candidates: tuple[Candidate, ...]
    flat_chisq_A2: float
    periods_T: np.ndarray
    profile_chisq_A2: np.ndarray


def period_grid(span_T: float, p_min_T: float, p_max_T: float, tolerance: float) -> np.ndarray:
    """Candidate periods, dense where many lobes fit in the window.

    The step keeps the farthest node in the window (about ``span / P`` periods
    away) within ``tolerance`` of a period of where the true period puts it.
    """
    periods = []
    p = p_min_T
    while p < p_max_T:
        periods.append(p)
        p *= 1.0 + min(0.03, tolerance * p / span_T)
    periods.append(p_max_T)
    return np.asarray(periods)


def _uniform(field_T, ic_A, step_T):
    """Linear resampling with zero weight inside gaps much wider than the usual step."""
    n = int(np.floor((field_T[-1] - field_T[0]) / step_T)) + 1
    grid = field_T[0] + step_T * np.arange(n)
    values = np.interp(grid, field_T, ic_A)
    gaps = np.diff(field_T)
    wide = 5.0 * np.median(gaps)
    k = np.clip(np.searchsorted(field_T, grid, side="right") - 1, 0, gaps.size - 1)
    near = np.minimum(np.abs(grid - field_T[k]), np.abs(field_T[k + 1] - grid)) <= step_T
    weight = ((gaps[k] <= wide) | near).astype(float)
    return grid, values, weight


def scan_pattern(
    field_T,
    ic_A,
    unit_shape,
    *,
    max_lobes: int = 40,
    min_points_per_period: float = 4.0,
    extend: float = 1.0,
    tolerance: float = 0.25,
    keep: int = 4,
) -> ScanResult:
    """Search periods and offsets of ``unit_shape`` over sorted data.

    Parameters
    ----------
    field_T, ic_A : ndarray
        Sorted, finite data.
    unit_shape : callable
        Unit-height pattern of the reduced flux ``u`` (peak 1 at ``u = 0``).
    max_lobes : int
        Shortest period searched is the window over ``2 * max_lobes``.
    extend : float
        Offsets are searched up to ``extend`` windows beyond each end, so a main
        lobe outside the window can still be located from the side lobes.
    keep : int
        How many distinct local minima of the period profile to return.
    """
    x = np.asarray(field_T, dtype=float)
    y = np.asarray(ic_A, dtype=float)
    span = x[-1] - x[0]
    median_step = float(np.median(np.diff(x)))
    p_min = max(span / (2 * max_lobes), min_points_per_period * median_step)
    p_max = 2.0 * span
    periods = period_grid(span, p_min, p_max, tolerance)

    step = max(p_min / 6.0, span / (_MAX_GRID - 1))
    grid, yg, wg = _uniform(x, y, step)
    n_w = grid.size
    k_half = int(np.ceil((1.0 + extend) * span / step))
    d = (np.arange(2 * k_half + 1) - k_half) * step
    templates = unit_shape(d[None, :] / periods[:, None])
    n_t = d.size
    nfft = sfft.next_fast_len(n_t, real=True)

    t_f = sfft.rfft(templates, nfft, axis=1)
    t2_f = sfft.rfft(templates**2, nfft, axis=1)
    wy_f = np.conj(sfft.rfft(wg * yg, nfft))
    w_f = np.conj(sfft.rfft(wg, nfft))
    valid = n_t - n_w + 1
    s_yf = sfft.irfft(t_f * wy_f, nfft, axis=1)[:, :valid]
    s_f = sfft.irfft(t_f * w_f, nfft, axis=1)[:, :valid]
    s_ff = sfft.irfft(t2_f * w_f, nfft, axis=1)[:, :valid]
    # Offset of correlation lag s: B0 = x0 + (k_half - s) * step.
    offsets = grid[0] + (k_half - np.arange(valid)) * step

    n = wg.sum()
    sy = np.dot(wg, yg)
    syy = np.dot(wg, yg**2)
    flat = syy - sy**2 / n
    det = s_ff * n - s_f**2
    safe = np.where(det > 0, det, np.inf)
    amp = (s_yf * n - s_f * sy) / safe
    bkg = (s_ff * sy - s_f * s_yf) / safe
    chisq = syy - amp * s_yf - bkg * sy
    # A negative background is not physical: fall back to the pure pattern there.
    amp0 = s_yf / np.where(s_ff > 0, s_ff, np.inf)
    neg = bkg < 0
    chisq = np.where(neg, syy - amp0 * s_yf, chisq)
    amp = np.where(neg, amp0, amp)
    bkg = np.where(neg, 0.0, bkg)
    chisq = np.where(amp > 0, chisq, flat)

    best_s = np.argmin(chisq, axis=1)
    rows = np.arange(periods.size)
    profile = chisq[rows, best_s]
    # Local minima of the period profile, best first.
    is_min = np.r_[True, profile[1:] <= profile[:-1]] & np.r_[profile[:-1] < profile[1:], True]
    picks = np.flatnonzero(is_min)
    picks = picks[np.argsort(profile[picks])][:keep]
    scale = x.size / n  # grid sums to data-point sums
    candidates = tuple(
        Candidate(
            period_T=float(periods[i]),
            field_offset_T=float(offsets[best_s[i]]),
            amplitude_A=float(amp[i, best_s[i]]),
            background_A=float(bkg[i, best_s[i]]),
            chisq_A2=float(profile[i] * scale),
        )
        for i in picks
    )
    return ScanResult(candidates, float(flat * scale), periods, profile * scale)
