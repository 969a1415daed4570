"""Vectorised pieces of critical-current extraction; every function works on whole maps.

Arrays are (n_field, n_bias) with the bias in acquisition order along axis 1.
Invalid points are NaN and never satisfy a comparison.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import ndimage
from scipy import signal as sps

_MAD = 1.482602218505602


class Deviation:
    """``|signal - offset|`` per row, never formed over the whole map.

    Comparisons with a level become two comparisons of the raw signal, and the
    value itself is computed only at the few points that need it, which saves
    a full copy of the map for the voltage criterion.
    """

    def __init__(self, signal, offset):
        self.signal = signal
        self.offset = np.asarray(offset, dtype=float).reshape(-1, 1)

    @property
    def shape(self):
        return self.signal.shape

    def above(self, level):
        """Mask of points where the deviation exceeds ``level`` (a scalar or a column)."""
        return (self.signal > self.offset + level) | (self.signal < self.offset - level)

    def at(self, rows, cols):
        return np.abs(self.signal[rows, cols] - self.offset[rows, 0])

    def above_at(self, rows, cols, level):
        """:meth:`above` at single points (``level`` per point), by the same comparisons."""
        v, o = self.signal[rows, cols], self.offset[rows, 0]
        return (v > o + level) | (v < o - level)


@dataclass(frozen=True)
class Segment:
    """Part of every row (a sweep polarity and direction, or a bias range).

    With one bias row shared by the whole map the part is a set of columns, so
    only that part of the map is touched; with a bias per row it is a mask.
    """

    cols: np.ndarray | None = None
    mask: np.ndarray | None = None
    all_finite: bool = False

    def take(self, a):
        """``(sub-array, valid)`` of a map-shaped array; a view where the columns are a run."""
        if isinstance(a, Deviation):
            sub, valid = self.take(a.signal)
            return Deviation(sub, a.offset), valid
        if hasattr(a, "columns") and self.cols is not None and self.all_finite:
            # A derivative computed where it is read (.derivative): narrowed, not computed.
            c = self.cols
            run = c.size > 0 and c[-1] - c[0] == c.size - 1
            sub = a.columns(c[0], c[-1] + 1) if run else a[:, c]
            return sub, np.broadcast_to(np.True_, sub.shape)
        if self.cols is not None:
            c = self.cols
            run = c.size > 0 and c[-1] - c[0] == c.size - 1
            sub = a[:, c[0]:c[-1] + 1] if run else a[:, c]
            if self.all_finite:
                return sub, np.broadcast_to(np.True_, sub.shape)
            return sub, np.isfinite(sub)
        return a, self.mask & np.isfinite(a)


    def bias(self, bias_A):
        """The bias over the segment, shaped like :meth:`take`'s sub-array."""
        if self.cols is not None:
            return np.broadcast_to(bias_A[0, self.cols], (bias_A.shape[0], self.cols.size))
        return bias_A


def shared(bias_A) -> bool:
    """True when every row uses the same bias values (a broadcast row)."""
    return bias_A.ndim == 2 and bias_A.strides[0] == 0


def select(bias_A, predicate, all_finite=False) -> Segment:
    """Segment where ``predicate(bias rows)`` holds (it gets a 2-D array of rows).

    ``all_finite`` promises that the map holds no NaN, which saves a pass.
    """
    if shared(bias_A):
        return Segment(cols=np.flatnonzero(predicate(bias_A[:1])[0]), all_finite=all_finite)
    with np.errstate(invalid="ignore"):
        return Segment(mask=predicate(bias_A), all_finite=all_finite)


def nanmedian_rows(a):
    """Median of the finite entries of each row of ``a`` (2-D), vectorised."""
    return _row_median(a, np.isfinite(a))


def sample_rows(n_rows, at_most=128) -> int:
    """Row step that keeps at most ``at_most`` rows for a map-wide estimate."""
    return max(1, int(np.ceil(n_rows / at_most)))


def directions(b):
    """Masks (outbound, inbound) of rows ``b``: |I| growing (switching) or shrinking.

    Each point takes the direction of the step that reached it; the first point
    takes that of the step leaving it. A jump much larger than the usual step (the
    source reset to the start of a sweep) belongs to neither direction.
    """
    mag = np.abs(b)
    step = np.diff(mag, axis=1)
    arriving = np.concatenate([step[:, :1], step], axis=1)
    with np.errstate(invalid="ignore"):
        usual = nanmedian_rows(np.abs(step))[:, None]
        jump = np.abs(arriving) > 5.0 * usual
    return (arriving > 0) & ~jump, (arriving < 0) & ~jump


