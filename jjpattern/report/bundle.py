"""Write a whole report folder: HTML, JSON, methods text, CSV tables and figures.

File names are the same every time, so a paper's figure can be regenerated in
place; every file is written atomically.
"""

from __future__ import annotations

import json
import os

import numpy as np

from .files import write_text
from .jsondoc import build_document, dumps
from .methods import methods_paragraph
from .provenance import provenance, versions

FIGURE_FORMATS = (".png", ".pdf", ".svg")


def fit_table_csv(fits) -> str:
    """Data, model and residual of every branch, SI units in the header."""
    lines = ["branch,field_T,ic_A,model_A,residual_A"]
    for fit in fits:
        model = fit.model_A(fit.field_T)
        for b, i, m in zip(fit.field_T, fit.ic_A, model, strict=True):
            m_text = repr(float(m)) if np.isfinite(m) else ""
            r_text = repr(float(i - m)) if np.isfinite(m) else ""
            lines.append(f"{fit.branch},{float(b)!r},{float(i)!r},{m_text},{r_text}")
    return "\n".join(lines) + "\n"


def field_calibration_text(analysis, settings: dict) -> str:
    """One sentence on how the field axis was obtained."""
    column = analysis.sweep.field_column
    coil = settings.get("coil_constant")
    if analysis.extraction is not None:
        column = "field"
    if coil:
        return (f"The field was computed from the magnet current ({column!r}) with a coil "
                f"constant of {coil}; no further calibration was applied.")
    return (f"The field axis is the applied field as recorded ({column!r}), converted to "
            "tesla; no further calibration was applied.")


def write_report(analysis, out_dir: str, argv, extra_settings: dict | None = None) -> dict:
    """Write the report folder and return ``{name: path}`` of everything written."""
    from .html import render_html
    from .plot import density_figure, map_figure, pattern_figure, save_figure

    os.makedirs(out_dir, exist_ok=True)
    document = build_document(analysis, extra_settings)
    paths = {}

    def path(name):
        paths[name] = os.path.join(out_dir, name)
        return paths[name]

    title = analysis.sweep.metadata.get("junction", os.path.basename(str(analysis.sweep.path)))
    pattern_files = [path(f"pattern{s}") for s in FIGURE_FORMATS]
    save_figure(pattern_figure(analysis.fits, str(title)), *pattern_files)
    with open(pattern_files[0], "rb") as handle:
        pattern_png = handle.read()
    map_png = None
    map_files = []
    if analysis.extraction is not None:
        map_files = [path(f"map{s}") for s in FIGURE_FORMATS]
        save_figure(map_figure(analysis.extraction), *map_files)
        with open(map_files[0], "rb") as handle:
            map_png = handle.read()
        write_text(path("extraction.csv"), analysis.extraction.table_csv())

    extra_sections = []
    if analysis.current_density:
        from .html import density_section, geometry_section

        density_files = [path(f"current_density{s}") for s in FIGURE_FORMATS]
        save_figure(density_figure(analysis.current_density), *density_files)
        with open(density_files[0], "rb") as handle:
            extra_sections.append(density_section(
                analysis.current_density, handle.read(),
                [os.path.basename(p) for p in density_files]))
        if analysis.geometry:
            extra_sections.append(geometry_section(analysis.geometry))
    write_text(path("result.json"), dumps(document) + "\n")
    write_text(path("fit.csv"), fit_table_csv(analysis.fits))
    methods = methods_paragraph(analysis, versions(),
                                field_calibration_text(analysis, document["settings"]))
    write_text(path("methods.txt"), methods)
    prov = provenance(document, argv)
    write_text(path("provenance.json"), json.dumps(prov, indent=2, ensure_ascii=False) + "\n")
    prov["settings_json"] = json.dumps(prov["settings"], indent=2, ensure_ascii=False)

    names = sorted([*map(os.path.basename, paths.values()), "report.html"])
    page = render_html(
        analysis, document, pattern_png=pattern_png, map_png=map_png, methods=methods,
        provenance=prov, files={"pattern": [os.path.basename(p) for p in pattern_files],
                                "map": [os.path.basename(p) for p in map_files],
                                "all": names},
        extra_sections=extra_sections)
    write_text(path("report.html"), page)
    return paths
