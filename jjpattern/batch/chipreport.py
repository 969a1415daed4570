"""Chip outputs of a batch: ``chips/<chip>/chip_summary.json``, chip figures, ``chip_report.html``.

The page is self-contained like the junction report (figures embedded as PNG,
no scripts, fonts or network; every user string escaped). Its junction tables
are sorted without scripts: one table lists the junctions that need a look
first (failed or withheld, then outliers by their deviation, then flagged), the other every
junction in natural order of its id.
"""

from __future__ import annotations

import json
import math
import os
import re

from ..report.display import CURRENT_UNITS, FIELD_UNITS, format_measure
from ..report.html import _CSS, esc, png_data_uri

CHIPS = "chips"
#: Figure stems and captions, in page order.
FIGURES = (
    ("period", "Period against 1/length with the chip trend Φ0 / (d_m L); outliers marked."),
    ("ic0", "Ic0 against area with the Jc trend; outliers marked."),
    ("map", "Chip map coloured by Jc (Ic0 / area) and by the fitted field offset."),
    ("flags", "Junctions carrying each flag, outliers and failures."),
)
_EXTRA_CSS = """
body { max-width: 76rem; }
.wide { overflow-x: auto; }
table.junctions td, table.junctions th { padding: 0.2rem 0.45rem; }
tr.failed td { background: #fdf0e8; }
tr.outlier td { background: #fff6df; }
"""


def chip_folder(chip: str) -> str:
    """Folder name of a chip under ``chips/`` (``_`` for a chip without a name)."""
    return re.sub(r"[^A-Za-z0-9.-]+", "-", chip).strip("-.") or "_"


def write_chip_outputs(rows: list[dict], out_dir: str, *, xy_unit: str, manifest_path: str,
                       settings, command=None, svg: bool = False,
                       reports: bool = False) -> dict:
    """Chip statistics, figures and the chip report from the summary rows.

    Returns ``{name: path}`` of the files written (names relative to ``out_dir``).
    """
    from ..report.files import write_text
    from . import figures
    from .chipstats import chip_summary, junction_trends
    from .table import junction_table

    table = junction_table(rows, xy_unit)
    paths: dict = {}
    chips = []
    for chip in sorted(set(table["chip"])) if len(table) else []:
        part = table[table["chip"] == chip].reset_index(drop=True)
        summary = chip_summary(part)
        folder = os.path.join(CHIPS, chip_folder(chip))
        os.makedirs(os.path.join(out_dir, folder), exist_ok=True)
        name = f"{folder}/chip_summary.json"
        write_text(os.path.join(out_dir, name),
                   json.dumps(summary, indent=2, ensure_ascii=False, allow_nan=False) + "\n")
        paths[name] = os.path.join(out_dir, name)
        title = f"chip {chip}" if chip else ""
        drawn = {"period": figures.period_figure(part, summary, title),
                 "ic0": figures.ic0_figure(part, summary, title),
                 "map": figures.chip_map_figure(part, summary, title, xy_unit),
                 "flags": figures.flag_figure(summary, title)}
        pngs = {}
        for stem, fig in drawn.items():
            if fig is None:
                continue
            files = [f"{folder}/{stem}{s}" for s in ((".png", ".svg") if svg else (".png",))]
            figures.save_figure(fig, *(os.path.join(out_dir, f) for f in files))
            paths.update({f: os.path.join(out_dir, f) for f in files})
            with open(os.path.join(out_dir, files[0]), "rb") as handle:
                pngs[stem] = (handle.read(), files)
        chips.append((chip, summary, part, junction_trends(part, summary), pngs))
    page = render_chip_report(chips, out_dir=out_dir, manifest_path=manifest_path,
                              settings=settings, rows=rows, command=command, reports=reports,
                              files=sorted([*paths, "summary.csv"]))
    write_text(os.path.join(out_dir, "chip_report.html"), page)
    paths["chip_report.html"] = os.path.join(out_dir, "chip_report.html")
    return paths


def _measure(value, stderr, scale: float, unit: str) -> str:
    if value is None:
        return "not determined"
    return format_measure(value, stderr, ((unit, scale),), (unit, scale))


