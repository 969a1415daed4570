"""What a person sees of a result outside the report folder: the headline table, the flags
and the pattern figure, shared by the HTML report and the notebook display
(``Result._repr_html_``, ``Result.plot``).

Built from the result document alone, on :mod:`jjpattern.fmt`; matplotlib is imported
inside the functions that draw.
"""

from __future__ import annotations

import base64
import html

import numpy as np

from .fmt import (
    AREA_UNITS,
    CURRENT_UNITS,
    FIELD_UNITS,
    branch_words,
    evidence_text,
    flag_words,
    pick_unit,
    shown_path,
)
from .fmt import measure as format_measure

#: Okabe-Ito colours, distinguishable with the common colour-vision deficiencies.
BRANCH_COLOURS = {"positive": "#0072B2", "negative": "#D55E00"}
#: Marker of each polarity, so that the series differ in print without colour too.
BRANCH_MARKERS = {"positive": "o", "negative": "s"}
#: Retrapping currents, one style per polarity (switching uses the branch style).
RETRAP_STYLES = {"positive": dict(marker="x", color="#CC79A7"),
                 "negative": dict(marker="+", color="#009E73")}
FIT_COLOUR = "#222222"


def esc(value) -> str:
    """Text from anywhere (a user's file included) made safe for HTML."""
    return html.escape("" if value is None else str(value), quote=True)


def wrap_table(table_html: str) -> str:
    """A table in a box that scrolls sideways rather than widening the page."""
    return f'<div class="table-wrap">{table_html}</div>'


def png_data_uri(data: bytes) -> str:
    """A PNG as a ``data:`` URI, so that a page carries its figures."""
    return "data:image/png;base64," + base64.b64encode(data).decode("ascii")


def headline_table(fits) -> str:
    """The headline numbers of every branch as an HTML table, one unit per cell."""
    rows = []
    for fit in fits:
        funit = pick_unit(fit.period_T or fit.best_params.get("period_T") or 1e-3, FIELD_UNITS)
        cunit = pick_unit(fit.ic_max_A or 1e-6, CURRENT_UNITS)
        if fit.withheld:
            cells = ([branch_words(fit.branch, fit.segment).removesuffix(" branch")]
                     + ["withheld"] * 5 + [f"{fit.reduced_chisq:.2f}", ""])
            rows.append("<tr>" + "".join(
                f'<td{" class=num" if i else ""}>{esc(c)}</td>' for i, c in enumerate(cells))
                + "</tr>")
            continue
        cells = [
            branch_words(fit.branch, fit.segment).removesuffix(" branch"),
            format_measure(fit.period_T, fit.period_stderr_T, FIELD_UNITS, funit),
            format_measure(fit.effective_area_m2, fit.effective_area_stderr_m2, AREA_UNITS),
            format_measure(fit.field_offset_T, fit.field_offset_stderr_T, FIELD_UNITS, funit),
            format_measure(fit.ic0_A, fit.ic0_stderr_A, CURRENT_UNITS, cunit),
            ("none" if fit.node_floor_A is None else
             format_measure(fit.node_floor_A, fit.node_floor_stderr_A, CURRENT_UNITS, cunit)),
            "" if fit.reduced_chisq is None else f"{fit.reduced_chisq:.2f}",
            "" if fit.lobes_observed is None else str(fit.lobes_observed),
        ]
        rows.append("<tr>" + "".join(
            f'<td{" class=num" if i else ""}>{esc(c)}</td>' for i, c in enumerate(cells))
            + "</tr>")
    head = ("branch", "period", "effective area", "field offset", "Ic0", "node floor",
            "reduced χ²", "lobes")
    return wrap_table("<table class=headline><tr>" + "".join(f"<th>{h}</th>" for h in head)
                      + "</tr>" + "".join(rows) + "</table>")


def flags_html(flags, fits=()) -> str:
    """Each flag with its scope (branch, sweep or both branches), meaning and evidence."""
    if not flags:
        return "<p>No flags raised.</p>"
    out = []
    for f in flags:
        evidence = evidence_text(f.evidence)
        out.append(
            f'<div class="flag {esc(f.severity)}"><code>{esc(f.code)}</code> '
            f"<span>({esc(f.severity)}, {esc(flag_words(f, fits))})</span>"
            f"<p>{esc(f.message)}</p>"
            + (f"<p class=evidence>Evidence: {esc(evidence)}</p>" if evidence else "")
            + "</div>")
    return "".join(out)


