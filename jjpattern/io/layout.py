"""How rows were laid out in file order: the field window, signed columns, sweep directions.

Pure numpy on arrays in file order (SI). :func:`sweep_runs` splits a field
sequence where the field turns round (up, down, up ...); a turn counts only
when the field comes back by clearly more than the readback jitter and the
step, and runs too short to fit are set aside, so that noise on a magnet's
readback never makes a segment.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: A fit needs at least this many usable points per branch (and per segment).
MIN_POINTS = 10
#: A turn must bring the field back by this many readback-jitter sigmas ...
TURN_JITTER_SIGMAS = 10.0
#: ... and by this many typical steps.
TURN_STEPS = 2.5
#: A run covering less than this fraction of the branch's field span is a stub.
STUB_SPAN_FRACTION = 0.05
#: Two runs in one direction separated by a stub are one pass when their field ranges
#: overlap by less than this fraction of the shorter one (a glitch, not a second pass).
REPASS_OVERLAP = 0.1
#: One column holds both polarities when the smaller side reaches this fraction of the
#: larger side's largest magnitude (noise around a node stays far below it).
SIGNED_RATIO = 0.3


def field_window(field_T, field_range_T=(), exclude_T=()) -> tuple[np.ndarray, int, int]:
    """Rows to keep, and how many lie outside the range and inside an exclusion.

    Rows with a non-finite field are kept here (the clean-up counts them).
    """
    field_T = np.asarray(field_T, dtype=float)
    keep = np.ones(field_T.shape, dtype=bool)
    outside = excluded = 0
    finite = np.isfinite(field_T)
    if field_range_T:
        lo, hi = field_range_T
        out = finite & (((field_T < lo) if lo is not None else False)
                        | ((field_T > hi) if hi is not None else False))
        outside = int(out.sum())
        keep &= ~out
    for lo, hi in exclude_T:
        inside = finite & keep & (field_T >= lo) & (field_T <= hi)
        excluded += int(inside.sum())
        keep &= ~inside
    return keep, outside, excluded


def signed_split(values) -> tuple[np.ndarray, np.ndarray] | None:
    """Masks of the positive and negative rows of a column holding both polarities.

    ``None`` when the column is one polarity (with perhaps a few noise values of
    the other sign near the nodes).
    """
    values = np.asarray(values, dtype=float)
    pos, neg = values > 0, values < 0
    if pos.sum() < 2 or neg.sum() < 2:
        return None
    top_pos, top_neg = float(values[pos].max()), float(-values[neg].min())
    if min(top_pos, top_neg) < SIGNED_RATIO * max(top_pos, top_neg):
        return None
    return pos, neg


@dataclass(frozen=True)
class Run:
    """Rows ``start:stop`` (of the finite rows, file order) swept in one direction."""

    start: int
    stop: int
    direction: int  # +1 up, -1 down, 0 the field never moved

    @property
    def size(self) -> int:
        return self.stop - self.start


def turn_threshold(field) -> float:
    """How far back the field must come to count as a turn (readback jitter and step)."""
    d = np.diff(field)
    moving = np.abs(d[d != 0])
    step = float(np.median(moving)) if moving.size else 0.0
    jitter = 0.0
    if field.size > 3:
        # Second differences cancel a steady ramp; for white jitter their variance is 6 s^2.
        d2 = np.diff(field, 2)
        jitter = 1.4826 * float(np.median(np.abs(d2 - np.median(d2)))) / np.sqrt(6.0)
    return max(TURN_JITTER_SIGMAS * jitter, TURN_STEPS * step)


def _turns(field, h) -> tuple[list[int], int]:
    """Indices where each run ends (the extreme), and the first run's direction."""
    away = np.flatnonzero(np.abs(field - field[0]) > h)
    if away.size == 0:
        return [], 0
    first = direction = 1 if field[away[0]] > field[0] else -1
    ends, pos = [], 0
    while True:
        seg = field[pos:]
        if direction > 0:
            back = np.maximum.accumulate(seg) - seg
        else:
            back = seg - np.minimum.accumulate(seg)
        hit = np.flatnonzero(back > h)
        if hit.size == 0:
            return ends, first
        head = seg[:hit[0]]
        turn = pos + int(np.argmax(head) if direction > 0 else np.argmin(head))
        ends.append(turn)
        pos, direction = turn + 1, -direction


