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

#: Offsets searched beyond each end of the window at the rough stage, in windows: the
#: fine stage searches the full ``extend`` around the rough minima.
_ROUGH_EXTEND = 0.25
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
#: Largest single-precision spectrum (bytes) of a block of periods: below the size
#: from which the C allocator maps fresh pages for each array (128 KiB by default).
_BLOCK_BYTES = 120 * 1024
#: Lags per block of the cumulative sums done as matrix products.
_PREFIX_BLOCK = 16
#: The matrix of those products (read only).
_UPPER = np.triu(np.ones((_PREFIX_BLOCK, _PREFIX_BLOCK), dtype=np.float32))
_UPPER.flags.writeable = False


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
    # Python floats: numpy scalars would make this loop several times slower.
    p, p_max, span, tolerance = float(p_min_T), float(p_max_T), float(span_T), float(tolerance)
    cap = 0.12 * tolerance
    while p < p_max:
        periods.append(p)
        p *= 1.0 + min(cap, tolerance * p / span)
    periods.append(p_max)
    return np.asarray(periods)


def _median(values):
    """np.median of a 1-d array without its overhead (a tenth of the scan's setup)."""
    m = values.size // 2
    if values.size % 2:
        return float(np.partition(values, m)[m])
    part = np.partition(values, (m - 1, m))
    return float(0.5 * (part[m - 1] + part[m]))


def _uniform(field_T, ic_A, step_T, median_gap_T=None):
    """Linear resampling with zero weight inside gaps much wider than the usual step
    (``median_gap_T``: the median step of the data, when already known)."""
    n = int(np.floor((field_T[-1] - field_T[0]) / step_T)) + 1
    grid = field_T[0] + step_T * np.arange(n)
    values = np.interp(grid, field_T, ic_A)
    gaps = np.diff(field_T)
    wide = 5.0 * (np.median(gaps) if median_gap_T is None else median_gap_T)
    if gaps.max() <= wide:
        return grid, values, np.ones(n)
    k = np.clip(np.searchsorted(field_T, grid, side="right") - 1, 0, gaps.size - 1)
    near = np.minimum(np.abs(grid - field_T[k]), np.abs(field_T[k + 1] - grid)) <= step_T
    weight = ((gaps[k] <= wide) | near).astype(float)
    return grid, values, weight


