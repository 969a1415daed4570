"""Chip figures: period against 1/L, Ic0 against area, a chip map, flag counts.

Each function takes the per-junction table and the dict of
:func:`jjpattern.batch.chipstats.chip_summary` and returns a matplotlib figure
(Agg backend, imported inside); :func:`save_figure` writes it with fixed metadata so
that reruns give identical files.
"""

from __future__ import annotations

import os

import numpy as np

from ..physics.constants import PHI0_WB
from .chipstats import _columns, junction_trends

#: Okabe-Ito colours, distinguishable with the common colour-vision deficiencies.
INLIER, OUTLIER, FIT, FAILED = "#0072B2", "#D55E00", "#222222", "#E69F00"
_FIELD = (("T", 1.0), ("mT", 1e-3), ("µT", 1e-6), ("nT", 1e-9))
_CURRENT = (("A", 1.0), ("mA", 1e-3), ("µA", 1e-6), ("nA", 1e-9), ("pA", 1e-12))
_METADATA = {
    ".png": {"Software": None},
    ".pdf": {"Creator": None, "Producer": None, "CreationDate": None},
    ".svg": {"Creator": None, "Date": None},
}


def _unit(magnitude, units):
    """The largest unit in which ``magnitude`` reads at least 0.1."""
    return next(((n, f) for n, f in units if magnitude >= 0.1 * f), units[-1])


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib import pyplot as plt

    return plt


def _mark_outliers(ax, x, y, names, mask, label):
    if mask.any():
        ax.plot(x[mask], y[mask], "x", ms=7, mew=1.5, color=OUTLIER, label=label)
        for xi, yi, name in zip(x[mask], y[mask], np.asarray(names)[mask], strict=True):
            # Junction names are the user's text: a "$" in one is not mathtext.
            ax.annotate(name, (xi, yi), xytext=(4, 4), textcoords="offset points", fontsize=7,
                        color=OUTLIER, parse_math=False)


def _finish(fig, ax, title):
    ax.grid(alpha=0.25, lw=0.5)
    ax.legend(frameon=False, fontsize=8)
    if title:
        ax.set_title(title, fontsize=10, parse_math=False)
    return fig


def period_figure(table, summary: dict, title: str = ""):
    """Period against 1/L (drawn length), the fitted trend Phi0 / (d_m (L - delta)), outliers."""
    plt = _pyplot()
    c, t = _columns(table), junction_trends(table, summary)
    use = c["ok"] & (c["period_T"] > 0) & (c["length_m"] > 0)
    fig, ax = plt.subplots(figsize=(6.4, 4.4), layout="constrained")
    if use.any():
        fname, ffac = _unit(float(np.median(c["period_T"][use])), _FIELD)
        x, y = 1e-6 / c["length_m"][use], c["period_T"][use] / ffac
        err = np.nan_to_num(c["period_stderr_T"][use] / ffac)
        out = t["outlier_period"].to_numpy()[use]
        ax.errorbar(x[~out], y[~out], yerr=err[~out], fmt="o", ms=4, color=INLIER, lw=0.8,
                    label="junctions")
        _mark_outliers(ax, x, y, np.asarray(c["junction"])[use], out, "outliers")
        dm, delta = summary["magnetic_thickness_m"], summary["dimension_offset_m"] or 0.0
        if dm:
            length = np.geomspace(c["length_m"][use].min(), c["length_m"][use].max(), 200)
            text = f"d_m = {dm * 1e9:.4g} ± {summary['magnetic_thickness_stderr_m'] * 1e9:.2g} nm"
            basis = "L − δ" if summary["dimension_offset_m"] is not None else "L"
            ax.plot(1e-6 / length, PHI0_WB / (dm * (length - delta)) / ffac, "-", lw=1.0,
                    color=FIT, label=f"Φ0 / (d_m ({basis})), {text}")
        ax.set_ylabel(f"period ({fname})")
    else:
        ax.text(0.5, 0.5, "no junction with a period and a length", ha="center",
                transform=ax.transAxes)
    ax.set_xlabel("1 / length across the field (1/µm)")
    ax.set_xlim(left=0)
    ax.set_ylim(bottom=0)
    return _finish(fig, ax, title)


def ic0_figure(table, summary: dict, title: str = ""):
    """Ic0 against the area it is compared with, the Jc trend, outliers."""
    plt = _pyplot()
    c, t = _columns(table), junction_trends(table, summary)
    area = t["area_used_m2"].to_numpy()
    use = c["ok"] & (c["ic0_A"] > 0) & (area > 0)
    fig, ax = plt.subplots(figsize=(6.4, 4.4), layout="constrained")
    if use.any():
        cname, cfac = _unit(float(np.median(c["ic0_A"][use])), _CURRENT)
        x, y = area[use] * 1e12, c["ic0_A"][use] / cfac
        err = np.nan_to_num(c["ic0_stderr_A"][use] / cfac)
        out = t["outlier_ic0"].to_numpy()[use]
        ax.errorbar(x[~out], y[~out], yerr=err[~out], fmt="o", ms=4, color=INLIER, lw=0.8,
                    label="junctions")
        _mark_outliers(ax, x, y, np.asarray(c["junction"])[use], out, "outliers")
        jc = summary["critical_current_density_A_per_m2"]
        if jc:
            grid = np.geomspace(x.min(), x.max(), 100)
            spread = summary["critical_current_density_spread_percent"]
            ax.plot(grid, jc * grid * 1e-12 / cfac, "-", lw=1.0, color=FIT,
                    label=f"Jc = {jc / 1e7:.4g} kA/cm², spread {spread:.2g} %")
        if x.max() > 10 * x.min():
            ax.set_xscale("log")
            ax.set_yscale("log")
        ax.set_ylabel(f"Ic0 ({cname})")
    else:
        ax.text(0.5, 0.5, "no junction with Ic0 and an area", ha="center",
                transform=ax.transAxes)
    basis = " (L − δ)(W − δ)" if summary["dimension_offset_m"] is not None else ""
    ax.set_xlabel(f"area{basis} (µm²)")
    return _finish(fig, ax, title)