def pattern_figure(fits, title: str = ""):
    """A matplotlib figure of every branch: data and fit above, residuals below."""
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib import pyplot as plt

    periods = [f.period_T for f in fits if f.period_T]
    span = max(max(abs(f.field_min_T), abs(f.field_max_T)) for f in fits)
    funit, ffac = pick_unit(periods[0] if periods else span, FIELD_UNITS)
    cunit, cfac = pick_unit(max(f.ic_max_A for f in fits), CURRENT_UNITS)

    fig, (top, bottom) = plt.subplots(
        2, 1, sharex=True, figsize=(7.0, 5.2), gridspec_kw={"height_ratios": [3, 1]},
        layout="constrained",
    )
    for fit in fits:
        # Colour and marker by polarity; a sweep back down gets open markers and a dashed fit.
        polarity = fit.branch.split()[0]
        colour = BRANCH_COLOURS.get(polarity, "#009E73")
        back = (getattr(fit, "segment", "") or "").startswith("down")
        marker = dict(marker=BRANCH_MARKERS.get(polarity, "^"), ms=2.2, mew=0.5)
        if back:
            marker.update(mfc="none", ms=2.8)
        top.plot(fit.field_T / ffac, fit.ic_A / cfac, ls="none", color=colour,
                 label=branch_words(fit.branch, getattr(fit, "segment", "")), **marker)
        if fit.best_params and not getattr(fit, "withheld", None):
            dense = np.linspace(fit.field_min_T, fit.field_max_T, 4000)
            top.plot(dense / ffac, fit.model_A(dense) / cfac, "--" if back else "-", lw=1.0,
                     color=FIT_COLOUR)
            bottom.plot(fit.field_T / ffac, fit.residual_A() / cfac, ls="none", color=colour,
                        **marker)
    drawn = sorted({f.model for f in fits if f.best_params and not getattr(f, "withheld", None)})
    if drawn:
        top.plot([], [], "-", color=FIT_COLOUR, lw=1.0, label=f"fit ({', '.join(drawn)})")
    for fit in fits:
        if getattr(fit, "withheld", None):
            # A model that misses the data is not drawn: a curve would suggest it fits.
            top.plot([], [], " ", label=f"{fit.branch}: no model fits, none drawn")
    if not drawn:
        bottom.text(0.5, 0.5, "no residuals: no model describes these data",
                    transform=bottom.transAxes, ha="center", va="center", fontsize=8)
    bottom.axhline(0.0, color="#888888", lw=0.8)
    top.set_ylabel(f"critical current ({cunit})")
    bottom.set_ylabel(f"residual ({cunit})")
    bottom.set_xlabel(f"applied field ({funit})")
    top.set_ylim(bottom=0)
    legend_once(top, frameon=False, fontsize=8)
    for ax in (top, bottom):
        ax.grid(alpha=0.25, lw=0.5)
    ref = next((f for f in fits if f.period_T and f.field_offset_T is not None), None)
    if ref is not None:
        b0, p = ref.field_offset_T / ffac, ref.period_T / ffac
        flux = top.secondary_xaxis("top", functions=(lambda b: (b - b0) / p,
                                                     lambda u: u * p + b0))
        flux.set_xlabel(f"flux Φ/Φ0 ({ref.branch} branch)")
    if title:
        fig.suptitle(title, fontsize=10, parse_math=False)
    return fig


def legend_once(ax, **options):
    """A legend with each label once (series drawn in pieces repeat their label)."""
    handles, labels = ax.get_legend_handles_labels()
    unique = dict(zip(labels, handles, strict=True))
    return ax.legend(list(unique.values()), list(unique), **options)


def figure_png(fig, dpi: int = 110) -> bytes:
    """The figure rendered as PNG bytes (fixed metadata), then closed."""
    import io

    from matplotlib import pyplot as plt

    buffer = io.BytesIO()
    try:
        fig.savefig(buffer, format="png", dpi=dpi, metadata={"Software": None})
    finally:
        plt.close(fig)
    return buffer.getvalue()


_NOTEBOOK_CSS = (".jjpattern-result .table-wrap { max-width: 100%; overflow-x: auto; } "
                 ".jjpattern-result table { border-collapse: collapse; max-width: 100%; } "
                 ".jjpattern-result th, .jjpattern-result td { padding: 0.2em 0.6em; "
                 "text-align: left; } .jjpattern-result img { max-width: 100%; height: auto; }")


def result_html(result, figure: bool = True) -> str:
    """A compact HTML view of a result for Jupyter: title, headline table, flags and
    (with ``figure``) the pattern figure inline as a PNG."""
    title = result.metadata.get("junction") or shown_path(result.input.get("path"))
    parts = [f'<div class="jjpattern-result"><style>{_NOTEBOOK_CSS}</style>',
             f"<h3>{esc(title)}</h3>",
             f"<p>{esc(shown_path(result.input.get('path')))}, "
             f"{esc(result.input.get('points_used'))} points used; jjpattern "
             f"{esc(result.tool.get('version'))}</p>",
             headline_table(result.fits), "<h4>Flags</h4>",
             flags_html(result.flags, result.fits)]
    if figure and result.fits:
        png = figure_png(pattern_figure(result.fits, result.title))
        parts.append(f'<img alt="pattern and fit of {esc(title)}" src="{png_data_uri(png)}">')
    parts.append("</div>")
    return "".join(parts)