class _Surface:
    """FFT correlations of the resampled data with sliding templates.

    The templates are even in the field difference, so only their half for lags >= 0
    is computed. For the FFTs each one is laid out wrapped around index 0 (its spectrum
    is then real), and the shift to the centre goes once into the data's spectra.
    """

    def __init__(self, x, y, unit_shape, step, extend, median_gap=None):
        self.grid, yg, wg = _uniform(x, y, step, median_gap)
        self.unit = float(np.max(np.abs(yg))) or 1.0
        yg = yg / self.unit
        self.unit_shape = unit_shape
        span = x[-1] - x[0]
        self.k_half = k = int(np.ceil((1.0 + extend) * span / step))
        # Even, at least 2 k + 1: no wrap-around at the lags used.
        self.nfft = 2 * sfft.next_fast_len(k + 1, real=True)
        self.size = self.grid.size
        self.valid = 2 * k + 2 - self.size
        # Offset of correlation lag s: B0 = x0 + (k_half - s) * step.
        self.offsets = self.grid[0] + (self.k_half - np.arange(self.valid)) * step
        # The data laid out from index nfft - k (wrapped): their spectra then carry the
        # shift of the templates' centre from index 0 to k.
        self.gapless = bool(np.all(wg == 1.0))
        laid = np.zeros((1 if self.gapless else 2, self.nfft))
        laid[0, :self.size] = wg * yg
        if not self.gapless:
            laid[1, :self.size] = wg
        laid = np.roll(laid, self.nfft - k, axis=1)
        # Single precision is plenty for ranking candidates and twice as fast;
        # the local fit that follows works in double precision.
        spectra = np.conj(sfft.rfft(laid, axis=1)).astype(np.complex64)
        self.wy_f = spectra[0]
        # Without gaps every weight is one: the template's window sums are differences of
        # cumulative sums, which saves four of the six FFTs.
        self.w_f = None if self.gapless else spectra[1]
        n, sy, syy = float(wg.sum()), float(np.dot(wg, yg)), float(np.dot(wg, yg**2))
        self.flat = (syy - sy**2 / n) * self.unit**2
        self.n, self.sy, self.syy = np.float32(n), np.float32(sy), np.float32(syy)
        self.step = step
        self._table = None
        self._lags = np.arange(k + 1, dtype=np.float32)
    def table(self, u_max):
        """Value and slope of the unit shape every ``_TABLE_STEP`` up to ``u_max`` (built
        on first need, or taken from another surface of the same shape and step)."""
        if self._table is None or self._table[0] < u_max:
            # Evaluated in single precision (the table's u are exact there): several
            # times faster for the numpy shapes, and within 3e-5 of double precision.
            u = np.arange(int(np.ceil(u_max)) + 3, dtype=np.float32) * np.float32(_TABLE_STEP)
            values = np.asarray(self.unit_shape(u), dtype=np.float32)
            # Value and slope side by side, fetched as one 8-byte item per lag.
            pairs = np.stack([values[:-1], np.diff(values)], axis=1)
            self._table = (float(np.ceil(u_max)), pairs.view(np.int64).ravel())
        return self._table[1]

    def share_table(self, other, shortest_T):
        """Use ``other``'s table (same shape and step), built long enough for both."""
        u_max = max(self.k_half, other.k_half) * self.step / (_TABLE_STEP * shortest_T)
        self._table = (u_max, other.table(u_max))

    def _templates(self, periods):
        """Half templates (lags >= 0) of every period, zero-padded to half the FFT length
        plus one: linear interpolation in one table of the unit shape, one shape
        evaluation per call instead of one per period and lag."""
        k = self.k_half
        rate = self.step / (_TABLE_STEP * periods)  # table steps per grid step
        table = self.table(k * float(rate.max()))
        u = np.multiply.outer(rate.astype(np.float32), self._lags)
        # Truncation is the floor here (u >= 0), and far faster than np.floor or np.modf.
        whole = u.astype(np.int32)
        pair = np.take(table, whole).view(np.float32)
        u -= whole.astype(np.float32)
        out = np.empty((periods.size, self.nfft // 2 + 1), dtype=np.float32)
        out[:, k + 1:] = 0.0
        half = out[:, :k + 1]
        np.multiply(u, pair[:, 1::2], out=half)
        half += pair[:, 0::2]
        return out

    def _window_sums(self, half):
        """Sums of the template and of its square over the data window, at every lag, from
        cumulative sums of the half template (lags >= 0) alone."""
        k, size, valid = self.k_half, self.size, self.valid
        rows, width = half.shape[0], _PREFIX_BLOCK
        parts = np.zeros((2 * rows, -(-(k + 2) // width) * width), dtype=np.float32)
        parts[:rows, 1:k + 2] = half
        np.square(half, out=parts[rows:, 1:k + 2])
        # h[:, i]: sum of the first i half-template lags. Cumulative sums as one small
        # matrix product per block of lags plus the running block totals: several times
        # faster than np.cumsum, a serial loop.
        h = (parts.reshape(-1, width) @ _UPPER).reshape(2 * rows, -1)
        h[:, width:] += np.repeat(np.cumsum(h[:, width - 1:-1:width], axis=1), width, axis=1)
        # The window sums are even about the middle lag: the upper half only, where the
        # window lies right of the template centre (lag >= k) or straddles it.
        mid = valid // 2
        sums = []
        for part in (h[:rows], h[rows:]):
            # Separate arrays: one for both would pass the allocator's threshold for
            # fresh pages (see _BLOCK_BYTES).
            out = np.empty((rows, valid), dtype=np.float32)
            np.subtract(part[:, size:k + 2], part[:, :k + 2 - size], out=out[:, k:])
            straddle = out[:, mid:k]
            np.add(part[:, k - mid + 1:1:-1], part[:, mid + size - k:size], out=straddle)
            straddle -= part[:, 1:2]
            out[:, :mid] = out[:, :valid - mid - 1:-1]
            sums.append(out)
        return sums

    def _correlations(self, periods):
        """Sums over the data window, at every lag, of template * data, template and
        template squared (the first a view into a wider array)."""
        half = self._templates(periods)
        # The spectrum of an even template wrapped around index 0 is real: a type-1 DCT
        # of its half, without the mirrored copy.
        t_f = sfft.dct(half, type=1, axis=1)
        cut = slice(0, self.valid)
        if self.gapless:
            s_f, s_ff = self._window_sums(half[:, :self.k_half + 1])
        else:
            t2_f = sfft.dct(np.square(half), type=1, axis=1)
            s_f = sfft.irfft(t_f * self.w_f, self.nfft, axis=1)[:, cut]
            s_ff = sfft.irfft(t2_f * self.w_f, self.nfft, axis=1)[:, cut]
        # Contiguous: the sums below run faster on it than on the strided slice.
        s_yf = np.ascontiguousarray(sfft.irfft(t_f * self.wy_f, self.nfft, axis=1)[:, cut])
        return s_yf, s_f, s_ff

    def best_lags(self, periods):
        """Per period: the largest drop in chi-square (grid sums, unit data) over every
        lag, that lag, and the three sums there."""
        rows = np.arange(periods.size)
        best = np.empty(periods.size, dtype=np.intp)
        gain = np.empty(periods.size, dtype=np.float32)
        at_best = np.empty((3, periods.size), dtype=np.float32)
        # A few periods at a time keep every array small: large ones are fresh pages
        # from the system at each call, and faulting them in took more time than the sums.
        block = max(1, _BLOCK_BYTES // (4 * self.nfft + 4))
        for start in range(0, periods.size, block):
            part = slice(start, min(start + block, periods.size))
            sums = self._correlations(periods[part])
            floor = np.maximum(np.float32(_MIN_OVERLAP) * np.max(sums[2], axis=1, keepdims=True),
                               np.float32(1e-30))
            score = self._score(*sums, floor)
            best[part] = lag = np.argmax(score, axis=1)
            local = rows[:lag.size]
            gain[part] = score[local, lag]
            for i, a in enumerate(sums):
                at_best[i, part] = a[local, lag]
        return gain, best, at_best

    def best_offsets(self, periods):
        """Per period: best chi-square (grid sums) and its offset, amplitude and background."""
        gain, best, at_best = self.best_lags(periods)
        return (self.chisq(gain), self.offsets[best], *self.amplitudes(at_best))

    def chisq(self, gain):
        """Chi-square (grid sums) left after a drop ``gain`` from :meth:`best_lags`."""
        return (float(self.syy) - gain.astype(float)) * self.unit**2

    def amplitudes(self, at_best):
        """Amplitude and background (data units) from the sums at a lag."""
        s_yf, s_f, s_ff = at_best
        n, sy = self.n, self.sy
        det = s_ff * n - s_f * s_f
        amp_det = s_yf * n - s_f * sy
        bkg_det = s_ff * sy - s_f * s_yf
        both = (amp_det > 0) & (bkg_det >= 0) & (det > 0)
        safe_det = np.where(both, det, np.float32(1.0))
        safe_ff = np.maximum(s_ff, np.float32(1e-30))
        amp = np.where(both, amp_det / safe_det, s_yf / safe_ff)
        bkg = np.where(both, bkg_det / safe_det, np.float32(0.0))
        return amp.astype(float) * self.unit, bkg.astype(float) * self.unit

    def _score(self, s_yf, s_f, s_ff, floor):
        """Least squares of y = amp * template + bkg at every lag, in closed form; where
        that needs amp <= 0 or bkg < 0, the pure pattern (bkg = 0) instead; zero where
        the template's overlap with the window is at most ``floor`` (> 0). Returns the
        drop in the sum of squares, in few passes and without masked copies."""
        sy, mean, inv_n = self.sy, self.sy / self.n, np.float32(1.0) / self.n
        above = s_ff > floor
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            # Pure pattern: max(s_yf, 0)^2 / s_ff, zero at or below the floor.
            inv_ff = np.maximum(s_ff, floor)
            np.reciprocal(inv_ff, out=inv_ff)
            inv_ff *= above
            score = np.maximum(s_yf, np.float32(0.0))
            score *= score
            score *= inv_ff
            # With background, where it is admissible: amp_det / n, det / n, bkg_det's sign.
            det = np.square(s_f)
            det *= inv_n
            np.subtract(s_ff, det, out=det)
            both = det > 0
            both &= above
            both &= np.greater_equal(s_ff * sy, s_f * s_yf)
            amp = s_f * mean
            np.subtract(s_yf, amp, out=amp)
            both &= amp > 0
            amp *= amp
            amp /= det
            amp += sy * mean
            amp *= both
        # Where both are admissible the fit with background gains at least as much as
        # the pure pattern; elsewhere amp is 0 or NaN (0 * inf), which fmax passes over.
        return np.fmax(score, amp, out=score)


def _local_minima(profile, keep):
    """Indices of the ``keep`` lowest local minima of ``profile`` (ends included)."""
    below_left = np.empty(profile.size, dtype=bool)
    below_right = np.empty(profile.size, dtype=bool)
    below_left[0] = below_right[-1] = True
    np.less_equal(profile[1:], profile[:-1], out=below_left[1:])
    np.less(profile[:-1], profile[1:], out=below_right[:-1])
    picks = np.flatnonzero(below_left & below_right)
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

    A coarse period grid (``coarse`` times the tolerance) is searched first, over
    offsets up to ``min(extend, 0.25)`` windows beyond each end; the neighbourhood of
    each of its ``keep`` best local minima is then searched at the full ``tolerance``
    and the full ``extend``. The profile's values at the coarse periods are therefore
    upper bounds where ``extend`` > 0.25 (the best offset may lie farther out); every
    period's offset is the best of every grid lag searched for it.

    Parameters
    ----------
    field_T, ic_A : ndarray
        Sorted, finite data.
    unit_shape : callable
        Unit-height pattern of the reduced flux ``u`` (peak 1 at ``u = 0``).
    max_lobes : int
        Shortest period searched is the window over ``2 * max_lobes``.
    extend : float
        Offsets are searched up to ``extend`` windows beyond each end (around the
        coarse minima), so a main lobe outside the window can still be located from
        the side lobes.
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
    median_step = _median(np.diff(x))
    p_min = max(span / (2 * max_lobes), min_points_per_period * median_step)
    p_max = 2.0 * span
    if period_range is not None:
        p_min, p_max = max(p_min, period_range[0]), min(p_max, period_range[1])
        if p_max <= p_min:
            p_min, p_max = min(p_min, p_max), max(p_min, p_max)
    step = max(p_min / 4.0, span / (_MAX_GRID - 1))
    surface = _Surface(x, y, unit_shape, step, extend, median_step)
    rough = period_grid(span, p_min, p_max, coarse * tolerance)
    near = surface
    if extend > _ROUGH_EXTEND:
        # The rough stage slides the templates over offsets near the window only (half
        # the lags, two thirds of the FFT length); its chi-squares are then upper bounds,
        # and the fine stage searches every offset around its minima.
        near = _Surface(x, y, unit_shape, step, _ROUGH_EXTEND, median_step)
        near.share_table(surface, float(rough[0]))
    rough_gain, rough_lag, rough_sums = near.best_lags(rough)
    fine = np.unique(np.concatenate([
        period_grid(span, rough[max(i - 1, 0)], rough[min(i + 1, rough.size - 1)], tolerance)
        for i in _local_minima(-rough_gain, keep)
    ]))
    fine = fine[~np.isin(fine, rough)]
    fine_gain, fine_lag, fine_sums = surface.best_lags(fine)
    order = np.argsort(np.concatenate([rough, fine]))
    periods = np.concatenate([rough, fine])[order]
    gain = np.concatenate([rough_gain, fine_gain])[order]
    offsets = np.concatenate([near.offsets[rough_lag], surface.offsets[fine_lag]])[order]
    picks = _local_minima(-gain, keep)
    # Amplitude and background only where they are reported.
    amps, bkgs = surface.amplitudes(np.concatenate([rough_sums, fine_sums], axis=1)[
        :, order[picks]])
    scale = x.size / float(surface.n)  # grid sums to data-point sums
    chi = surface.chisq(gain) * scale
    candidates = tuple(
        Candidate(
            period_T=float(periods[i]),
            field_offset_T=float(offsets[i]),
            amplitude_A=float(amp),
            background_A=float(bkg),
            chisq_A2=float(chi[i]),
        )
        for i, amp, bkg in zip(picks, amps, bkgs, strict=True)
    )
    return ScanResult(candidates, float(surface.flat * scale), periods, chi)
