"""The pattern figure: data, fit, residuals, and a flux axis on top."""

from __future__ import annotations

import os

import numpy as np

from ..errors import InputError
from ..notebook import (  # noqa: F401  (pattern_figure is part of this module's interface)
    BRANCH_COLOURS,
    BRANCH_MARKERS,
    RETRAP_STYLES,
    legend_once,
    pattern_figure,
)
from .display import CURRENT_UNITS, FIELD_UNITS, pick_unit

FORMATS = {".png", ".pdf", ".svg"}

#: Fixed metadata so that reruns give identical files.
_METADATA = {
    ".png": {"Software": None},
    ".pdf": {"Creator": None, "Producer": None, "CreationDate": None},
    ".svg": {"Creator": None, "Date": None},
}


def check_plot_path(path: str) -> str:
    """The lower-case suffix of a figure path, or an :class:`InputError` naming the fix."""
    suffix = os.path.splitext(path)[1].lower()
    if suffix not in FORMATS:
        raise InputError(f"{path}: figures are written as .png, .pdf or .svg; change the suffix")
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise InputError(f"{path}: the folder {folder} does not exist; create it first")
    return suffix


def save_figure(fig, *paths: str, dpi: int = 200, png_bytes: bool = False):
    """Write ``fig`` to each path atomically (temporary file, then rename), then close it.

    Metadata are fixed and SVG ids salted with a constant, so reruns give the
    same bytes. With ``png_bytes`` the PNG rendering is returned as bytes (read
    back from a ``.png`` path, or rendered in memory when none is written).
    """
    import io

    import matplotlib
    from matplotlib import pyplot as plt

    from ..outdir import atomic_file

    png = None
    try:
        with matplotlib.rc_context({"svg.hashsalt": "jjpattern"}):
            for path in paths:
                suffix = os.path.splitext(path)[1].lower()
                with atomic_file(path, binary=True) as handle:
                    fig.savefig(handle, format=suffix[1:], dpi=dpi, metadata=_METADATA[suffix])
                if suffix == ".png" and png_bytes:
                    with open(path, "rb") as handle:
                        png = handle.read()
            if png_bytes and png is None:
                buffer = io.BytesIO()
                fig.savefig(buffer, format="png", dpi=dpi, metadata=_METADATA[".png"])
                png = buffer.getvalue()
    finally:
        plt.close(fig)
    return png


def _display_columns(bias_row):
    """Columns to draw: on each polarity the sweeps away from zero (where switching is
    read), or the sweeps back where a polarity has none; hysteresis would otherwise
    interleave two different curves at the same bias."""
    from ..extract.criteria import directions

    outbound, inbound = (d[0] for d in directions(bias_row[None, :]))
    keep = np.zeros(bias_row.size, dtype=bool)
    for side in (bias_row > 0, bias_row < 0):
        out = side & outbound
        keep |= out if out.sum() >= 3 else side & inbound
    keep |= bias_row == 0
    return np.flatnonzero(keep)


