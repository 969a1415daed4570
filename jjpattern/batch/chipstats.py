"""Chip-level numbers from per-junction results: magnetic thickness, Jc, linewidth offset, outliers.

Input: a table (``pandas.DataFrame`` or anything it accepts) with one row per
junction: ``junction``, ``chip``, ``status`` (``"ok"``; ``"withheld"``: analysed, numbers
null; ``"failed"``), ``ic0_A``, ``ic0_stderr_A``, ``period_T``, ``period_stderr_T``,
``length_m`` (across the field), ``width_m``, ``area_m2``, optional ``x``, ``y``,
``field_offset_T`` and ``flags`` (codes). Missing columns count as empty. Output: JSON-ready dicts,
every key with its unit, ``None`` with a reason where the data do not fix a number.
"""

from __future__ import annotations

import math
from collections import Counter

import numpy as np

from ..physics.constants import PHI0_WB
from .chiptext import OUTCOME_WORDS, criterion_text, methods_text

#: Normal-consistency constant of the median absolute deviation (Rousseeuw & Croux 1993).
MAD_TO_SIGMA = 1.4826
#: A junction is an outlier when its ln(observed / trend) departs this many robust sigma.
OUTLIER_SIGMA = 5.0
#: Residuals within this many MAD-sigma enter the clipped standard deviation.
CLIP_SIGMA = 3.5
#: Fewest junctions for a chip number, and for the outlier test.
MIN_JUNCTIONS, MIN_FOR_OUTLIERS = 3, 10
#: Relative spread of 1/L + 1/W (offset) or of L (intercept check) below which it is not fitted.
MIN_SIZE_SPREAD = 0.05
_NUMERIC = ("ic0_A", "ic0_stderr_A", "period_T", "period_stderr_T", "length_m", "width_m",
            "area_m2", "x", "y", "field_offset_T")

def _columns(table) -> dict:
    """Plain numpy columns (pandas indexing would cost more than the statistics)."""
    import pandas as pd

    frame = pd.DataFrame(table)
    n = len(frame)
    c = {name: _floats(frame[name]) if name in frame else np.full(n, np.nan)
         for name in _NUMERIC}
    for name, default in (("junction", ""), ("chip", ""), ("status", "ok")):
        c[name] = [default if v is None or (isinstance(v, float) and math.isnan(v)) else str(v)
                   for v in frame[name]] if name in frame else [default] * n
    c["flags"] = [_codes(f) for f in frame["flags"]] if "flags" in frame else [[]] * n
    c["ok"] = np.array([s.lower() == "ok" for s in c["status"]], dtype=bool)
    return c


def _floats(column) -> np.ndarray:
    """A column as floats; text that is not a number (or None) becomes NaN."""
    import pandas as pd

    try:
        return column.to_numpy(dtype=float, na_value=np.nan)
    except (TypeError, ValueError):
        return pd.to_numeric(column, errors="coerce").to_numpy(dtype=float, na_value=np.nan)