def _chip_numbers(s: dict) -> list:
    rows = [
        ("junctions analysed", f"{s['junctions_analysed']} of {s['junctions_total']} "
                               f"({s['junctions_failed']} failed)"),
        ("critical current density Jc",
         _measure(s["critical_current_density_A_per_m2"],
                  s["critical_current_density_stderr_A_per_m2"], 1e7, "kA/cm²")),
        ("spread of Jc (robust)", "not determined"
         if s["critical_current_density_spread_percent"] is None
         else f"{s['critical_current_density_spread_percent']:.3g} %"),
        ("linewidth offset δ", _measure(s["dimension_offset_m"], s["dimension_offset_stderr_m"],
                                        1e-6, "µm")),
        ("magnetic thickness d_m", _measure(s["magnetic_thickness_m"],
                                            s["magnetic_thickness_stderr_m"], 1e-9, "nm")),
        ("reduced χ² of the d_m fit", "" if s["magnetic_thickness_reduced_chisq"] is None
         else f"{s['magnetic_thickness_reduced_chisq']:.3g}"),
        ("length offset from the period", _measure(s["length_offset_from_period_m"],
                                                  s["length_offset_from_period_stderr_m"],
                                                  1e-6, "µm")),
        ("field offset, median ± robust σ",
         _measure(s["field_offset_median_T"], s["field_offset_robust_sigma_T"], 1e-3, "mT")),
        ("outliers", ", ".join(s["outlier_junctions"]) or "none"),
    ]
    rows += [(f"why not: {k.replace('_', ' ')}", v) for k, v in s["reasons"].items()]
    return rows


def _kv(pairs) -> str:
    return "<table>" + "".join(f"<tr><th>{esc(k)}</th><td>{esc(v)}</td></tr>"
                               for k, v in pairs) + "</table>"


def _num(value, digits=4) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return ""
    return f"{value:.{digits}g}"


def _deviation(d) -> str:
    return "" if d is None else f"{d:+.0f}" if abs(d) >= 10 else f"{d:+.1f}"


def _value(v):
    return None if v is None or (isinstance(v, float) and not math.isfinite(v)) else float(v)


def _junction_rows(part, trends, out_dir: str, reports: bool) -> list[dict]:
    from .runner import REPORTS

    out = []
    for i in range(len(part)):
        r, t = part.iloc[i], trends.iloc[i]
        stem = os.path.splitext(os.path.basename(str(r["result_file"] or "")))[0]
        link = f"{REPORTS}/{stem}/report.html"
        have = reports and os.path.exists(os.path.join(out_dir, link))
        dev = [_value(t["ic0_deviation_robust_sigma"]), _value(t["period_deviation_robust_sigma"])]
        out.append({
            "junction": r["junction"], "link": link if have else None, "status": r["status"],
            "length_m": _value(r["length_m"]), "width_m": _value(r["width_m"]),
            "area_m2": _value(t["area_used_m2"]),
            "period": format_measure(_value(r["period_T"]), _value(r["period_stderr_T"]),
                                     FIELD_UNITS) if _value(r["period_T"]) else "",
            "ic0": format_measure(_value(r["ic0_A"]), _value(r["ic0_stderr_A"]),
                                  CURRENT_UNITS) if _value(r["ic0_A"]) else "",
            "jc": _value(t["jc_A_per_m2"]), "dev": dev,
            "offset": format_measure(_value(r["field_offset_T"]),
                                     _value(r["field_offset_stderr_T"]), FIELD_UNITS)
            if _value(r["field_offset_T"]) is not None else "",
            "outlier": bool(t["outlier_ic0"] or t["outlier_period"]),
            "notes": r["error"] if r["status"] == "failed" else "; ".join(r["flags"]),
            "flagged": bool(r["flags"]),
        })
    return out


def _attention_order(rows: list[dict]) -> list[dict]:
    """Failed first, then outliers by their largest deviation, then flagged junctions."""
    def worst(r):
        return max((abs(d) for d in r["dev"] if d is not None), default=0.0)

    failed = [r for r in rows if r["status"] != "ok"]
    outliers = sorted((r for r in rows if r["status"] == "ok" and r["outlier"]),
                      key=lambda r: -worst(r))
    flagged = [r for r in rows if r["status"] == "ok" and not r["outlier"] and r["flagged"]]
    return failed + outliers + flagged


def _junction_table(rows: list[dict]) -> str:
    head = ("junction", "status", "L (µm)", "W (µm)", "area used (µm²)", "period", "Ic0",
            "Jc (kA/cm²)", "Ic0 off trend (σ)", "period off trend (σ)", "field offset",
            "flags or error")
    body = []
    for r in rows:
        name = esc(r["junction"])
        if r["link"]:
            name = f'<a href="{esc(r["link"])}">{name}</a>'
        cls = " class=failed" if r["status"] != "ok" else " class=outlier" if r["outlier"] \
            else ""
        cells = [_num(r["length_m"] and r["length_m"] * 1e6, 3),
                 _num(r["width_m"] and r["width_m"] * 1e6, 3),
                 _num(r["area_m2"] and r["area_m2"] * 1e12, 4), r["period"], r["ic0"],
                 _num(r["jc"] and r["jc"] / 1e7, 4), *(_deviation(d) for d in r["dev"]),
                 r["offset"]]
        body.append(f"<tr{cls}><td>{name}</td><td>{esc(r['status'])}</td>"
                    + "".join(f"<td class=num>{esc(c)}</td>" for c in cells)
                    + f"<td>{esc(r['notes'])}</td></tr>")
    return ("<div class=wide><table class=junctions><tr>"
            + "".join(f"<th>{esc(h)}</th>" for h in head) + "</tr>" + "".join(body)
            + "</table></div>")


