"""Searches along the bias axis: the first (or last) point beyond a level, the largest value.

Arrays are (n_field, n_bias) with the bias in acquisition order along axis 1.
Rows are searched in blocks small enough for their masks to stay in the
processor's cache, so a search reads the map at most once and never writes a
map-sized temporary. Invalid points are NaN and never satisfy a comparison.
"""

from __future__ import annotations

import numpy as np

from .criteria import Deviation

#: Elements per block of rows in the searches: a block's masks stay in the processor's
#: cache, so a search reads the map once and never writes a map-sized temporary.
BLOCK = 1 << 17


def row_blocks(n_rows, n_cols):
    """``(start, stop)`` of consecutive row blocks of about :data:`BLOCK` elements."""
    step = max(1, BLOCK // max(n_cols, 1))
    return [(r, min(r + step, n_rows)) for r in range(0, n_rows, step)]


def first_true(mask):
    """Index of the first True per row and whether there is one (one pass over the mask)."""
    k = np.argmax(mask, axis=1)
    return k, mask[np.arange(mask.shape[0]), k]


#: Every this many columns a first look: the full search then stops at the first hit.
COARSE = 32


def _first_in_order(search, n, forward):
    """First True per row of a block, in column order (``forward``) or from the end.

    ``search(cols)`` gives ``first_true`` of the block's mask over the column
    slice ``cols``. Every ``COARSE``-th column is looked at first; the first True is
    at or before the first one seen there, so only the columns up to it are read
    (all of them for rows with none). The answer is exactly that of one full pass,
    even where the first look's values differ from the blocks' by round-off (a row
    seen there but not found before ``stop`` is searched on); from the end it counts
    from the last column.
    """
    def cols(start, stop, step=1):
        if forward:
            return slice(start, stop, step)
        # Column j from the end is n - 1 - j; the stop maps past the first column.
        return slice(n - 1 - start, None if stop >= n else n - 1 - stop, -step)

    seen_k, seen = search(cols(0, n, COARSE))
    if not seen.any():
        return search(cols(0, n))
    stop = int(seen_k[seen].max()) * COARSE + 1
    k, found = search(cols(0, stop))
    rest = ~found
    if rest.any() and stop < n:
        # Rows with no hit yet: the remaining columns.
        k_rest, f_rest = search(cols(stop, n))
        k = np.where(rest & f_rest, k_rest + stop, k)
        found = found | (rest & f_rest)
    return k, found


def _nothing(n_rows):
    none = np.zeros(n_rows, dtype=bool)
    return np.full(n_rows, np.nan), none, none, np.full(n_rows, np.nan)


def crossing(level, quantity, bias_A, candidates, upward=True, shape=None, noise=None):
    """|I| where ``quantity`` crosses ``level`` among ``candidates``, and its uncertainty.

    ``upward`` (switching, |I| growing): the first candidate above the level,
    bracketed with the candidate before it. Otherwise (retrapping, |I|
    shrinking): the last candidate above the level, bracketed with the one
    after it, so that noise dips on the resistive branch do not end it early.
    With a ``shape`` (a name in :data:`.onset.SHAPES`) the current at the level
    comes from the straight line, in the shape's variables, through the points
    beyond it (:func:`.onset.shaped_crossing`); without one, by linear
    interpolation across the step. Returns ``(current_A, found, unbracketed,
    uncertainty_A)``: ``unbracketed`` marks rows where no candidate lies on the
    other side of the crossing (resistive from the first step when switching);
    the uncertainty is step / sqrt(12) where the step's inside is not resolved
    (linear interpolation, a jump), else the propagated ``noise`` of the quantity.
    With a shape, a row above the level from the first step away from zero bias is
    bracketed by zero bias (where the quantity is zero) rather than censored.
    """
    if quantity.shape[1] == 0:
        return _nothing(quantity.shape[0])
    rows = np.arange(quantity.shape[0])
    level = np.broadcast_to(np.asarray(level, dtype=float), rows.shape)[:, None]
    everywhere = isinstance(candidates, np.ndarray) and candidates.strides == (0, 0)
    if isinstance(quantity, Deviation):
        value_at = quantity.at

        def above_block(r0, r1, cols):
            return Deviation(quantity.signal[r0:r1, cols], quantity.offset[r0:r1]).above(
                level[r0:r1])

        def above_at(r, c):
            return quantity.above_at(r, c, level[r, 0])
    else:
        def value_at(r, c):
            return quantity[r, c]

        def above_block(r0, r1, cols):
            return quantity[r0:r1, cols] > level[r0:r1]

        def above_at(r, c):
            return quantity[r, c] > level[r, 0]
    n = quantity.shape[1]
    k, found = np.empty(rows.size, dtype=np.intp), np.empty(rows.size, dtype=bool)
    for r0, r1 in row_blocks(rows.size, n):
        def search(cols, r0=r0, r1=r1):
            above = above_block(r0, r1, cols)
            if not everywhere:
                above &= candidates[r0:r1, cols]
            return first_true(above)
        k[r0:r1], found[r0:r1] = _first_in_order(search, n, upward)
    if upward:
        other = k - 1
    else:
        k = n - 1 - k
        other = k + 1

    def above_point(r, c):
        return above_at(r, c) & (True if everywhere else candidates[r, c])

    inside = (other >= 0) & (other < n)
    other = np.clip(other, 0, n - 1)
    bracketed = found & inside & candidates[rows, other] & ~above_point(rows, other)
    b0, b1 = np.abs(bias_A[rows, other]), np.abs(bias_A[rows, k])
    q0, q1 = value_at(rows, other), value_at(rows, k)
    if shape is None:
        with np.errstate(all="ignore"):
            t = np.clip((level[:, 0] - q0) / (q1 - q0), 0.0, 1.0)
        inner = b0 + t * (b1 - b0)
        spread = np.abs(b1 - b0) / np.sqrt(12.0)
    else:
        from .onset import SHAPES, shaped_crossing

        # Resistive from the first step away from zero: at zero bias every I-V curve
        # is at the offset, so zero bias brackets the crossing from below.
        beyond = k + (1 if upward else -1)
        beyond = np.clip(beyond, 0, n - 1)
        first_step = found & ~bracketed & (b1 <= 1.5 * np.abs(np.abs(bias_A[rows, beyond]) - b1))
        b0 = np.where(first_step, 0.0, b0)
        q0 = np.where(first_step, 0.0, q0)
        bracketed = bracketed | first_step
        inner, spread, _ = shaped_crossing(
            SHAPES[shape], level[:, 0], value_at, lambda c: above_point(rows, c), rows, k,
            b0, b1, q0, q1, bias_A, 1 if upward else -1, noise)
    current = np.where(bracketed, inner, np.where(found, b1, np.nan))
    return current, found, found & ~bracketed, np.where(bracketed, spread, np.nan)


def peak(quantity, bias_A, candidates):
    """|I| at the largest ``quantity`` among candidates, refined by a parabola through 3 points.

    Returns ``(current_A, found, at_edge, uncertainty_A)``; ``at_edge`` marks a peak
    on the first or last candidate, where no maximum was bracketed; the uncertainty
    is the local step / sqrt(12) (where in the step the peak lies is not resolved).
    """
    if quantity.shape[1] == 0:
        return _nothing(quantity.shape[0])
    rows = np.arange(quantity.shape[0])
    n = quantity.shape[1]
    everywhere = isinstance(candidates, np.ndarray) and candidates.strides == (0, 0)
    k = np.empty(rows.size, dtype=np.intp)
    for r0, r1 in row_blocks(rows.size, n):
        block = quantity[r0:r1] if everywhere else np.where(candidates[r0:r1],
                                                            quantity[r0:r1], -np.inf)
        k[r0:r1] = np.argmax(block, axis=1)

    def masked(c):
        return np.where(candidates[rows, c], quantity[rows, c], -np.inf)

    y1 = masked(k)
    found = np.isfinite(y1)
    lo, hi = np.clip(k - 1, 0, n - 1), np.clip(k + 1, 0, n - 1)
    inner = (k > 0) & (k < n - 1) & candidates[rows, lo] & candidates[rows, hi]
    y0, y2 = masked(lo), masked(hi)
    with np.errstate(all="ignore"):
        denom = y0 - 2 * y1 + y2
        shift = np.where(inner & (denom < 0), 0.5 * (y0 - y2) / denom, 0.0)
    b_lo, b_k, b_hi = (np.abs(bias_A[rows, c]) for c in (lo, k, hi))
    step = np.where(shift >= 0, b_hi - b_k, b_k - b_lo)
    current = np.where(found, b_k + np.clip(shift, -1, 1) * step, np.nan)
    spread = np.where(found, np.abs(b_hi - b_lo) / (2.0 * np.sqrt(12.0)), np.nan)
    return current, found, found & ~inner, spread