def _codes(value) -> list[str]:
    """Flag codes from a list of codes or flag dicts, or ``'a;b'`` text from a CSV."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return []
    if isinstance(value, str):
        value = value.replace(",", ";").split(";")
    return sorted({(v.get("code") if isinstance(v, dict) else str(v)).strip() for v in value}
                  - {""})


def _num(value):
    """A plain float for JSON, ``None`` for missing or non-finite."""
    return None if value is None or not np.isfinite(value) else float(value)


def _robust_sigma(residual, relative_errors=(), params: int = 0) -> float:
    """Scale of the residuals for the outlier test, the largest of three estimates.

    The MAD of a dozen junctions is often 30-40 % low by chance, so it is joined
    by the standard deviation of the residuals within 3.5 MAD-sigma (corrected for
    the ``params`` fitted parameters) and by the median stated relative error.
    """
    centred = residual - np.median(residual)
    mad = MAD_TO_SIGMA * np.median(np.abs(centred))
    inside = centred[np.abs(centred) <= CLIP_SIGMA * mad]
    clipped = (math.sqrt(float(inside @ inside) / (inside.size - params))
               if inside.size > params else 0.0)
    errors = np.asarray(relative_errors, dtype=float)
    errors = errors[np.isfinite(errors)]
    return float(max(mad, clipped, np.median(errors) if errors.size else 0.0))


def _areas(c, delta_m):
    """Area to compare Ic0 with: ``(L - delta)(W - delta)`` where L and W are given and an
    offset was fitted, else ``area_m2``, else ``L W``; NaN where not positive (a drawn
    size no larger than the offset)."""
    length, width = c["length_m"], c["width_m"]
    area = np.where(np.isfinite(c["area_m2"]), c["area_m2"], length * width)
    if delta_m is not None:
        sized = np.isfinite(length) & np.isfinite(width)
        area = np.where(sized, np.where(np.minimum(length, width) > delta_m,
                                        (length - delta_m) * (width - delta_m), np.nan), area)
    return np.where(area > 0, area, np.nan)


def dimension_offset(c, use, robust: bool) -> dict:
    """Fit ``Ic0 = Jc (L - delta)(W - delta)`` on ln Ic0 over the junctions ``use``.

    Scatter between junctions is multiplicative, hence logarithms. For each
    trial delta, ln Jc is profiled out: the median for ``robust`` (least absolute
    deviations, which outliers cannot pull) or the mean (least squares, which
    gives the reported value and its covariance). A grid over all physically
    possible offsets, refined three times around the best point, finds the global minimum.
    """
    use = use & np.isfinite(c["length_m"]) & np.isfinite(c["width_m"])
    out = {"dimension_offset_m": None, "dimension_offset_stderr_m": None,
           "dimension_offset_junctions": int(use.sum())}
    length_um, width_um = c["length_m"][use] * 1e6, c["width_m"][use] * 1e6
    ln_ic = np.log(c["ic0_A"][use])
    if use.sum() < MIN_JUNCTIONS + 1:
        return {**out, "dimension_offset_reason": "fewer than 4 junctions with length, width "
                "and Ic0, so Jc and a linewidth offset cannot both be fitted"}
    g = 1 / length_um + 1 / width_um
    if np.std(g) < MIN_SIZE_SPREAD * np.mean(g):
        return {**out, "dimension_offset_reason": "the junction sizes do not vary enough "
                f"(1/L + 1/W spreads by {100 * np.std(g) / np.mean(g):.1f} %, under "
                f"{100 * MIN_SIZE_SPREAD:g} %) to tell a linewidth offset from Jc"}
    centre, cost = (np.median, lambda r: np.sum(np.abs(r), axis=-1)) if robust else \
        (np.mean, lambda r: np.sum(r * r, axis=-1))

    def resid(d_um):
        d = np.asarray(d_um, dtype=float)[..., None]
        r = ln_ic - np.log(length_um - d) - np.log(width_um - d)
        return r - centre(r, axis=-1, keepdims=True)

    upper = 0.95 * float(np.min(np.minimum(length_um, width_um)))
    grid = np.linspace(-upper, upper, 201)
    best = int(np.argmin(cost(resid(grid))))
    if best in (0, grid.size - 1):
        return {**out, "dimension_offset_reason": "the fit ran to the limit of the junction "
                "sizes; Ic0 does not follow Jc (L - delta)(W - delta) on this chip"}
    for _ in range(3):  # each pass narrows the step twenty-fold
        step = grid[1] - grid[0]
        grid = np.linspace(grid[best] - step, grid[best] + step, 41)
        best = int(np.argmin(cost(resid(grid))))
    d_um = float(grid[best])
    r = resid(d_um)
    jac = np.column_stack([-np.ones_like(g), 1 / (length_um - d_um) + 1 / (width_um - d_um)])
    cov = np.linalg.inv(jac.T @ jac) * float(r @ r) / (r.size - 2)
    ln_jc = float(np.mean(ln_ic - np.log(length_um - d_um) - np.log(width_um - d_um)))
    return {**out, "dimension_offset_m": d_um * 1e-6,
            "dimension_offset_stderr_m": math.sqrt(cov[1, 1]) * 1e-6,
            "dimension_offset_reason": None,
            "_jc": math.exp(ln_jc) * 1e12, "_jc_rel_se": math.sqrt(cov[0, 0])}


def _flag_outliers(residual, sigma, threshold):
    return np.abs(residual - np.median(residual)) > threshold * sigma


def _wls_origin(x, y, sy):
    """Weighted least squares through the origin: slope, its standard error, reduced chi2."""
    w = 1 / sy**2
    sxx = float(np.sum(w * x * x))
    slope = float(np.sum(w * x * y)) / sxx
    chi2 = float(np.sum(w * (y - slope * x) ** 2)) / (x.size - 1) if x.size > 1 else None
    return slope, math.sqrt(1 / sxx), chi2


def _wls_line(x, y, sy, floor):
    """Weighted straight line: intercept, slope and their covariance, scaled by the
    reduced chi-square where it exceeds ``floor`` (1 with stated errors, 0 without)."""
    a = np.column_stack([np.ones_like(x), x]) / sy[:, None]
    coef, *_ = np.linalg.lstsq(a, y / sy, rcond=None)
    chi2 = float(np.sum((a @ coef - y / sy) ** 2)) / (x.size - 2)
    return coef, np.linalg.inv(a.T @ a) * max(floor, chi2)


def _period_fit(c, delta, delta_se, threshold):
    """Magnetic thickness from 1/period = (d_m / Phi0) (L - delta), outliers left out."""
    d = delta or 0.0
    use = c["ok"] & (c["period_T"] > 0) & (c["length_m"] - d > 0)
    short = c["ok"] & (c["period_T"] > 0) & (c["length_m"] > 0) & ~use
    out = {"magnetic_thickness_m": None, "magnetic_thickness_stderr_m": None,
           "magnetic_thickness_reduced_chisq": None, "magnetic_thickness_junctions": 0,
           "period_robust_sigma_ln": None, "length_offset_from_period_m": None,
           "length_offset_from_period_stderr_m": None}
    outliers = short.copy()  # no trend value: an outlier by itself
    out["_tested"] = int(use.sum())
    if use.sum() < MIN_JUNCTIONS:
        return out, outliers, "fewer than 3 analysed junctions with a period and a length"
    period, drawn = c["period_T"][use], c["length_m"][use]
    rel = c["period_stderr_T"][use] / period
    rel = np.where(np.isfinite(rel) & (rel > 0), rel, np.nan)
    # A junction without a stated error gets the typical one; with none stated, all get
    # one weight and the scatter alone sets the error (no chi-square to report).
    stated = bool(np.isfinite(rel).any())
    rel_w = np.where(np.isfinite(rel), rel, np.nanmedian(rel) if stated else 1.0)

    def slope(inl, shift=0.0):
        y = 1 / period[inl]
        return _wls_origin(drawn[inl] - d - shift, y, rel_w[inl] * y)

    trend = float(np.median(1 / (period * (drawn - d))))
    inliers = np.ones(period.size, bool)
    for _ in range(2):
        resid = np.log(trend * (drawn - d) * period)  # ln(observed / trend period)
        sigma = _robust_sigma(resid, rel, 1)
        if period.size >= MIN_FOR_OUTLIERS:
            inliers = ~_flag_outliers(resid, sigma, threshold)
        trend, se, chi2 = slope(inliers)
    outliers[np.flatnonzero(use)[~inliers]] = True
    se *= math.sqrt(max(1.0 if stated else 0.0, chi2 or 1.0))
    chi2 = chi2 if stated else None
    if delta is not None and delta_se:
        se = math.hypot(se, 0.5 * abs(slope(inliers, delta_se)[0] - slope(inliers, -delta_se)[0]))
    out.update(magnetic_thickness_m=trend * PHI0_WB, magnetic_thickness_stderr_m=se * PHI0_WB,
               magnetic_thickness_reduced_chisq=chi2, period_robust_sigma_ln=sigma,
               magnetic_thickness_junctions=int(inliers.sum()))
    x = drawn[inliers]
    if inliers.sum() >= MIN_JUNCTIONS and np.std(x) >= MIN_SIZE_SPREAD * np.mean(x):
        y = 1 / period[inliers]
        (a, b), cov = _wls_line(x, y, rel_w[inliers] * y, 1.0 if stated else 0.0)
        grad = np.array([-1 / b, a / b**2])  # of the offset -a / b
        out["length_offset_from_period_m"] = float(-a / b)
        out["length_offset_from_period_stderr_m"] = float(math.sqrt(grad @ cov @ grad))
    return out, outliers, None


def _outlier_entries(c, mask, observed, expected, sigma, quantity):
    unit = "A" if quantity == "ic0" else "T"
    entries = []
    for i in np.flatnonzero(mask):
        if not expected[i] > 0:
            entries.append({"junction": c["junction"][i], "quantity": quantity,
                            f"observed_{quantity}_{unit}": float(observed[i]),
                            f"expected_{quantity}_{unit}": None, "ratio_to_trend": None,
                            "deviation_robust_sigma": None, "reason": OUTCOME_WORDS["size"]})
            continue
        ratio = observed[i] / expected[i]
        dev = math.log(ratio) / sigma
        text = (f"{'Ic0' if quantity == 'ic0' else 'the period'} is {ratio:.3g} times the chip "
                f"trend ({dev:+.1f} robust sigma), {OUTCOME_WORDS[quantity, bool(ratio > 1)]}")
        if c["flags"][i]:
            text += f"; the junction's own flags: {', '.join(c['flags'][i])}"
        entries.append({"junction": c["junction"][i], "quantity": quantity,
                        f"observed_{quantity}_{unit}": float(observed[i]),
                        f"expected_{quantity}_{unit}": float(expected[i]),
                        "ratio_to_trend": float(ratio), "deviation_robust_sigma": float(dev),
                        "reason": text})
    return entries


def _jc_fit(c, has_ic, threshold):
    """Offset and Jc in two passes: robust (least absolute deviations) to find the
    outliers, then least squares without them; outliers judged against the final trend."""
    keep, outliers, reasons = has_ic.copy(), np.zeros(has_ic.size, bool), {}
    rel = c["ic0_stderr_A"] / c["ic0_A"]
    out = {"critical_current_density_A_per_m2": None,
           "critical_current_density_stderr_A_per_m2": None,
           "critical_current_density_spread_percent": None,
           "critical_current_density_junctions": 0, "ic0_robust_sigma_ln": None}
    for robust in (True, False):
        offset = dimension_offset(c, keep, robust)
        delta = offset["dimension_offset_m"]
        if has_ic.sum() < MIN_JUNCTIONS:
            reasons["critical_current_density"] = "fewer than 3 analysed junctions with Ic0 " \
                "and an area"
            break
        jc_each = c["ic0_A"] / _areas(c, delta)
        # A junction no larger than the offset has no trend value: an outlier by itself.
        sized = has_ic & np.isfinite(jc_each)
        outliers = has_ic & ~sized
        jc = float(np.median(jc_each[keep & sized])) if delta is None or robust \
            else offset["_jc"]
        resid = np.log(jc_each[sized] / jc)
        sigma = _robust_sigma(resid, rel[sized], 1 if delta is None else 2)
        if has_ic.sum() >= MIN_FOR_OUTLIERS:
            outliers[sized] = _flag_outliers(resid, sigma, threshold)
        keep = has_ic & ~outliers
    else:
        n = int((has_ic & ~outliers).sum())
        # The median's large-sample error, or the fit's (which knows how Jc and delta covary).
        se = jc * (math.sqrt(math.pi / 2) * sigma / math.sqrt(n) if delta is None
                   else offset["_jc_rel_se"])
        spread = MAD_TO_SIGMA * np.median(np.abs(jc_each[sized] - jc)) / jc * 100
        out.update(critical_current_density_A_per_m2=jc,
                   critical_current_density_stderr_A_per_m2=se,
                   critical_current_density_spread_percent=float(spread),
                   critical_current_density_junctions=n, ic0_robust_sigma_ln=sigma)
    if offset["dimension_offset_reason"]:
        reasons["dimension_offset"] = offset["dimension_offset_reason"]
    for key in ("dimension_offset_reason", "_jc", "_jc_rel_se"):
        offset.pop(key, None)
    out["critical_current_density_method"] = (
        "median of Ic0 / area over the junctions that are not outliers" if delta is None else
        "least squares on ln Ic0 = ln Jc + ln(L - delta) + ln(W - delta) without the outliers")
    return {**offset, **out}, outliers, reasons


def chip_summary(table, *, outlier_sigma: float = OUTLIER_SIGMA) -> dict:
    """Chip-level statistics of one chip's junctions (all rows of ``table``).

    Parameters
    ----------
    table : pandas.DataFrame or records
        One row per junction; see the module docstring for the columns.
    outlier_sigma : float
        Threshold of the outlier test in robust standard deviations.

    Returns
    -------
    dict
        JSON-ready; see ``DEVELOPERS.md`` (chip statistics) for the keys.
    """
    c = _columns(table)
    ok = c["ok"]
    # Withheld junctions were analysed (their numbers are null); only "failed" ones were not.
    failed = np.array([s.lower() == "failed" for s in c["status"]], dtype=bool)
    has_ic = ok & (c["ic0_A"] > 0) & (_areas(c, None) > 0)
    out: dict = {"chip": c["chip"][0] if c["chip"] else "",
                 "junctions_total": int(ok.size),
                 "junctions_analysed": int(ok.size - failed.sum()),
                 "junctions_failed": int(failed.sum()),
                 "status_counts": dict(sorted(Counter(c["status"]).items())),
                 "junctions_with_ic0": int(has_ic.sum()),
                 "junctions_with_period": int((ok & (c["period_T"] > 0)).sum())}
    jc_block, ic_out, reasons = _jc_fit(c, has_ic, outlier_sigma)
    delta = jc_block["dimension_offset_m"]
    out.update(jc_block, area_basis="(L - delta)(W - delta)" if delta is not None
               else "area as given, else L x W")
    period, p_out, why = _period_fit(c, delta, jc_block["dimension_offset_stderr_m"],
                                     outlier_sigma)
    out.update(period, length_basis="L - delta" if delta is not None else "L as given")
    if why:
        reasons["magnetic_thickness"] = why
    elif out["length_offset_from_period_m"] is None:
        reasons["length_offset_from_period"] = "the lengths do not vary enough to test " \
            "whether the period scales with 1/L"
    untested = [f"{name} not tested: fewer than {MIN_FOR_OUTLIERS} junctions have {what}"
                for name, what, n in (("Ic0", "Ic0 and an area", has_ic.sum()),
                                      ("period", "a period and a length", period["_tested"]))
                if n < MIN_FOR_OUTLIERS]
    del out["_tested"]
    if untested:
        reasons["outliers"] = "; ".join(untested)
    trends = _trends(c, out)
    entries = _outlier_entries(c, ic_out, c["ic0_A"], trends["expected_ic0_A"],
                               out["ic0_robust_sigma_ln"], "ic0")
    entries += _outlier_entries(c, p_out, c["period_T"], trends["expected_period_T"],
                                out["period_robust_sigma_ln"], "period")
    offsets = c["field_offset_T"][ok & np.isfinite(c["field_offset_T"])]
    out.update(
        field_offset_median_T=float(np.median(offsets)) if offsets.size else None,
        field_offset_robust_sigma_T=_robust_sigma(offsets)
        if offsets.size >= MIN_JUNCTIONS else None,
        outlier_criterion=criterion_text(outlier_sigma, CLIP_SIGMA, MIN_FOR_OUTLIERS),
        outlier_threshold_robust_sigma=outlier_sigma,
        outliers=sorted(entries, key=lambda e: (e["junction"], e["quantity"])),
        outlier_junctions=sorted({e["junction"] for e in entries}),
        flag_counts=dict(sorted(Counter(code for f in c["flags"] for code in f).items())),
        reasons=reasons)
    out["methods_text"] = methods_text(out)
    return {k: (_num(v) if isinstance(v, float) else v) for k, v in out.items()}


def _trends(c, summary) -> dict:
    """Per-junction area, Jc, and the chip trends of Ic0 and period at each junction."""
    delta, jc = summary["dimension_offset_m"], summary["critical_current_density_A_per_m2"]
    dm = summary["magnetic_thickness_m"]
    area = _areas(c, delta)
    nan = np.full(area.size, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        return {"area_used_m2": area, "jc_A_per_m2": c["ic0_A"] / area,
                "expected_ic0_A": jc * area if jc else nan,
                "expected_period_T": PHI0_WB / (dm * np.where(c["length_m"] > (delta or 0.0),
                                                              c["length_m"] - (delta or 0.0),
                                                              np.nan)) if dm else nan}


def junction_trends(table, summary: dict):
    """Per-junction table beside the chip trend of :func:`chip_summary`.

    Returns a DataFrame with ``junction``, ``area_used_m2``, ``jc_A_per_m2``,
    ``expected_ic0_A``, ``ic0_deviation_robust_sigma``, ``expected_period_T``,
    ``period_deviation_robust_sigma``, ``outlier_ic0`` and ``outlier_period``.
    """
    import pandas as pd

    c = _columns(table)
    t = _trends(c, summary)
    marked = {(e["junction"], e["quantity"]) for e in summary["outliers"]}
    rows = {"junction": c["junction"], "chip": c["chip"], **t}
    for quantity, column in (("ic0", "ic0_A"), ("period", "period_T")):
        sigma = summary[f"{quantity}_robust_sigma_ln"]
        with np.errstate(divide="ignore", invalid="ignore"):
            dev = np.log(c[column] / t[f"expected_{column}"]) / sigma if sigma else np.nan
        rows[f"{quantity}_deviation_robust_sigma"] = dev
        rows[f"outlier_{quantity}"] = [(j, quantity) in marked for j in c["junction"]]
    return pd.DataFrame(rows)


def chip_summaries(table, **options) -> dict:
    """:func:`chip_summary` for each chip of ``table`` (grouped by ``chip``), in sorted order."""
    import pandas as pd

    frame = pd.DataFrame(table)
    if "chip" not in frame:
        return {"": chip_summary(frame, **options)}
    chips = frame["chip"].fillna("").astype(str)
    return {chip: chip_summary(frame[chips == chip], **options) for chip in sorted(set(chips))}
