"""Field hysteresis: the pattern swept up against the pattern swept down.

When a sweep goes both ways, each run of the field is fitted on its own; here
consecutive runs of one branch (up then down, down then up ...) are compared:
the shift of the field offset, and the ratios of period and Ic0, each with its
standard error from the two fits' (uncorrelated, separate data). The
``field-hysteresis`` flag is raised when the offset or the period differs by
more than ``SIGMAS`` combined standard errors and more than a small tolerance.
"""

from __future__ import annotations

import math

from ..flags import make_flag

#: Combined standard errors a difference must exceed (as for branch-asymmetry).
SIGMAS = 5.0
#: ... and the offset shift must exceed this fraction of a period,
OFFSET_TOLERANCE_PERIODS = 0.02
#: ... or the period ratio must differ from 1 by more than this.
PERIOD_TOLERANCE = 0.01


def _usable(*values) -> bool:
    return all(v is not None and math.isfinite(v) for v in values)


def _ratio(a, ea, b, eb):
    """``b / a`` and its standard error (relative errors in quadrature)."""
    if not _usable(a, b) or a == 0:
        return None, None
    ratio = b / a
    if not _usable(ea, eb):
        return ratio, None
    return ratio, abs(ratio) * math.hypot(ea / a, eb / b if b else 0.0)


def _significance(difference, stderr):
    if difference is None or not stderr:
        return None
    return abs(difference) / stderr


def compare(first, second) -> dict:
    """Numbers of ``second`` against ``first`` (two fits of one branch, consecutive runs)."""
    out: dict = {}
    b1, b2 = first.field_offset_T, second.field_offset_T
    e1, e2 = first.field_offset_stderr_T, second.field_offset_stderr_T
    shift = b2 - b1 if _usable(b1, b2) else None
    shift_err = math.hypot(e1, e2) if shift is not None and _usable(e1, e2) else None
    periods = [p for p in (first.period_T, second.period_T) if _usable(p)]
    period = sum(periods) / len(periods) if periods else None
    out["offset_shift_T"] = shift
    out["offset_shift_stderr_T"] = shift_err
    out["offset_shift_periods"] = shift / period if shift is not None and period else None
    out["offset_significance_sigma"] = _significance(shift, shift_err)
    ratio, err = _ratio(first.period_T, first.period_stderr_T, second.period_T,
                        second.period_stderr_T)
    out["period_ratio"], out["period_ratio_stderr"] = ratio, err
    out["period_significance_sigma"] = _significance(None if ratio is None else ratio - 1, err)
    ratio, err = _ratio(first.ic0_A, first.ic0_stderr_A, second.ic0_A, second.ic0_stderr_A)
    out["ic0_ratio"], out["ic0_ratio_stderr"] = ratio, err
    out["ic0_significance_sigma"] = _significance(None if ratio is None else ratio - 1, err)
    return out


def _hysteretic(pair: dict) -> bool:
    offset = (pair["offset_significance_sigma"] or 0.0) > SIGMAS and abs(
        pair["offset_shift_periods"] or 0.0) > OFFSET_TOLERANCE_PERIODS
    period = (pair["period_significance_sigma"] or 0.0) > SIGMAS and abs(
        (pair["period_ratio"] or 1.0) - 1.0) > PERIOD_TOLERANCE
    return offset or period


def field_hysteresis(labelled) -> tuple[dict | None, list]:
    """The ``field_hysteresis`` block and its flags.

    Parameters
    ----------
    labelled : sequence of (fit, segment)
        Each fit (with ``branch`` the polarity, ``period_T``, ``field_offset_T``,
        ``ic0_A`` and their standard errors) with the run of the sweep it is of
        (``"up"``, ``"down"``, ``"up 2"`` ...; ``""`` when the sweep went one way).

    Returns
    -------
    block : dict or None
        ``None`` unless some branch was swept both up and down.
    flags : list of Flag
    """
    runs: dict[str, list] = {}
    for fit, segment in labelled:
        if segment:
            runs.setdefault(fit.branch, []).append((segment, fit))
    pairs, flags = [], []
    for branch, items in runs.items():
        for (seg1, fit1), (seg2, fit2) in zip(items[:-1], items[1:], strict=True):
            if seg1.split()[0] == seg2.split()[0]:
                continue  # two passes in one direction (after a reset): not hysteresis
            pair = {"branch": branch, "first": seg1, "second": seg2, **compare(fit1, fit2)}
            pairs.append(pair)
            if _hysteretic(pair):
                evidence = {k: v for k, v in pair.items() if k != "branch" and v is not None}
                flags.append(make_flag("field-hysteresis", f"{branch} {seg2}",
                                       threshold_sigmas=SIGMAS,
                                       offset_tolerance_periods=OFFSET_TOLERANCE_PERIODS,
                                       period_tolerance=PERIOD_TOLERANCE, **evidence))
    if not pairs:
        return None, []
    return {"pairs": pairs, "convention": "second run minus (or over) the first, in the order "
                                          "swept",
            "threshold_sigmas": SIGMAS, "offset_tolerance_periods": OFFSET_TOLERANCE_PERIODS,
            "period_tolerance": PERIOD_TOLERANCE}, flags
