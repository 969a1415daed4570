"""``jjpattern demo``: the whole pipeline on the bundled demo chip (an invented scenario)."""

from __future__ import annotations

import os
from importlib import resources

#: Demo file and the options a user would pick for it.
DEMO_RUNS = (
    ("kt14_j03.csv", {"loss": "cauchy"}),
    ("kt14_j05.h5", {"geometry": "circular"}),
    ("kt14_j11.tsv", {}),
    ("kt14_j07_map.h5", {"tc_K": 9.2}),
)
#: The demo run that also gets a full report.
REPORT_RUN = "kt14_j07_map.h5"
#: Options that belong to the extraction of raw maps, not to the fit.
_MAP_OPTIONS = ("criterion", "threshold", "gap_J", "tc_K", "temperature_K")


def demo_files() -> dict:
    """Path of every bundled demo sweep, by file name."""
    root = resources.files("jjpattern.demo_data")
    return {name: str(root / name) for name, _ in DEMO_RUNS}


def run_demo(out_dir: str, echo=print) -> list[str]:
    """Analyse every demo sweep, write JSON and a figure for each, and say where.

    Returns the paths written.
    """
    from .analysis import analyze_map, analyze_sweep
    from .io import open_input
    from .io.maps import IVMap
    from .report.bundle import write_report
    from .report.files import write_text
    from .report.jsondoc import build_document, dumps
    from .report.plot import map_figure, pattern_figure, save_figure
    from .report.summary import render_summary

    os.makedirs(out_dir, exist_ok=True)
    files = demo_files()
    written = []
    analyses = {}
    for name, options in DEMO_RUNS:
        data = open_input(files[name], sweep_options={}, map_options=None)
        if isinstance(data, IVMap):
            analysis = analyze_map(data, **options)
        else:
            analysis = analyze_sweep(data, **{k: v for k, v in options.items()
                                              if k not in _MAP_OPTIONS})
        analyses[name] = analysis
        sweep = analysis.sweep
        stem = os.path.splitext(name)[0]
        json_path = os.path.join(out_dir, f"{stem}.json")
        fig_path = os.path.join(out_dir, f"{stem}.png")
        doc = build_document(analysis, {"input_options": {}, "plot": fig_path})
        doc["input"]["path"] = f"demo:{name}"
        write_text(json_path, dumps(doc) + "\n")
        save_figure(pattern_figure(analysis.fits, f"{sweep.metadata.get('junction', stem)}"),
                    fig_path)
        written += [json_path, fig_path]
        echo(render_summary(analysis).replace(files[name], f"demo:{name}"))
        echo(f"  wrote {json_path} and {fig_path}")
        if analysis.extraction is not None:
            map_path = os.path.join(out_dir, f"{stem}_extraction.png")
            save_figure(map_figure(analysis.extraction, f"{sweep.metadata.get('junction')}: "
                                   "raw map and extracted branches"), map_path)
            written.append(map_path)
            echo(f"  wrote {map_path}")
        echo("")
    report_dir = os.path.join(out_dir, "report_kt14_j07")
    report = write_report(analyses[REPORT_RUN], report_dir, ["demo", "--out", out_dir],
                          {"demo_file": REPORT_RUN, **dict(DEMO_RUNS)[REPORT_RUN]})
    written += list(report.values())
    echo(f"demo results are in {os.path.abspath(out_dir)}")
    echo(f"report for KT14-J07: {os.path.abspath(report['report.html'])}")
    return written
