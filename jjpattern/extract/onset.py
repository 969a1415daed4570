"""Where a quantity crosses its level between two bias steps, read on the shape it crosses.

On the resistively shunted junction (RSJ; Stewart 1968, McCumber 1968) the
voltage above Ic is V = Rn sqrt(I^2 - Ic^2): V^2 is a straight line in I^2,
and (V/I)^2 = Rn^2 (1 - Ic^2 / I^2) a straight line in 1/I^2. A straight line
through the first few points beyond the level, in those variables, gives the
current at the level without the kink at Ic that linear interpolation across
the step straddles (which reads about half a step low). When the point before
the level is on the curve too, the two points are interpolated in those
variables. Where the line places the level more than a step outside the
bracket (a hysteretic jump from zero onto the ohmic branch) the step holds no
information on where inside it the junction switched: the middle of the step,
with the uniform distribution's standard deviation step / sqrt(12). Where the
line is less precise than that (noise large against the voltage of a step, or
a crossing near zero bias where I^2 is flat), linear interpolation, with the
same step / sqrt(12).

Every function works on one index per row, vectorised over rows.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Points beyond the level used for the straight line.
POINTS = 3
#: The line's zero must lie this many of its standard errors below the point before
#: the level, and that point within as many of the line, for it to count as on the curve.
KINK_SIGMAS = 3.0
#: A point reading this many noise units from zero is on the resistive branch.
RESISTIVE_SIGMAS = 2.5
_SQRT12 = np.sqrt(12.0)


@dataclass(frozen=True)
class Shape:
    """Variables ``(X(|I|), Q(quantity))`` in which the onset is a straight line."""

    name: str
    q: object  # quantity -> Q
    dq: object  # dQ/dquantity
    x: object  # |I| -> X
    current: object  # X -> |I|
    dx: object  # dX/d|I|


def _current_from_inverse_square(x):
    with np.errstate(all="ignore"):
        return 1.0 / np.sqrt(-x)


SHAPES = {
    "rsj-voltage": Shape("V^2 linear in I^2", np.square, lambda q: 2.0 * np.abs(q),
                         np.square, np.sqrt, lambda b: 2.0 * b),
    "rsj-resistance": Shape("(V/I)^2 linear in 1/I^2", np.square,
                            lambda q: 2.0 * np.abs(q), lambda b: -1.0 / b**2,
                            _current_from_inverse_square, lambda b: 2.0 / b**3),
}


def _line(shape, value_at, beyond_ok, rows, k, bias_A, step, noise):
    """Weighted straight line ``Q = qm + slope (X - xm)`` through the points beyond the level.

    Weights are 1 / var(Q) with var(Q) from the noise of the quantity (relative
    weights from dQ when the noise is zero). Returns ``(xm, qm, slope, w_total,
    sxx, n)``: the variance of the line at X is ``1/w_total + (X - xm)^2 / sxx``.
    """
    n_cols = bias_A.shape[1]
    xs, qs, oks = [], [], []
    for j in range(POINTS):
        cols = k + step * j
        inside = (cols >= 0) & (cols < n_cols)
        cols = np.clip(cols, 0, n_cols - 1)
        oks.append(inside & beyond_ok(cols))
        xs.append(shape.x(np.abs(bias_A[rows, cols])))
        qs.append(value_at(rows, cols))
    ok = np.stack(oks, 1)
    x, q = np.where(ok, np.stack(xs, 1), 0.0), np.stack(qs, 1)
    sigma = shape.dq(q) * noise + noise**2 if noise else shape.dq(q)
    w = np.where(ok, 1.0 / sigma**2, 0.0)
    big_q = np.where(ok, shape.q(q), 0.0)
    w_total = w.sum(1)
    xm = (w * x).sum(1) / w_total
    qm = (w * big_q).sum(1) / w_total
    dx = np.where(ok, x - xm[:, None], 0.0)
    sxx = (w * dx**2).sum(1)
    slope = (w * dx * (big_q - qm[:, None])).sum(1) / sxx
    return xm, qm, slope, w_total, sxx, ok.sum(1)


def shaped_crossing(shape: Shape, level, value_at, beyond_ok, rows, k, b0, b1, q0, q1,
                    bias_A, step, noise):
    """|I| at ``level`` between two bias steps, read on the shape.

    Parameters
    ----------
    level : ndarray
        Level per row.
    value_at : callable
        ``value_at(rows, cols)``: the quantity at those points.
    beyond_ok : callable
        ``beyond_ok(cols)``: mask of rows whose point ``cols`` is a usable point
        beyond the level (inside the sweep part, above the level).
    rows, k : ndarray
        Row indices and the first point beyond the level.
    b0, b1, q0, q1 : ndarray
        |I| and the quantity at the point before the level and at ``k``.
    step : int
        +1 when the sweep moves away from zero along the columns, -1 otherwise.
    noise : float or None
        Noise of one value of the quantity, for the weights and the uncertainty.

    Returns
    -------
    current, uncertainty, how : ndarray
        ``how`` per row: 0 interpolated on the shape between the two points
        (both on the curve), 1 the line through the points beyond, 2 the middle
        of the step (a jump), 3 linear interpolation (the line too imprecise).
    """
    lo, hi = np.minimum(b0, b1), np.maximum(b0, b1)
    width = hi - lo
    noise = float(noise) if noise and np.isfinite(noise) else 0.0
    with np.errstate(all="ignore"):
        xm, qm, slope, w_total, sxx, n = _line(shape, value_at, beyond_ok, rows, k, bias_A,
                                               step, noise)

        def line_err(x):  # standard error of the line's X where it takes a given Q
            if not noise:  # noise-free: only the weights' ratios were meaningful
                return 0.0 * x
            return np.sqrt(1.0 / w_total + (x - xm) ** 2 / sxx) / np.abs(slope)

        target = shape.q(level)
        x_level = xm + (target - qm) / slope
        estimate = shape.current(x_level)
        err = line_err(x_level) / np.abs(shape.dx(estimate))
        usable = (n >= 2) & (slope > 0) & np.isfinite(x_level)
        # Where the line meets zero (Ic on this shape), and whether the point before
        # the level lies on it (not on the zero-voltage branch below a jump).
        x0, x1 = shape.x(b0), shape.x(b1)
        kink_x = xm - qm / slope
        kink_err = line_err(kink_x)
        off_line = np.abs(shape.q(q0) - (qm + slope * (x0 - xm)))
        through = off_line <= KINK_SIGMAS * np.hypot(
            line_err(x0) * np.abs(slope), (shape.dq(q0) + noise) * noise) + 1e-9 * np.abs(qm)
        # Interpolation between the two points in the shape's variables, whose error is
        # the jitter of a level crossing: the noise of one value over the local slope.
        big_q0, big_q1 = shape.q(q0), shape.q(q1)
        t = np.clip((target - big_q0) / (big_q1 - big_q0), 0.0, 1.0)
        between = shape.current(x0 + t * (x1 - x0))
        between_err = (np.abs((x1 - x0) / (big_q1 - big_q0)) * shape.dq(level) * noise
                       / np.abs(shape.dx(between)))
    # The point before is on the curve when the line passes through it and meets zero
    # clearly below it, or, where the line cannot tell (not clearly above it either, or
    # too imprecise), when it reads clearly above zero.
    resistive = np.abs(q0) > RESISTIVE_SIGMAS * noise
    below = usable & (kink_x < x0 - KINK_SIGMAS * kink_err)
    above = usable & (kink_x > x0 + KINK_SIGMAS * kink_err)
    on_curve = (np.isfinite(between) & np.isfinite(between_err) & (~usable | through)
                & (below | (resistive & ~above)))
    inside = (estimate >= lo - width) & (estimate <= hi + width)
    precise = usable & (err < width / _SQRT12) & inside
    # A jump: the line puts the level clearly more than a step outside the bracket.
    with np.errstate(all="ignore"):
        spread = KINK_SIGMAS * line_err(x_level)
        outside = ((x_level + spread < shape.x(np.maximum(lo - width, 0.0)))
                   | (x_level - spread > shape.x(hi + width)))
    jump = usable & outside
    # The line holds whether or not the point before is on the curve: where it is
    # precise, a reading above zero alone does not make that point part of the curve.
    on_curve &= below | ~precise
    how = np.where(on_curve, 0, np.where(precise, 1, np.where(jump, 2, 3)))
    with np.errstate(all="ignore"):
        t_linear = np.clip((level - q0) / (q1 - q0), 0.0, 1.0)
    linear = np.where(np.isfinite(t_linear), b0 + t_linear * (b1 - b0), 0.5 * (lo + hi))
    current = np.choose(how, [between, np.clip(estimate, lo, hi), 0.5 * (lo + hi), linear])
    uncertainty = np.choose(how, [between_err, err, width / _SQRT12, width / _SQRT12])
    return current, uncertainty, how
