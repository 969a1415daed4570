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
#: Offsets where the template's overlap with the data (sum of its squares over the
#: window) is below this fraction of the best offset's are not candidates: there the
#: single-precision FFT sums are rounding error (about 1e-6 of the largest), and a
#: pattern that decays fast (as 1/u^2) would otherwise find huge spurious amplitudes.
_MIN_OVERLAP = 1e-4
#: Step (in flux quanta) of the table the templates are interpolated in: linear
#: interpolation of |sinc| is then within 3e-5 of it, far below what ranks candidates.
_TABLE_STEP = 1.0 / 128.0


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
    away) within ``tolerance`` of a period of where the true period puts it, and
    is never above ``0.12 * tolerance`` (3 % at the fine tolerance of 0.25).
    """
    periods = []
    p = p_min_T
    cap = 0.12 * tolerance
    while p < p_max_T:
        periods.append(p)
        p *= 1.0 + min(cap, tolerance * p / span_T)
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


class _Surface:
    """FFT correlations of the resampled data with sliding templates."""

    def __init__(self, x, y, unit_shape, step, extend):
        self.grid, yg, wg = _uniform(x, y, step)
        self.unit = float(np.max(np.abs(yg))) or 1.0
        yg = yg / self.unit
        self.unit_shape = unit_shape
        span = x[-1] - x[0]
        self.k_half = int(np.ceil((1.0 + extend) * span / step))
        self.d = (np.arange(2 * self.k_half + 1) - self.k_half) * step
        self.nfft = sfft.next_fast_len(self.d.size, real=True)
        self.valid = self.d.size - self.grid.size + 1
        # Offset of correlation lag s: B0 = x0 + (k_half - s) * step.
        self.offsets = self.grid[0] + (self.k_half - np.arange(self.valid)) * step
        # Single precision is plenty for ranking candidates and twice as fast;
        # the local fit that follows works in double precision.
        self.wy_f = np.conj(sfft.rfft((wg * yg).astype(np.float32), self.nfft))
        self.w_f = np.conj(sfft.rfft(wg.astype(np.float32), self.nfft))
        # Without gaps every weight is one: the template's window sums are differences of
        # cumulative sums, which saves four of the six FFTs.
        self.gapless = bool(np.all(wg == 1.0))
        self.size = self.grid.size
        n, sy, syy = float(wg.sum()), float(np.dot(wg, yg)), float(np.dot(wg, yg**2))
        self.flat = (syy - sy**2 / n) * self.unit**2
        self.n, self.sy, self.syy = np.float32(n), np.float32(sy), np.float32(syy)
        self.step = step
        self._table = None

    def _templates(self, periods):
        """Half templates (lags >= 0) of every period, interpolated in one table of the
        unit shape: one shape evaluation per call instead of one per period and lag."""
        u_max = float(self.d[-1] / periods.min())
        if self._table is None or self._table[0] < u_max:
            u = np.arange(int(np.ceil(u_max / _TABLE_STEP)) + 2) * _TABLE_STEP
            self._table = (float(u[-1]), np.asarray(self.unit_shape(u), dtype=np.float32))
        h, table = _TABLE_STEP, self._table[1]
        u = (self.d[self.k_half:] / h).astype(np.float32)[None, :] / (
            periods.astype(np.float32)[:, None])
        i = np.minimum(u.astype(np.int32), table.size - 2)
        frac = u - i
        return table[i] * (1.0 - frac) + table[i + 1] * frac

    def _window_sums(self, templates):
        """Sums of the template and of its square over the data window, at every lag."""
        c = np.zeros((templates.shape[0], templates.shape[1] + 1), dtype=np.float32)
        np.cumsum(templates, axis=1, out=c[:, 1:])
        s_f = c[:, self.size:self.size + self.valid] - c[:, :self.valid]
        np.cumsum(np.square(templates), axis=1, out=c[:, 1:])
        s_ff = c[:, self.size:self.size + self.valid] - c[:, :self.valid]
        return s_f, s_ff

    def best_offsets(self, periods):
        """Per period: best chi-square (grid sums) and its offset, amplitude and background."""
        # The templates are even in the field difference: compute one half, mirror it.
        half = self._templates(periods)
        templates = np.concatenate([half[:, :0:-1], half], axis=1)
        t_f = sfft.rfft(templates, self.nfft, axis=1)
        cut = slice(0, self.valid)
        s_yf = sfft.irfft(t_f * self.wy_f, self.nfft, axis=1)[:, cut]
        if self.gapless:
            s_f, s_ff = self._window_sums(templates)
        else:
            t2_f = sfft.rfft(templates * templates, self.nfft, axis=1)
            s_f = sfft.irfft(t_f * self.w_f, self.nfft, axis=1)[:, cut]
            s_ff = sfft.irfft(t2_f * self.w_f, self.nfft, axis=1)[:, cut]
        rows = np.arange(periods.size)
        best = np.zeros(periods.size, dtype=np.intp)
        # Lags an eighth of a period apart are enough to find the best lobe of a long
        # period; the best of those is then refined at every lag around it.
        factor = 2 ** np.floor(np.log2(np.maximum(periods / (8.0 * self.step), 1.0)))
        peak = np.max(s_ff, axis=1, keepdims=True)
        for k in np.unique(factor).astype(int):
            sel = rows[factor == k]
            coarse = self._gain(s_yf[sel, ::k], s_f[sel, ::k], s_ff[sel, ::k], peak[sel])[0]
            centre = np.argmax(coarse, axis=1) * k
            if k > 1:
                cols = np.clip(centre[:, None] + np.arange(-k + 1, k)[None, :], 0,
                               self.valid - 1)
                pick = [np.take_along_axis(a[sel], cols, axis=1) for a in (s_yf, s_f, s_ff)]
                centre = cols[np.arange(sel.size), np.argmax(
                    self._gain(*pick, peak[sel])[0], axis=1)]
            best[sel] = centre
        pick = (rows, best)
        gain, amp, bkg = self._gain(s_yf[pick], s_f[pick], s_ff[pick], peak[:, 0])
        u = self.unit
        return ((float(self.syy) - gain.astype(float)) * u * u, self.offsets[best],
                amp.astype(float) * u, bkg.astype(float) * u)

    def _gain(self, s_yf, s_f, s_ff, peak):
        """Least squares of y = amp * template + bkg at every lag, in closed form; where
        that needs amp <= 0 or bkg < 0, the pure pattern (bkg = 0) instead. Returns the
        drop in the sum of squares, the amplitude and the background."""
        n, sy = self.n, self.sy
        det = s_ff * n - s_f * s_f
        amp_det = s_yf * n - s_f * sy
        bkg_det = s_ff * sy - s_f * s_yf
        both = (amp_det > 0) & (bkg_det >= 0) & (det > 0)
        safe_det = np.where(both, det, np.float32(1.0))
        safe_ff = np.maximum(s_ff, np.float32(1e-30))
        gain = np.where(both, (amp_det * s_yf + bkg_det * sy) / safe_det,
                        np.maximum(s_yf, 0.0) ** 2 / safe_ff)
        gain = np.where(s_ff > np.float32(_MIN_OVERLAP) * peak, gain, 0.0)
        amp = np.where(both, amp_det / safe_det, s_yf / safe_ff)
        bkg = np.where(both, bkg_det / safe_det, 0.0)
        return gain, amp, bkg


def _local_minima(profile, keep):
    is_min = np.r_[True, profile[1:] <= profile[:-1]] & np.r_[profile[:-1] < profile[1:], True]
    picks = np.flatnonzero(is_min)
    return picks[np.argsort(profile[picks])][:keep]


def scan_pattern(
    field_T,
    ic_A,
    unit_shape,
    *,
    max_lobes: int = 30,
    min_points_per_period: float = 4.0,
    extend: float = 1.0,
    tolerance: float = 0.25,
    coarse: float = 4.0,
    keep: int = 4,
    period_range: tuple[float, float] | None = None,
) -> ScanResult:
    """Search periods and offsets of ``unit_shape`` over sorted data.

    A coarse period grid (``coarse`` times the tolerance) is searched first;
    the neighbourhood of each of its ``keep`` best local minima is then
    searched at the full ``tolerance``.

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
    tolerance : float
        Largest misplacement of the farthest node between period grid points,
        in periods.
    keep : int
        How many distinct local minima of the period profile to return.
    period_range : (float, float), optional
        Search only periods in this range (T), within the usual limits: when another
        pattern's scan has already located the scale of the data.
    """
    x = np.asarray(field_T, dtype=float)
    y = np.asarray(ic_A, dtype=float)
    span = x[-1] - x[0]
    median_step = float(np.median(np.diff(x)))
    p_min = max(span / (2 * max_lobes), min_points_per_period * median_step)
    p_max = 2.0 * span
    if period_range is not None:
        p_min, p_max = max(p_min, period_range[0]), min(p_max, period_range[1])
        if p_max <= p_min:
            p_min, p_max = min(p_min, p_max), max(p_min, p_max)
    surface = _Surface(x, y, unit_shape, max(p_min / 4.0, span / (_MAX_GRID - 1)), extend)

    rough = period_grid(span, p_min, p_max, coarse * tolerance)
    rough_result = surface.best_offsets(rough)
    fine = np.unique(np.concatenate([
        period_grid(span, rough[max(i - 1, 0)], rough[min(i + 1, rough.size - 1)], tolerance)
        for i in _local_minima(rough_result[0], keep)
    ]))
    fine = fine[~np.isin(fine, rough)]
    periods = np.concatenate([rough, fine])
    order = np.argsort(periods)
    periods = periods[order]
    chi, offsets, amps, bkgs = (
        np.concatenate([a, b])[order] for a, b in zip(rough_result, surface.best_offsets(fine),
                                                       strict=True)
    )
    scale = x.size / float(surface.n)  # grid sums to data-point sums
    candidates = tuple(
        Candidate(
            period_T=float(periods[i]),
            field_offset_T=float(offsets[i]),
            amplitude_A=float(amps[i]),
            background_A=float(bkgs[i]),
            chisq_A2=float(chi[i] * scale),
        )
        for i in _local_minima(chi, keep)
    )
    return ScanResult(candidates, float(surface.flat * scale), periods, chi * scale)
