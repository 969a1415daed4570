"""A self-contained HTML report: figures embedded, no scripts, fonts or network.

Every string that comes from a user's file passes through :func:`html.escape`.
"""

from __future__ import annotations

from ..fmt import VOLTAGE_UNITS, plural, shown_path
from ..notebook import esc, flags_html, headline_table, png_data_uri, wrap_table
from .display import format_measure
from .summary import (
    centre_text,
    edge_fraction_text,
    hysteresis_lines,
    layout_lines,
    level_text,
    rn_text,
)

_CSS = """
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; color: #1a1a1a;
       max-width: 64rem; margin: 2rem auto; padding: 0 1rem; line-height: 1.45; }
h1 { font-size: 1.5rem; margin-bottom: 0.2rem; }
h2 { font-size: 1.15rem; border-bottom: 1px solid #ccc; padding-bottom: 0.2rem;
     margin-top: 2rem; }
.meta { color: #555; font-size: 0.9rem; }
.table-wrap { max-width: 100%; overflow-x: auto; margin: 0.5rem 0; }
table { border-collapse: collapse; font-size: 0.88rem; max-width: 100%; }
table.headline { width: 100%; font-size: 0.82rem; }
table.headline th, table.headline td { padding: 0.3rem 0.4rem; }
th, td { border-bottom: 1px solid #e2e2e2; padding: 0.3rem 0.7rem; text-align: left;
         vertical-align: top; }
th { background: #f4f4f4; }
td.num { font-variant-numeric: tabular-nums; white-space: nowrap; }
figure { margin: 1rem 0; }
figure img { max-width: 100%; height: auto; border: 1px solid #eee; }
figcaption { font-size: 0.85rem; color: #555; }
.flag { border-left: 4px solid #0072B2; padding: 0.4rem 0.8rem; margin: 0.6rem 0;
        background: #f7f9fb; }
.flag.warning { border-color: #E69F00; }
.flag.error { border-color: #D55E00; }
.flag code { font-weight: 600; }
.evidence { font-size: 0.85rem; color: #333; }
pre, code { font-family: ui-monospace, "SFMono-Regular", Menlo, Consolas, monospace; }
pre { background: #f4f4f4; padding: 0.6rem; overflow-x: auto; white-space: pre-wrap; }
.methods { white-space: pre-wrap; }
@page { size: A4; margin: 15mm; }
@media print { body { margin: 0; max-width: none; font-size: 10pt; }
               h2 { break-after: avoid; } figure, tr, .flag { break-inside: avoid; }
               .table-wrap { overflow: visible; } table { font-size: 8pt; width: 100%; }
               th, td { padding: 0.15rem 0.3rem; } td.num { white-space: normal; }
               pre { font-size: 7pt; } }
"""


def _model_notes(fits) -> str:
    """The model of each branch, how it was chosen, and any withheld numbers, in words."""
    from .summary import choice_sentence

    items = []
    for fit in fits:
        text = f"{fit.branch} branch: {fit.model} model"
        choice = choice_sentence(fit.model_choice)
        if choice:
            text += f", {choice}"
        if fit.withheld:
            text += (f". Numbers withheld: {fit.withheld['text']}; the fit curve is not "
                     "drawn")
        elif fit.derived:
            from .summary import derived_items

            text += ". The model also gives " + ", ".join(
                f"{name} {value}" for name, value in derived_items(fit))
        items.append(f"<li>{esc(text)}.</li>")
    return "<ul>" + "".join(items) + "</ul>"


def _key_values(pairs) -> str:
    return wrap_table("<table>" + "".join(f"<tr><th>{esc(k)}</th><td>{esc(v)}</td></tr>"
                                          for k, v in pairs) + "</table>")


def _extraction_rows(ex: dict) -> list:
    threshold = ex["threshold"]
    rows = [("criterion", ex["criterion"]),
            ("level", level_text(threshold)),
            ("normal resistance", rn_text(ex["normal_resistance_ohm"])),
            ("amplifier offset", format_measure(ex["amplifier_offset_V"], None,
                                                VOLTAGE_UNITS)),
            ("rows skipped (mostly missing)", ex["rows_skipped"])]
    for b in ex["branches"]:
        counts = ", ".join(f"{v} {k}" for k, v in sorted(b["status_counts"].items()))
        ratio = b["retrapping_over_switching"]
        ratio = "" if ratio is None else f"; retrapping/switching {ratio:.3f}"
        rows.append((f"{b['branch']} branch", f"{b['source']}; {counts}{ratio}"))
    return rows


def _figure(png: bytes, caption: str, files) -> str:
    links = ", ".join(f"<code>{esc(f)}</code>" for f in files)
    return (f'<figure><img alt="{esc(caption)}" src="{png_data_uri(png)}">'
            f"<figcaption>{esc(caption)} Also as {links}.</figcaption></figure>")