def chip_map_figure(table, summary: dict, title: str = "", xy_unit: str = ""):
    """Jc (Ic0 / area) and, where fitted, the field offset at each junction's position.

    ``xy_unit`` is ``"m"`` when x and y are in metres (shown in mm) and ``""`` for
    die or grid indices. ``None`` when no junction has a position.
    """
    c, t = _columns(table), junction_trends(table, summary)
    placed = np.isfinite(c["x"]) & np.isfinite(c["y"])
    if not placed.any():
        return None
    plt = _pyplot()
    scale, label = (1e3, " (mm)") if xy_unit == "m" else (1.0, "")
    jc = np.where(c["ok"], t["jc_A_per_m2"].to_numpy(), np.nan)
    offset = np.where(c["ok"], c["field_offset_T"], np.nan)
    panels = [("Jc (kA/cm²)", jc / 1e7)]
    if np.isfinite(offset[placed]).any():
        oname, ofac = _unit(float(np.nanmax(np.abs(offset))), _FIELD)
        panels.append((f"field offset ({oname})", offset / ofac))
    fig, axes = plt.subplots(1, len(panels), figsize=(5.2 * len(panels), 4.4),
                             layout="constrained", squeeze=False)
    flagged = t["outlier_ic0"].to_numpy() | t["outlier_period"].to_numpy()
    for ax, (name, values) in zip(axes[0], panels, strict=True):
        have = placed & np.isfinite(values)
        x, y = c["x"] * scale, c["y"] * scale
        if (placed & ~have).any():
            ax.plot(x[placed & ~have], y[placed & ~have], "s", ms=6, mfc="none",
                    color="#999999", label="no value")
        if have.any():
            # Colour limits from the 2-98 % range so that one outlier does not wash out the map.
            lo, hi = np.percentile(values[have], [2, 98])
            art = ax.scatter(x[have], y[have], c=values[have], cmap="cividis", vmin=lo,
                             vmax=hi if hi > lo else lo + 1e-12, s=40, marker="s")
            fig.colorbar(art, ax=ax, label=name, extend="both")
        if (flagged & placed).any():
            ax.plot(x[flagged & placed], y[flagged & placed], "o", ms=11, mfc="none", mew=1.5,
                    color=OUTLIER, label="outlier")
        ax.set_xlabel(f"x{label}")
        ax.set_ylabel(f"y{label}")
        ax.set_aspect("equal", adjustable="datalim")
        ax.set_title(name, fontsize=9)
        if ax.get_legend_handles_labels()[0]:  # nothing missing or flagged: no legend
            ax.legend(frameon=False, fontsize=7, loc="best")
    if title:
        fig.suptitle(title, fontsize=10, parse_math=False)
    return fig


def flag_figure(summary: dict, title: str = ""):
    """Junctions carrying each flag, beside outliers and failed junctions, as bars."""
    plt = _pyplot()
    bars = [(code, n, INLIER) for code, n in summary["flag_counts"].items()]
    for quantity, name in (("ic0", "outlier: Ic0"), ("period", "outlier: period")):
        n = sum(e["quantity"] == quantity for e in summary["outliers"])
        bars.append((name, n, OUTLIER))
    bars.append(("failed", summary["junctions_failed"], FAILED))
    fig, ax = plt.subplots(figsize=(6.4, 0.9 + 0.32 * len(bars)), layout="constrained")
    names, counts, colours = zip(*bars, strict=True)
    pos = np.arange(len(bars))[::-1]
    ax.barh(pos, counts, color=colours, height=0.6)
    for p, n in zip(pos, counts, strict=True):
        ax.text(n, p, f" {n}", va="center", fontsize=8)
    ax.set_yticks(pos, names, fontsize=8)
    ax.set_xlabel(f"junctions (of {summary['junctions_total']})")
    ax.set_xlim(0, max(max(counts), 1) * 1.15)
    ax.xaxis.get_major_locator().set_params(integer=True)
    ax.grid(axis="x", alpha=0.25, lw=0.5)
    if title:
        ax.set_title(title, fontsize=10, parse_math=False)
    return fig


def save_figure(fig, *paths: str) -> None:
    """Write ``fig`` to each ``.png``/``.pdf``/``.svg`` path atomically, then close it.

    Metadata are fixed and SVG ids salted with a constant, so reruns give the same bytes.
    """
    import matplotlib
    from matplotlib import pyplot as plt

    from ..outdir import atomic_file

    try:
        for path in paths:
            suffix = os.path.splitext(path)[1].lower()
            with atomic_file(path, binary=True) as handle, \
                    matplotlib.rc_context({"svg.hashsalt": "jjpattern"}):
                fig.savefig(handle, format=suffix[1:], dpi=200, metadata=_METADATA[suffix])
    finally:
        plt.close(fig)
