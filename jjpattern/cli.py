"""Command line: the commands and what each runs. Their options, and the one place they
become :class:`~jjpattern.settings.Settings`, are in :mod:`jjpattern.cli_options`.

Exit status (see :mod:`jjpattern.cli_exit`): 0 analysed (flags or not), 2 bad input, usage or
output, 1 internal error, 141 stdout closed by its reader; ``batch --strict``: 3 when a
junction failed.
"""

from __future__ import annotations

import argparse
import os
import sys

from . import __version__
from .cli_catalog import add_catalog_commands, record_after_run
from .cli_exit import (  # noqa: F401 - the statuses are part of this module's interface
    EXIT_CLOSED_PIPE,
    EXIT_FAILED_JUNCTIONS,
    EXIT_INPUT,
    EXIT_INTERNAL,
    EXIT_OK,
    run_guarded,
)
from .cli_options import (
    analysis_parent,
    attach_interval_values,
    figure_formats,
    reading_parent,
    settings_from_args,
)
from .cli_parser import Parser


def build_parser() -> argparse.ArgumentParser:
    parser = Parser(
        prog="jjpattern",
        description="Fit and diagnose critical current versus magnetic field of Josephson "
                    "junctions.",
    )
    parser.add_argument("--version", action="version", version=f"jjpattern {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    analysis = analysis_parent()

    analyze = sub.add_parser("analyze", parents=[analysis],
                             help="fit an Ic(B) sweep and report period, area, Ic0",
                             description="Fit an Ic(B) sweep (CSV/TSV/text, HDF5 or .npz) or "
                                         "a raw V(I, B) map.")
    analyze.add_argument("path", help="the sweep file, map file or folder of I-V files")
    analyze.add_argument("--json", action="store_true",
                         help="print the result document (JSON) instead of the summary")
    analyze.add_argument("--plot", metavar="FILE",
                         help="write the pattern figure (.png, .pdf or .svg)")
    analyze.add_argument("--map-plot", metavar="FILE",
                         help="raw maps: write the map with the extracted branches")
    analyze.add_argument("--report", metavar="DIR",
                         help="also write a full report (HTML, JSON, methods text, figures)")

    report = sub.add_parser("report", parents=[analysis],
                            help="write a self-contained report folder",
                            description="Analyse a sweep or raw map, or take a saved "
                                        "result.json, and write report.html, result.json, "
                                        "methods.txt, CSV tables and figures.")
    report.add_argument("path", help="the sweep, map, or a saved result.json")
    report.add_argument("--out", metavar="DIR", required=True, help="the report folder")

    extract = sub.add_parser("extract", parents=[reading_parent()],
                             help="read Ic+ and Ic- from a raw V(I, B) map",
                             description="Extract the critical-current branches of a raw map "
                                         "(HDF5, long text table, or a folder of I-V files).")
    extract.add_argument("path", help="the map file or folder")
    extract.add_argument("--out", metavar="FILE.csv", required=True,
                         help="where to write the extracted Ic(B) table")
    extract.add_argument("--plot", metavar="FILE", help="write the map figure")

    add_catalog_commands(sub)
    batch = sub.add_parser(
        "batch", parents=[analysis], help="analyse every junction of a manifest (a chip)",
        description="Analyse every junction listed in a manifest CSV, in parallel and "
                    "resumably, and write a summary table, chip statistics, chip figures and "
                    "chip_report.html. Given a folder instead, write a starter manifest "
                    "listing the files jjpattern can read there, and stop. The analysis "
                    "options below apply to every junction; the manifest's columns override "
                    "them per junction.",
        epilog="Exit status: 0 when the batch ran (failed junctions are rows of the summary), "
               "2 for a bad manifest or option, 3 with --strict when a junction failed.")
    batch.add_argument("path", help="the manifest CSV, or a folder to list in a starter "
                                    "manifest")
    batch.add_argument("--out", metavar="DIR", help="output folder (needed with a manifest); "
                                                    "a rerun continues from it")
    batch.add_argument("--workers", type=int, metavar="N",
                       help="worker processes (default: the number of cores)")
    batch.add_argument("--scheduler", metavar="ADDRESS",
                       help="run on a Dask cluster at this scheduler address instead "
                            "(needs the [cluster] extra)")
    batch.add_argument("--reports", action="store_true",
                       help="also write a report folder per junction under DIR/reports")
    batch.add_argument("--svg", action="store_true", help="chip figures as SVG too")
    batch.add_argument("--chunk-size", type=int, metavar="N",
                       help="junctions sent to a worker at once (default: automatic)")
    batch.add_argument("--strict", action="store_true",
                       help="exit with status 3 when any junction failed")
    batch.add_argument("--quiet", action="store_true",
                       help="no progress bar and only the last line")

    demo = sub.add_parser("demo", help="analyse the bundled demo sweeps",
                          description="Run the whole analysis on the bundled demo chip.")
    demo.add_argument("--out", metavar="DIR", default="jjpattern-demo",
                      help="folder for the results (default: ./jjpattern-demo)")
    return parser


def _check_plots(source, *paths):
    from .outdir import check_file_target
    from .report.plot import check_plot_path

    for path in paths:
        if path:
            check_plot_path(path)
            check_file_target(path, inputs=[source])


def _is_saved_result(path: str) -> bool:
    return path.lower().endswith(".json") and os.path.isfile(path)


def _terminal_progress():
    """Stage words on standard error, only when a person watches a terminal there."""
    if not sys.stderr.isatty():
        return None
    return lambda words: print(f"jjpattern: {words} ...", file=sys.stderr, flush=True)


def run_report(args) -> int:
    from .report.bundle import check_report_folder, write_report

    check_report_folder(args.out, inputs=[args.path])
    saved = _is_saved_result(args.path)
    if saved:
        from .result import Result

        result, ivmap = Result.read(args.path), None
        if args.figures:  # a new choice of files; the analysis and its hash are unchanged
            result.settings = result.settings.replace(
                report__figure_formats=figure_formats(args.figures))
    else:
        from .pipeline import analyze_input

        done = analyze_input(args.path, settings_from_args(args), command=args.argv,
                             progress=_terminal_progress())
        result, ivmap = done.result, done.data
    say = _terminal_progress()
    if say:
        say(f"writing the report to {args.out}")
    paths = write_report(result, args.out, args.argv,
                         ivmap=ivmap if result.extraction is not None else None,
                         inputs=[args.path])
    from .report.summary import short_summary

    print("\n".join(short_summary(result)))
    print(f"report written to {paths['report.html']} ({len(paths)} files in {args.out})")
    record_after_run(args, result, source_path=None if saved else args.path)
    return EXIT_OK


def run_analyze(args) -> int:
    from .pipeline import analyze_input
    from .report.summary import render_summary

    _check_plots(args.path, args.plot, args.map_plot)
    if args.report:
        from .report.bundle import check_report_folder

        check_report_folder(args.report, inputs=[args.path])
    done = analyze_input(args.path, settings_from_args(args), command=args.argv,
                         progress=_terminal_progress())
    result = done.result
    written = []
    if args.plot:
        from .report.plot import pattern_figure, save_figure

        save_figure(pattern_figure(result.fits, os.path.basename(args.path)), args.plot)
        written.append(args.plot)
    if args.map_plot and result.extraction is not None:
        from .report.plot import map_figure, save_figure

        save_figure(map_figure(done.data, result.extraction), args.map_plot)
        written.append(args.map_plot)
    report = None
    if args.report:
        from .report.bundle import write_report

        report = write_report(result, args.report, args.argv,
                              ivmap=done.data if result.extraction is not None else None,
                              inputs=[args.path])
    if args.json:
        print(result.to_json())
    else:
        print(render_summary(result))
        for path in written:
            print(f"\nfigure written to {path}")
        if report:
            print(f"\nreport written to {report['report.html']}")
    record_after_run(args, result, source_path=args.path,
                     echo=lambda s: print(s, file=sys.stderr if args.json else sys.stdout))
    return EXIT_OK


def run_extract(args) -> int:
    from .extract.engine import extract, extraction_table_csv
    from .io import load_map
    from .outdir import check_file_target, write_text

    check_file_target(args.out, inputs=[args.path])
    _check_plots(args.path, args.plot)
    settings = settings_from_args(args)
    ivmap = load_map(args.path, settings.read)
    extraction = extract(ivmap, criterion=settings.extract.criterion,
                         threshold=settings.extract.threshold)
    block = extraction.to_dict()
    write_text(args.out, extraction_table_csv(block))
    for b in block["branches"]:
        counts = ", ".join(f"{v} {k}" for k, v in sorted(b["status_counts"].items()))
        print(f"{b['branch']} branch ({b['source']}): {counts}")
    from .report.summary import level_text, rn_text

    print(f"criterion {block['criterion']}, level {level_text(block['threshold'])}, "
          f"Rn {rn_text(block['normal_resistance_ohm'])}")
    print(f"table written to {args.out}")
    if args.plot:
        from .report.plot import map_figure, save_figure

        save_figure(map_figure(ivmap, block), args.plot)
        print(f"figure written to {args.plot}")
    return EXIT_OK


def run_batch(args) -> int:
    from .errors import InputError

    if os.path.isdir(args.path):
        from .batch.sniff import starter_manifest
        from .fmt import plural

        path, entries = starter_manifest(args.path)
        print(f"wrote a starter manifest listing {plural(len(entries), 'input')}: {path}")
        print("fill in the sizes (length and width across the field, in um), the positions if "
              "you have them, and any chip or cooldown the files' metadata did not give; then "
              f"run: jjpattern batch {path} --out DIR")
        return EXIT_OK
    if not args.out:
        raise InputError(f"{args.path}: give the output folder with --out DIR")
    if args.workers is not None and args.workers < 1:
        raise InputError(f"--workers {args.workers}: give at least 1")
    if args.chunk_size is not None and args.chunk_size < 1:
        raise InputError(f"--chunk-size {args.chunk_size}: give at least 1")
    from .batch.runner import run_batch as batch

    outcome = batch(args.path, args.out, settings=settings_from_args(args),
                    workers=args.workers, scheduler=args.scheduler, reports=args.reports,
                    svg=args.svg, chunk_size=args.chunk_size,
                    progress=False if args.quiet else None, command=args.argv)
    if not args.quiet:
        for name in ("summary.csv", "chip_report.html"):
            print(f"{name}: {outcome.paths[name]}")
        for key, error in sorted(outcome.errors.items()):
            print(f"failed {key}: {error}")
    from .cli_catalog import record_batch_after_run

    record_batch_after_run(args, os.path.join(outcome.out_dir, "results"))
    print(outcome.last_line())
    return EXIT_FAILED_JUNCTIONS if args.strict and outcome.failed else EXIT_OK


def run_demo(args) -> int:
    from .demo import run_demo as demo

    demo(args.out, echo=print)
    return EXIT_OK


def main(argv=None) -> int:
    parser = build_parser()
    argv = sys.argv[1:] if argv is None else list(argv)
    args = parser.parse_args(attach_interval_values(argv))
    args.argv = argv
    if args.command is None:
        parser.print_help()
        return EXIT_INPUT
    from .batch.worker import one_blas_thread

    one_blas_thread()
    handlers = {"analyze": run_analyze, "extract": run_extract, "report": run_report,
                "batch": run_batch, "demo": run_demo}
    return run_guarded(getattr(args, "handler", handlers.get(args.command)), args)


if __name__ == "__main__":
    sys.exit(main())