def render_html(result, *, pattern_png: bytes, map_png: bytes | None,
                methods: str, provenance: dict, files: dict, extra_sections=()) -> str:
    """The whole report page.

    ``files`` maps each figure's name to its file names; ``extra_sections`` is a
    sequence of ``(id, title, html)`` that later stages (reconstruction,
    geometry) add after the figures.
    """
    meta = result.metadata
    title = meta.get("junction") or shown_path(result.input["path"])
    meta_line = " · ".join(f"{esc(k)}: {esc(v)}" for k, v in meta.items())
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>jjpattern report: {esc(title)}</title><style>{_CSS}</style></head><body>",
        f"<h1>Interference pattern of {esc(title)}</h1>",
        f'<p class="meta">{meta_line}</p>',
        f'<p class="meta">Input <code>{esc(shown_path(result.input["path"]))}</code>, '
        f'{esc(plural(result.input["points_used"], "point"))} used. '
        f'Generated {esc(result.generated_utc)} by jjpattern '
        f'{esc(result.tool["version"])}.</p>',
        '<section id="headline"><h2>Headline numbers</h2>',
        headline_table(result.fits),
        _model_notes(result.fits),
        "<p class=meta>Uncertainties are one standard error. Effective area = Φ0 / period. "
        "Reduced χ² is against the point-to-point noise of the data.</p></section>",
    ]
    reading = layout_lines(result.input)
    if reading:
        parts += ['<section id="reading"><h2>How the file was read</h2>',
                  "".join(f"<p>{esc(line)}</p>" for line in reading), "</section>"]
    parts += [
        '<section id="flags"><h2>Diagnostic flags</h2>', flags_html(result.flags, result.fits),
        "</section>",
    ]
    hysteresis = hysteresis_lines(getattr(result, "field_hysteresis", None))
    if hysteresis:
        parts += ['<section id="hysteresis"><h2>Field hysteresis</h2>',
                  "<p>Each sweep of the field against the one before it (second minus, or "
                  "over, first; one standard error).</p><ul>",
                  "".join(f"<li>{esc(line)}</li>" for line in hysteresis), "</ul></section>"]
    parts += [
        '<section id="pattern"><h2>Pattern, fit and residuals</h2>',
        _figure(pattern_png, "Critical current against applied field (bottom axis) and "
                "flux Φ/Φ0 (top axis), with the fit and its residuals.", files["pattern"]),
        "</section>",
    ]
    if result.extraction is not None:
        figure = (_figure(map_png, "The measured map with the extracted switching (dots) and "
                          "retrapping (crosses) currents.", files["map"])
                  if map_png is not None else
                  "<p>The raw-map figure is not in this report: it was rebuilt from a saved "
                  "result, which holds the extracted currents but not the map itself. Run "
                  "the report on the input file to draw it.</p>")
        parts += [
            '<section id="map"><h2>Raw map and extraction</h2>', figure,
            _key_values(_extraction_rows(result.extraction)),
            "</section>",
        ]
    for sid, heading, body in extra_sections:
        parts += [f'<section id="{esc(sid)}"><h2>{esc(heading)}</h2>', body, "</section>"]
    parts += [
        '<section id="methods"><h2>Methods</h2>',
        f'<p class="methods">{esc(methods)}</p></section>',
        '<section id="provenance"><h2>Provenance</h2>',
        _key_values([("command", provenance["command"] or "not recorded"),
                     ("report command", provenance["report_command"]),
                     ("input", shown_path(provenance["input_path"])),
                     ("input SHA-256", provenance["input_sha256"])]
                    + [(name, v) for name, v in provenance["versions"].items()]),
        f"<pre>{esc(provenance['settings_json'])}</pre></section>",
        '<section id="files"><h2>Files written with this report</h2><ul>',
        "".join(f"<li><code>{esc(f)}</code></li>" for f in files["all"]),
        "</ul></section>",
        "<footer class=meta><p>jjpattern analyses data only; it controls no instrument.</p>"
        "</footer></body></html>",
    ]
    return "\n".join(parts) + "\n"


def density_section(current_density: dict, png: bytes, files) -> tuple:
    """``(id, title, html)`` for the reconstructed current density."""
    rows = []
    for branch, d in current_density.items():
        ref = d.get("uniform_reference") or {}

        def versus(key, fmt, ref=ref):
            return f" (uniform junction: {format(ref[key], fmt)})" if key in ref else ""

        rows += [(f"{branch}: method", f"{d['method']} ({d['assumption']})"),
                 (f"{branch}: resolution", f"{d['resolution_over_length']:.3f} L"),
                 (f"{branch}: edge fraction", edge_fraction_text(d)
                  + versus("edge_fraction", ".3f")),
                 (f"{branch}: centre of mass", centre_text(d)),
                 (f"{branch}: non-uniformity", f"{d['nonuniformity']:.3f}"
                  + versus("nonuniformity", ".3f"))]
    caption = ("Current density across the junction (between the dashed lines) from the "
               "pattern (Dynes & Fulton 1971), with the 68 % band from resampling the noise; "
               "dotted, a uniform junction sampled at the same fields through the same "
               "reconstruction, the reference for the numbers below. Outside the junction "
               "the transform only rings (the resolution limit) and is not drawn.")
    return ("current-density", "Current density", _figure(png, caption, files)
            + _key_values(rows))


def geometry_section(block: dict) -> tuple:
    """``(id, title, html)`` for the numbers derived from geometry and materials."""
    from .geometry import geometry_rows

    rows = "".join(f"<tr><td>{esc(name)}</td><td class=num>{esc(value)}</td>"
                   f"<td>{esc(note)}</td></tr>" for name, value, note in geometry_rows(block))
    table = ("<table class=geometry><tr><th>quantity</th><th>value</th><th>source</th></tr>"
             + rows + "</table>")
    return ("geometry", "Geometry and materials", wrap_table(table)
            + "<p class=meta>Uncertainties are one standard error from the period and Ic0 "
              "alone; the geometry given is taken as exact.</p>")