def sweep_runs(field, min_points: int = MIN_POINTS) -> tuple[list[Run], np.ndarray]:
    """Split a field sequence (finite, file order) into runs of one direction.

    Returns
    -------
    runs : list of Run
        In file order; every run has at least ``min_points`` rows and spans at
        least ``STUB_SPAN_FRACTION`` of the field range.
    aside : ndarray of bool
        Rows in short reversals (stubs) that belong to no run. The last row of
        a stub, where the field turned into the next run, joins that run; a
        single row after the last turn (a point measured again) joins the run
        before it.

    Two runs of one direction split by a stub are one run when they do not
    cover the same fields (a glitch inside a pass). When most rows fall in
    stubs (shuffled fields, a fast zigzag) the order says nothing about the
    sweep: one run of direction 0 is returned.
    """
    field = np.asarray(field, dtype=float)
    n = field.size
    aside = np.zeros(n, dtype=bool)
    if n == 0:
        return [], aside
    ends, direction = _turns(field, turn_threshold(field))
    bounds = [0] + [e + 1 for e in ends] + [n]
    raw = []
    for a, b in zip(bounds[:-1], bounds[1:], strict=True):
        if b > a:
            raw.append(Run(a, b, direction))
        direction = -direction
    if len(raw) == 1:
        return raw, aside
    span = float(np.ptp(field)) or 1.0
    kept: list[Run] = []
    pending = None  # start of rows a stub hands on to the next run
    for k, run in enumerate(raw):
        values = field[run.start:run.stop]
        if (run.size >= min_points and np.ptp(values) >= STUB_SPAN_FRACTION * span
                and np.unique(values).size >= min_points):
            start = run.start if pending is None else pending
            kept.append(Run(start, run.stop, run.direction))
            pending = None
            continue
        if run.size == 1 and k + 1 == len(raw) and kept:
            # One row after the last turn: a point measured again, not a sweep.
            kept[-1] = Run(kept[-1].start, run.stop, kept[-1].direction)
            continue
        aside[run.start:run.stop] = True
        if pending is not None:
            aside[pending] = True  # two stubs in a row: the first one's turning row too
            pending = None
        if k + 1 < len(raw):
            aside[run.stop - 1] = False  # the turning row starts the next run
            pending = run.stop - 1
    if not kept or aside.sum() > n // 2:
        # The order has no sweep direction (shuffled fields, a fast zigzag): one run.
        return [Run(0, n, 0)], np.zeros(n, dtype=bool)
    return _merge_glitches(kept, field, aside), aside


def _merge_glitches(runs, field, aside) -> list[Run]:
    """Join runs of one direction split by a stub when they do not cover the same fields."""
    out: list[Run] = []
    for run in runs:
        if out and out[-1].direction == run.direction:
            prev = out[-1]
            a = field[prev.start:prev.stop]
            b = field[run.start:run.stop]
            overlap = min(a.max(), b.max()) - max(a.min(), b.min())
            if overlap <= REPASS_OVERLAP * min(np.ptp(a), np.ptp(b)):
                out[-1] = Run(prev.start, run.stop, run.direction)
                continue
        out.append(run)
    return out


def run_labels(directions) -> list[str]:
    """``'up'``/``'down'``, numbered (``'up 2'``) when a direction comes more than once."""
    names = ["up" if d > 0 else "down" if d < 0 else "" for d in directions]
    out, seen = [], {}
    for name in names:
        seen[name] = seen.get(name, 0) + 1
        out.append(name if names.count(name) == 1 else f"{name} {seen[name]}".strip())
    return out
