"""``jjpattern demo``: the whole pipeline on the bundled demo chip (an invented scenario)."""

from __future__ import annotations

import os
from importlib import resources

#: Demo file and the settings a user would pick for it (keywords of jjpattern.analyze).
DEMO_RUNS = (
    ("kt14_j03.csv", {"loss": "cauchy"}),
    ("kt14_j05.h5", {}),  # a disc: the automatic choice finds the circular model
    ("kt14_j11.tsv", {}),
    ("kt14_j07_map.h5", {"tc_K": 9.2}),
)
#: The demo run that also gets a full report.
REPORT_RUN = "kt14_j07_map.h5"
#: The chip of the batch demo (24 junctions of KT-14 after cooldown CD-08) and its manifest.
CHIP_FOLDER = "chip_kt14"


def demo_files() -> dict:
    """Path of every bundled demo sweep, by file name."""
    root = resources.files("jjpattern.demo_data")
    return {name: str(root / name) for name, _ in DEMO_RUNS}


def chip_manifest() -> str:
    """Path of the demo chip's manifest (the junction files lie beside it)."""
    return str(resources.files("jjpattern.demo_data") / CHIP_FOLDER / "manifest.csv")


def run_demo(out_dir: str, echo=print, workers: int | None = None,
             chip: bool = True) -> list[str]:
    """Analyse every demo sweep, write JSON and a figure for each, then (with ``chip``) run
    the batch of the demo chip on ``workers`` processes.

    Returns the paths written.
    """
    from .pipeline import analyze_input
    from .report.bundle import write_report
    from .report.files import write_text
    from .report.plot import map_figure, pattern_figure, save_figure
    from .report.summary import render_summary

    os.makedirs(out_dir, exist_ok=True)
    files = demo_files()
    written = []
    for name, options in DEMO_RUNS:
        done = analyze_input(files[name], command=["demo", "--out", out_dir], **options)
        result = done.result
        result.input["path"] = f"demo:{name}"
        stem = os.path.splitext(name)[0]
        json_path = os.path.join(out_dir, f"{stem}.json")
        fig_path = os.path.join(out_dir, f"{stem}.png")
        write_text(json_path, result.to_json() + "\n")
        save_figure(pattern_figure(result.fits, result.title), fig_path)
        written += [json_path, fig_path]
        echo(render_summary(result))
        echo(f"  wrote {json_path} and {fig_path}")
        if result.extraction is not None:
            map_path = os.path.join(out_dir, f"{stem}_extraction.png")
            save_figure(map_figure(done.data, result.extraction,
                                   f"{result.title}: raw map and extracted branches"), map_path)
            written.append(map_path)
            echo(f"  wrote {map_path}")
        if name == REPORT_RUN:
            report = write_report(result, os.path.join(out_dir, "report_kt14_j07"),
                                  ["demo", "--out", out_dir], ivmap=done.data)
            written += list(report.values())
        echo("")
    if not chip:
        echo(f"demo results are in {os.path.abspath(out_dir)}")
        echo(f"report for KT14-J07: {os.path.abspath(report['report.html'])}")
        return written
    from .batch.runner import run_batch

    echo("batch of chip KT-14 (24 junctions, one file broken on purpose):")
    batch = run_batch(chip_manifest(), os.path.join(out_dir, "chip_kt14"), workers=workers,
                      command=["demo", "--out", out_dir], progress=False)
    written += list(batch.paths.values())
    for key, error in sorted(batch.errors.items()):
        echo(f"  failed {key}: {error}")
    echo(f"  {batch.last_line()}")
    echo("")
    echo(f"demo results are in {os.path.abspath(out_dir)}")
    echo(f"report for KT14-J07: {os.path.abspath(report['report.html'])}")
    echo(f"chip report for KT-14: {batch.paths['chip_report.html']}")
    return written
