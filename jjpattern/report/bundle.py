"""Write a whole report folder from a :class:`~jjpattern.result.Result`.

File names are the same every time, so a paper's figure can be regenerated in
place. The folder is built beside the target and swapped in whole
(:func:`jjpattern.outdir.replace_folder`): a reader sees the old complete
report or the new one, never a mix, and no input inside the folder is touched.
Everything renders from the result document alone except the raw-map figure,
which needs the map itself.
"""

from __future__ import annotations

import json
import os
import re

import numpy as np

from ..fmt import csv_number
from ..outdir import check_folder_target, replace_folder
from .files import write_text
from .methods import methods_paragraph
from .provenance import provenance


def fit_table_csv(fits) -> str:
    """Data, model and residual of every branch, SI units in the header."""
    lines = ["branch,field_T,ic_A,model_A,residual_A"]
    for fit in fits:
        model = fit.model_A(fit.field_T)
        for b, i, m in zip(fit.field_T, fit.ic_A, model, strict=True):
            r = i - m if np.isfinite(m) else None
            lines.append(f"{fit.branch},{csv_number(b)},{csv_number(i)},{csv_number(m)},"
                         f"{csv_number(r)}")
    return "\n".join(lines) + "\n"


def field_calibration_text(result) -> str:
    """One sentence on how the field axis was obtained."""
    column = "field" if result.extraction is not None else result.input.get("field_column")
    coil = result.settings.read.coil_T_per_A
    if coil:
        return (f"The field was computed from the magnet current ({column!r}) with a coil "
                f"constant of {coil * 1e3:.6g} mT/A; no further calibration was applied.")
    return (f"The field axis is the applied field as recorded ({column!r}), converted to "
            "tesla; no further calibration was applied.")


#: Names a report folder written before the completeness marker could hold.
_OWNED = re.compile(r"(report\.html|result\.json|fit\.csv|methods\.txt|provenance\.json|"
                    r"extraction\.csv|(pattern|map|current_density)\.(png|pdf|svg))"
                    r"(\.tmp\d+(\.\w+)?)?")


def check_report_folder(out_dir: str, inputs=()) -> None:
    """Refuse at once a report folder that :func:`write_report` would refuse (OutputError)."""
    check_folder_target(out_dir, inputs=inputs, owned=_OWNED.fullmatch)


def write_report(result, out_dir: str, argv, ivmap=None, inputs=()) -> dict:
    """Write the report folder and return ``{name: path}`` of everything written.

    ``ivmap`` is the raw map the result was extracted from, when at hand; without
    it the report says that the map figure needs the input file. ``inputs`` are
    the paths read; a folder holding one of them is refused (OutputError).
    """
    with replace_folder(out_dir, inputs=inputs, owned=_OWNED.fullmatch) as build:
        written = _write_into(result, build, argv, ivmap)
    return {name: os.path.join(out_dir, name) for name in written}


def _write_into(result, out_dir: str, argv, ivmap) -> dict:
    from .html import density_section, geometry_section, render_html
    from .plot import density_figure, map_figure, pattern_figure, save_figure

    formats = tuple(result.settings.report.figure_formats)
    dpi = result.settings.report.dpi
    paths = {}

    def path(name):
        paths[name] = os.path.join(out_dir, name)
        return paths[name]

    def figure(fig, stem):
        files = [path(f"{stem}{s}") for s in formats]
        return save_figure(fig, *files, dpi=dpi, png_bytes=True), [
            os.path.basename(f) for f in files]

    pattern_png, pattern_files = figure(pattern_figure(result.fits, result.title), "pattern")
    map_png, map_files = None, []
    if result.extraction is not None:
        if ivmap is not None:
            map_png, map_files = figure(map_figure(ivmap, result.extraction), "map")
        from ..extract.engine import extraction_table_csv

        write_text(path("extraction.csv"), extraction_table_csv(result.extraction))

    extra_sections = []
    if result.current_density:
        png, files = figure(density_figure(result.current_density), "current_density")
        extra_sections.append(density_section(result.current_density, png, files))
    if result.geometry:
        extra_sections.append(geometry_section(result.geometry))
    write_text(path("result.json"), result.to_json() + "\n")
    write_text(path("fit.csv"), fit_table_csv(result.fits))
    methods = methods_paragraph(result, field_calibration_text(result))
    write_text(path("methods.txt"), methods)
    prov = provenance(result, argv)
    write_text(path("provenance.json"), json.dumps(prov, indent=2, ensure_ascii=False) + "\n")
    prov["settings_json"] = json.dumps(prov["settings"], indent=2, ensure_ascii=False)

    names = sorted([*map(os.path.basename, paths.values()), "report.html"])
    page = render_html(
        result, pattern_png=pattern_png, map_png=map_png, methods=methods, provenance=prov,
        files={"pattern": pattern_files, "map": map_files, "all": names},
        extra_sections=extra_sections)
    write_text(path("report.html"), page)
    return paths