def _figures(pngs: dict) -> str:
    out = []
    for stem, caption in FIGURES:
        if stem in pngs:
            data, files = pngs[stem]
            also = ", ".join(f"<code>{esc(f)}</code>" for f in files)
            out.append(f'<figure><img alt="{esc(caption)}" src="{png_data_uri(data)}">'
                       f"<figcaption>{esc(caption)} File: {also}.</figcaption></figure>")
        elif stem == "map":
            out.append("<p>No chip map: the manifest gives no x and y positions.</p>")
    return "".join(out)


def _provenance(manifest_path, settings, rows, command) -> list:
    import hashlib

    from ..provenance import command_line, versions

    with open(manifest_path, "rb") as handle:
        manifest_sha = hashlib.sha256(handle.read()).hexdigest()
    hashes = sorted({r["settings_sha256"] for r in rows if r.get("settings_sha256")})
    pairs = [("command", command_line(command) if command is not None else "not recorded"),
             ("manifest", manifest_path), ("manifest SHA-256", manifest_sha),
             ("settings SHA-256 (before the manifest's per-row settings)", settings.hash()),
             ("distinct settings SHA-256 over the junctions", str(len(hashes)))]
    return pairs + [(k, v if v is not None else "not installed")
                    for k, v in versions().items()]


def render_chip_report(chips, *, out_dir, manifest_path, settings, rows, command, reports,
                       files) -> str:
    """The chip report page; ``chips`` holds (name, summary, table, trends, pngs) per chip."""
    names = ", ".join(c[0] or "(unnamed)" for c in chips) or "no chip"
    parts = [
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>jjpattern chip report: {esc(names)}</title>"
        f"<style>{_CSS}{_EXTRA_CSS}</style></head><body>",
        f"<h1>Chip report: {esc(names)}</h1>",
        f'<p class="meta">Manifest <code>{esc(manifest_path)}</code>; {len(rows)} table rows '
        "in <code>summary.csv</code>. Uncertainties are one standard error; deviations from "
        "the chip trend are in robust standard deviations of ln(observed / trend).</p>",
    ]
    for chip, summary, part, trends, pngs in chips:
        sid = esc(chip_folder(chip))
        junctions = _junction_rows(part, trends, out_dir, reports)
        attention = _attention_order(junctions)
        parts += [
            f'<section id="chip-{sid}"><h2>Chip {esc(chip or "(unnamed)")}: numbers</h2>',
            _kv(_chip_numbers(summary)), "</section>",
            f'<section id="figures-{sid}"><h2>Figures</h2>', _figures(pngs), "</section>",
            f'<section id="attention-{sid}"><h2>Junctions to look at first</h2>',
            _junction_table(attention) if attention else "<p>None: every junction was "
            "analysed, none is an outlier and none carries a flag.</p>",
            "<p class=meta>Failed junctions first, then outliers from the largest deviation "
            "down, then flagged junctions.</p></section>",
            f'<section id="junctions-{sid}"><h2>All junctions (by id)</h2>',
            _junction_table(junctions) + ("<p class=meta>Names link to the junction reports."
                                          "</p>" if reports else ""), "</section>",
            f'<section id="methods-{sid}"><h2>Methods</h2>',
            f'<p class="methods">{esc(summary["methods_text"])} {esc(PER_JUNCTION_TEXT)}'
            "</p></section>",
        ]
    parts += [
        '<section id="provenance"><h2>Provenance</h2>',
        _kv(_provenance(manifest_path, settings, rows, command)), "</section>",
        '<section id="files"><h2>Files</h2><ul>',
        "".join(f"<li><code>{esc(f)}</code></li>" for f in files),
        "<li><code>results/</code>: one result document per junction</li>",
        "</ul></section>",
        "<footer class=meta><p>jjpattern analyses data only; it controls no instrument.</p>"
        "</footer></body></html>",
    ]
    return "\n".join(parts) + "\n"


#: How a junction enters the chip statistics (said on the page beside the methods).
PER_JUNCTION_TEXT = (
    "Each junction's period, Ic0 and field offset come from its own pattern fit (see its "
    "result document); the positive branch stands for the junction, the first fitted branch "
    "when there is no positive one.")