def map_figure(ivmap, extraction: dict, title: str = ""):
    """The raw map (|V| or dV/dI against field and bias) with the extracted branches on top.

    ``extraction`` is the result's extraction block (per-row currents and sources).
    """
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib import pyplot as plt

    from .display import VOLTAGE_UNITS

    bias_all = np.broadcast_to(ivmap.bias_A, ivmap.shape)
    cols = _display_columns(bias_all[0])
    # Plot at most about 600 x 600 cells; the extraction itself used every point.
    rs = max(1, ivmap.shape[0] // 600)
    cols = cols[::max(1, cols.size // 600)]
    field = ivmap.field_T[::rs]
    bias = bias_all[::rs][:, cols]
    values = ivmap.signal[::rs][:, cols]
    if ivmap.kind == "voltage":
        vunit, vfac = pick_unit(float(np.nanmax(np.abs(values))), VOLTAGE_UNITS)
        values, label = np.abs(values) / vfac, f"|V| ({vunit})"
    else:
        label = "dV/dI (Ω)"
    span = float(np.nanmax(np.abs(ivmap.field_T)))
    funit, ffac = pick_unit(span, FIELD_UNITS)
    cunit, cfac = pick_unit(float(np.nanmax(np.abs(bias))), CURRENT_UNITS)
    order = np.argsort(bias, axis=1, kind="stable")
    bias_sorted = np.take_along_axis(bias, order, axis=1)
    values_sorted = np.take_along_axis(values, order, axis=1)

    fig, ax = plt.subplots(figsize=(7.0, 5.0), layout="constrained")
    mesh = ax.pcolormesh(np.broadcast_to(field[:, None], bias_sorted.shape) / ffac,
                         bias_sorted / cfac, values_sorted, shading="nearest", cmap="cividis",
                         rasterized=True)
    fig.colorbar(mesh, ax=ax, label=label)
    field_T = np.asarray(extraction["field_T"], dtype=float)
    for b in extraction["branches"]:
        name, source = b["branch"], b["source"]
        sign = 1.0 if name == "positive" else -1.0
        ic_A = np.asarray(b["ic_A"], dtype=float)
        retrap_A = np.asarray(b["retrap_A"], dtype=float)
        ax.plot(field_T / ffac, sign * ic_A / cfac, ls="none", ms=2.2, mew=0.5,
                marker=BRANCH_MARKERS[name], color=BRANCH_COLOURS[name],
                label=f"Ic {name} ({source})")
        if np.isfinite(retrap_A).any() and source == "switching":
            ax.plot(field_T / ffac, sign * retrap_A / cfac, ls="none", ms=3, mew=0.7,
                    label=f"retrapping {name}", **RETRAP_STYLES[name])
    ax.set_xlabel(f"applied field ({funit})")
    ax.set_ylabel(f"bias current ({cunit})")
    legend_once(ax, frameon=True, fontsize=7, loc="upper right")
    ax.set_title(title or f"extraction: {extraction['criterion']} criterion", fontsize=10,
                 parse_math=False)
    return fig


def density_figure(current_density: dict, title: str = ""):
    """Reconstructed J(x) of each branch inside the junction, its 68 % band, and a uniform
    junction through the same reconstruction (dotted)."""
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib import pyplot as plt

    fig, ax = plt.subplots(figsize=(7.0, 3.8), layout="constrained")
    for branch, d in current_density.items():
        x = np.asarray(d["x_over_length"])
        # Only inside the junction: beyond |x| = L/2 the truncated transform only rings
        # (the resolution limit), which reads as current that is not there.
        inside = np.abs(x) <= 0.5
        x = x[inside]
        j = np.asarray(d["j_over_mean"])[inside]
        scale = np.max(np.abs(j)) or 1.0
        colour = BRANCH_COLOURS.get(branch, "#009E73")
        ax.fill_between(x, np.asarray(d["j_low_over_mean"])[inside] / scale,
                        np.asarray(d["j_high_over_mean"])[inside] / scale, color=colour, alpha=0.25,
                        lw=0)
        ax.plot(x, j / scale, color=colour, label=f"{branch} branch ({d['method']})")
        if d.get("j_uniform_over_mean") is not None:
            flat = np.asarray(d["j_uniform_over_mean"])[inside]
            # Scaled to the same total current, so the two shapes compare directly.
            ratio = np.trapezoid(np.clip(j, 0, None), x) / (
                np.trapezoid(np.clip(flat, 0, None), x) or 1.0)
            ax.plot(x, flat * ratio / scale, color=colour, lw=0.9, ls=":",
                    label=f"uniform junction, same window ({branch})")
    for edge in (-0.5, 0.5):
        ax.axvline(edge, color="#888888", lw=0.8, ls="--")
    ax.axhline(0.0, color="#888888", lw=0.6)
    ax.set_xlabel("position across the junction, x / L")
    ax.set_ylabel("current density (scaled to the largest)")
    legend_once(ax, frameon=False, fontsize=8)
    ax.grid(alpha=0.25, lw=0.5)
    if title:
        ax.set_title(title, fontsize=10, parse_math=False)
    return fig
