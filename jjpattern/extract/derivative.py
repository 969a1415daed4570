"""dV/dI of a dense voltage map with one bias row, computed only where a search reads it.

The derivative is the Savitzky-Golay one of :func:`.criteria.differential` (a
quadratic over ``window`` points, NaN within half a window of a turn or an end
of the sweep): a block is the same scipy.ndimage convolution of the same
voltages, divided by the same convolution of the bias, so the same numbers to
the last bit; single points are summed here, equal to round-off (ndimage's own
order of summation differs between scipy versions). A search over a block of
rows asks for the columns it reads, so the convolution, the division and the
comparison run over a block that stays in the processor's cache, and no
map-sized array is written; a threshold search that stops at the transition
never differentiates the resistive branch.
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage
from scipy import signal as sps


class Derivative:
    """dV/dI over columns ``[c0, c1)`` of ``signal`` (n_field, n_bias), read by indexing.

    ``d[rows, cols]`` takes slices (a block, computed by one convolution of the
    columns it spans) or integer arrays (points, each from its own ``window``
    voltages); :meth:`columns` narrows to a run of columns without computing.
    """

    def __init__(self, signal, bias_row, window=7, *, _parts=None, c0=0, c1=None):
        self.signal = signal
        n = signal.shape[1]
        if _parts is None:
            from .criteria import near_turns

            coeffs = sps.savgol_coeffs(window, 2, deriv=1, use="conv")
            b = np.asarray(bias_row, dtype=float)[None, :]
            _parts = (coeffs, window // 2,
                      ndimage.convolve1d(b, coeffs, axis=1, mode="nearest")[0],
                      near_turns(b, window)[0])
        self._parts = _parts
        self.coeffs, self.half, self.db, self.gap = _parts
        self.c0, self.c1 = c0, n if c1 is None else c1

    @property
    def shape(self):
        return (self.signal.shape[0], self.c1 - self.c0)

    def columns(self, start, stop):
        """The derivative over view columns ``[start, stop)``, not yet computed."""
        return Derivative(self.signal, None, _parts=self._parts, c0=self.c0 + start,
                          c1=self.c0 + stop)

    def __getitem__(self, key):
        rows, cols = key if isinstance(key, tuple) else (key, slice(None))
        if isinstance(rows, slice) and isinstance(cols, slice):
            return self._block(rows, cols)
        if isinstance(rows, slice):
            rows = np.arange(self.shape[0])[rows][:, None]
        return self._points(np.asarray(rows), np.asarray(cols) + self.c0)

    def _finish(self, dv, cols, in_place=True):
        """Divide by the bias derivative and blank the turns, at absolute columns ``cols``."""
        out = np.divide(dv, self.db[cols], out=dv if in_place else None)
        gap = self.gap[cols]
        if gap.any():
            out[..., gap] = np.nan
        return out

    def _block(self, rows, cols):
        span = range(self.c0, self.c1)[cols]
        if len(span) == 0:
            return np.empty((len(range(self.shape[0])[rows]), 0))
        if abs(span.step) > self.half:
            # Sparse columns (a first look every few columns): each from its own window.
            r = np.arange(self.shape[0])[rows][:, None]
            return self._points(r, np.asarray(span)[None, :])
        lo, hi = min(span[0], span[-1]), max(span[0], span[-1]) + 1
        a, z = max(lo - self.half, 0), min(hi + self.half, self.signal.shape[1])
        dv = ndimage.convolve1d(self.signal[rows, a:z], self.coeffs, axis=1, mode="nearest")
        stop = span.stop - a
        dv = dv[:, slice(span.start - a, stop if stop >= 0 else None, span.step)]
        return self._finish(dv, np.asarray(span), in_place=False)

    def _points(self, rows, cols):
        """Values at broadcast ``rows`` and absolute ``cols``, each from its window: the
        convolved map's to round-off (a search's first look; its answer comes from
        blocks, see ``search._first_in_order``)."""
        n, h = self.signal.shape[1], self.half
        weights = self.coeffs[::-1]  # the correlation's taps, offsets -h .. h

        def tap(j):
            return self.signal[rows, np.clip(cols + j, 0, n - 1)] * weights[h + j]

        dv = tap(h)
        for j in range(-h, h):
            dv += tap(j)
        return self._finish(dv, np.broadcast_to(cols, dv.shape))