def near_zero(fraction):
    """Predicate: |I| within ``fraction`` of the row's largest |I|."""
    def predicate(b):
        return np.abs(b) <= fraction * np.nanmax(np.abs(b), axis=1, keepdims=True)
    return predicate


def median_rows(a):
    """``np.median(a, axis=1)`` of a 2-D array of finite values, by one partition.

    np.median also moves each row's largest entry into place to look for NaN, which
    costs it more than the middle itself; without NaN the numbers are the same.
    """
    n = a.shape[1]
    if n == 0:
        return np.median(a, axis=1)
    half = n // 2
    part = np.partition(a, half, axis=1)
    if n % 2:
        return part[:, half]
    # The entry below the middle is the largest of the lower part.
    return 0.5 * (part[:, :half].max(axis=1) + part[:, half])


def _row_median(a, valid):
    """Median of the valid entries of each row (NaN for a row with none), vectorised."""
    if valid.all():
        return median_rows(a)
    # One sort with the invalid entries pushed to the end, then the middle by count:
    # np.nanmedian would loop over the rows in Python.
    ordered = np.sort(np.where(valid, a, np.inf), axis=1)
    n = valid.sum(axis=1)
    rows = np.arange(a.shape[0])
    lo = ordered[rows, np.clip((n - 1) // 2, 0, None)]
    hi = ordered[rows, np.clip(n // 2, 0, a.shape[1] - 1)]
    return np.where(n > 0, 0.5 * (lo + hi), np.nan)


def row_offset(signal, bias_A, noise=None, all_finite=False):
    """Amplifier offset per row: median voltage within 5 % of zero bias (supercurrent branch).

    A row that is resistive near zero bias (over a fifth of those points more
    than 5 ``noise`` from their median: at or near a node) takes the median of
    the points within one bias step of zero instead. At zero bias every I-V curve
    is at the offset, and the points one step either side are at it too or
    straddle it symmetrically (ohmic), where the median over 5 % of zero bias
    lands anywhere between two ohmic points (up to half of Rn times a bias step
    off) or is pulled by one polarity that is resistive and one that is not.
    ``all_finite`` promises a map without NaN (the engine has checked).
    """
    seg = select(bias_A, near_zero(0.05), all_finite)
    sub, valid = seg.take(signal)
    offset = _row_median(sub, valid)
    if noise is None or not noise > 0 or sub.shape[1] < 3:
        return offset
    with np.errstate(invalid="ignore"):
        far = np.abs(sub - offset[:, None]) > 5.0 * noise
    rows = np.flatnonzero(np.count_nonzero(far & valid, axis=1) > 0.2 * valid.sum(axis=1))
    if rows.size == 0:
        return offset
    if seg.cols is not None and valid.strides == (0, 0):
        # One bias row and no gaps: the points next to zero are the same columns in every row.
        b = np.abs(seg.bias(bias_A)[0])
        close = b <= b.min() + 1.01 * np.median(np.abs(np.diff(b)))
        offset[rows] = median_rows(sub[rows][:, close])
        return offset
    v, ok, b = sub[rows], np.broadcast_to(valid, sub.shape)[rows], np.abs(seg.bias(bias_A)[rows])
    with np.errstate(all="ignore"):
        nearest = np.min(np.where(ok, b, np.inf), axis=1, keepdims=True)
        step = nanmedian_rows(np.abs(np.diff(b, axis=1)))[:, None]
        close = ok & (b <= nearest + 1.01 * step)
    local = _row_median(v, close)
    offset[rows] = np.where(np.isfinite(local), local, offset[rows])
    return offset


def zero_branch_noise(signal, bias_A):
    """Point-to-point noise of the signal: MAD of second differences along the sweep.

    Second differences vanish on every straight piece of an I-V curve (the
    supercurrent branch, the ohmic branch) and are large only at the few
    points where it bends or jumps, which the median ignores. Taken over at
    most 64 sampled rows together.
    """
    step = sample_rows(signal.shape[0], at_most=64)
    sub = signal[::step]
    second = (sub[:, 2:] - 2.0 * sub[:, 1:-1] + sub[:, :-2]).ravel()
    finite = np.isfinite(second)
    if not finite.all():
        second = second[finite]
    if second.size == 0:
        return float("nan")
    second = second[::max(1, second.size // 20000)][None, :]  # 20 000 values fix a MAD to 0.5 %
    centred = np.abs(second - median_rows(second)[0])
    return float(_MAD * median_rows(centred)[0] / np.sqrt(6.0))


def normal_resistance(signal, bias_A, kind, fraction=0.7):
    """Rn from the high-bias part, per sampled row: the slope of V(I), or the median dV/dI."""
    step = sample_rows(signal.shape[0])
    signal, bias_A = signal[::step], bias_A[::step]
    seg = select(bias_A, lambda b: ~near_zero(fraction)(b))
    sub, valid = seg.take(signal)
    if kind == "dvdi":
        return _row_median(sub, valid)
    b = seg.bias(bias_A)
    with np.errstate(all="ignore"):
        n = valid.sum(axis=1)
        bb, vv = np.where(valid, b, 0.0), np.where(valid, sub, 0.0)
        mb, mv = bb.sum(1) / n, vv.sum(1) / n
        cov = np.where(valid, (b - mb[:, None]) * (sub - mv[:, None]), 0.0).sum(1)
        var = np.where(valid, (b - mb[:, None]) ** 2, 0.0).sum(1)
        return cov / var


def differential(signal, bias_A, window=7, dense=None):
    """dV/dI along each row with a Savitzky-Golay derivative (quadratic, ``window`` points).

    Points within half a window of a turn or an end of the sweep (where the bias
    reverses and the derivative means nothing) are NaN. The result is the one new
    map-sized array. ``dense=True`` promises a map without NaN (the engine has
    checked), which saves a pass.
    """
    window = max(5, window | 1)
    if signal.shape[1] < 2:  # one bias point has no derivative
        return np.full(signal.shape, np.nan)
    if signal.shape[1] < window:
        return np.gradient(signal, axis=1) / np.gradient(bias_A, axis=1)
    dense = dense or all_finite(signal)
    coeffs = sps.savgol_coeffs(window, 2, deriv=1, use="conv")
    source = signal if dense else _fill_nan(signal)
    dv = ndimage.convolve1d(source, coeffs, axis=1, mode="nearest")
    one_row = shared(bias_A)
    b = bias_A[:1] if one_row else _fill_nan(bias_A)
    db = ndimage.convolve1d(b, coeffs, axis=1, mode="nearest")
    near_turn = near_turns(b, window)
    with np.errstate(all="ignore"):
        out = np.divide(dv, db, out=dv)
    if one_row:
        out[:, near_turn[0]] = np.nan
    else:
        out[near_turn] = np.nan
    if not dense:
        out[~np.isfinite(signal)] = np.nan
    return out


def all_finite(a) -> bool:
    """True when every entry of ``a`` is finite: one sum, no map-sized mask.

    A NaN or an infinity makes the sum non-finite; only a sum that overflows
    needs the entry-by-entry check.
    """
    with np.errstate(all="ignore"):
        if np.isfinite(np.sum(a)):
            return True
    return bool(np.isfinite(a).all())


def near_turns(b, window=7):
    """Mask of points within half a ``window`` of a turn or an end of each bias row ``b``.

    There the derivative of :func:`differential` is NaN; the engine leaves these
    points out of its segments so that a dense map stays on the dense path.
    """
    window = max(5, window | 1)
    if b.shape[1] < window:  # too short for the filter: differential() takes a gradient
        return np.zeros(b.shape, dtype=bool)
    step = np.sign(np.diff(b, axis=1))
    turn = np.zeros(b.shape, dtype=bool)
    turn[:, 1:-1] = step[:, 1:] != step[:, :-1]
    turn[:, 0] = turn[:, -1] = True
    return np.convolve(turn.ravel(), np.ones(window), mode="same").reshape(b.shape) > 0


def _fill_nan(a):
    """Carry the last finite value forward along rows (NaN padding of ragged rows)."""
    a = np.asarray(a, dtype=float)
    bad = ~np.isfinite(a)
    if not bad.any():
        return a
    idx = np.where(~bad, np.arange(a.shape[1]), 0)
    np.maximum.accumulate(idx, axis=1, out=idx)
    filled = a[np.arange(a.shape[0])[:, None], idx]
    return np.where(np.isfinite(filled), filled, 0.0)

