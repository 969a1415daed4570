"""Command line: arguments mapped onto :class:`~jjpattern.settings.Settings` in one place.

Exit status (see :mod:`jjpattern.cli_exit`): 0 analysed (flags or not), 2 bad input, usage or
output, 1 internal error, 141 stdout closed by its reader; ``batch --strict``: 3 when a
junction failed.
"""

from __future__ import annotations

import argparse
import os
import sys

from . import __version__
from .cli_catalog import add_catalog_commands, add_catalog_options, record_after_run
from .cli_exit import (  # noqa: F401 - the statuses are part of this module's interface
    EXIT_CLOSED_PIPE,
    EXIT_FAILED_JUNCTIONS,
    EXIT_INPUT,
    EXIT_INTERNAL,
    EXIT_OK,
    run_guarded,
)


def _reading_parent() -> argparse.ArgumentParser:
    parent = argparse.ArgumentParser(add_help=False)
    group = parent.add_argument_group("reading the file")
    group.add_argument("--field-col", metavar="NAME",
                       help="field column (or HDF5 dataset path, .mat or netCDF variable, "
                            "or .npz key)")
    group.add_argument("--ic-col", metavar="NAME", action="append", default=[],
                       help="critical-current column; repeat for a second branch")
    group.add_argument("--field-unit", metavar="UNIT",
                       help="unit of the field column: T, mT, uT, nT, G or Oe (as mu0*H)")
    group.add_argument("--current-unit", metavar="UNIT",
                       help="unit of the current columns: A, mA, uA, nA or pA")
    group.add_argument("--coil-constant", metavar="K",
                       help="the field axis is a magnet current; field per current, e.g. "
                            "2.5mT/A")
    group.add_argument("--decimal", choices=(".", ","), metavar="MARK",
                       help="decimal mark of the numbers, . or , (default: recognised from "
                            "the file; a file that could be read either way is refused)")
    group.add_argument("--field-range", metavar="LO:HI",
                       help="use only rows with the field in this interval, e.g. -2:2mT "
                            "(one end may be left empty)")
    group.add_argument("--exclude", metavar="LO:HI", action="append", default=[],
                       help="leave out rows with the field in this interval, e.g. "
                            "0.41:0.43mT (a glitch); repeat for more")
    group.add_argument("--allow-external", action="store_true",
                       help="let an HDF5 file read data kept in other files (external links, "
                            "external storage, virtual datasets); they are hashed with it")
    group.add_argument("--read-limit", metavar="NAME=N", action="append", default=[],
                       help="raise a size limit checked before reading: bytes (256 MiB), "
                            "values per array (20 million) or sweep rows (200,000)")
    group = parent.add_argument_group("raw V(I, B) maps")
    group.add_argument("--bias-col", metavar="NAME", help="bias-current column or dataset")
    group.add_argument("--signal-col", metavar="NAME",
                       help="voltage or dV/dI column or dataset")
    group.add_argument("--signal-unit", metavar="UNIT",
                       help="unit of the signal: V, mV, uV, nV, or Ohm for dV/dI")
    group.add_argument("--transpose", action="store_true",
                       help="the HDF5 map is stored as (n_bias, n_field)")
    group.add_argument("--field-from-name", metavar="REGEX",
                       help="folder of I-V files: read the field from each file name with "
                            "this pattern (a group named field, or the first group)")
    from .extract.registry import criterion_names

    group.add_argument("--criterion", default="auto", choices=criterion_names(),
                       help="how Ic is read from each I-V (default: voltage for voltage "
                            "maps, dvdi-peak for dV/dI maps)")
    group.add_argument("--threshold", metavar="VALUE",
                       help="criterion level: a voltage (2uV), a dV/dI (5Ohm) or a fraction "
                            "of Rn (0.05); default chosen from the noise and Rn")
    group.add_argument("--gap-meV", type=float, metavar="MEV",
                       help="superconducting gap, for the Ambegaokar-Baratoff IcRn")
    group.add_argument("--tc-K", type=float, metavar="K",
                       help="critical temperature, for a BCS gap when no gap is given")
    group.add_argument("--temperature-K", type=float, metavar="K",
                       help="measurement temperature (else metadata temperature_K)")
    return parent


def _analysis_parent() -> argparse.ArgumentParser:
    parent = argparse.ArgumentParser(add_help=False, parents=[_reading_parent()])
    group = parent.add_argument_group(
        "junction geometry and materials (optional; also from '# key: value' metadata "
        "with the same names, e.g. '# length_um: 10')")
    group.add_argument("--length-um", type=float, metavar="UM",
                       help="junction length across the field")
    group.add_argument("--width-um", type=float, metavar="UM", help="junction width")
    group.add_argument("--barrier-nm", type=float, metavar="NM", help="barrier thickness d")
    group.add_argument("--electrode-nm", metavar="T1[,T2]",
                       help="electrode thicknesses (one value for both)")
    group.add_argument("--london-nm", metavar="L1[,L2]",
                       help="London penetration depths (one value for both)")
    group.add_argument("--jc-kA-cm2", type=float, metavar="JC",
                       help="critical current density (else Ic0 / area when both are known)")
    group.add_argument("--planar", action="store_true",
                       help="a planar thin-film junction (flux-focusing period estimate)")
    group = parent.add_argument_group("fitting and diagnostics")
    from .physics.models import get_model, model_names

    names = model_names()
    group.add_argument("--model", "--geometry", dest="model", choices=("auto",) + names,
                       default="rectangular", metavar="MODEL",
                       help="pattern model (default: rectangular; auto fits every model and "
                            "chooses by the Bayesian information criterion with a margin): "
                            + "; ".join(
                           f"{n}: {get_model(n).description}" for n in names))
    group.add_argument("--node-floor", choices=("auto", "on", "off"), default="auto",
                       help="fit a floor for lifted nodes; auto keeps it when it helps "
                            "(default: auto)")
    group.add_argument("--loss", choices=("linear", "soft_l1", "huber", "cauchy"),
                       default="linear",
                       help="linear is least squares; the others resist glitches and "
                            "premature switching (default: linear)")
    group.add_argument("--seed", type=int, default=0,
                       help="seed of the resampled current-density band (default 0)")
    group = parent.add_argument_group("reports")
    group.add_argument("--figures", metavar="FORMATS",
                       help="figure files in a report folder, e.g. png,pdf,svg (default png; "
                            "the page itself embeds PNG)")
    add_catalog_options(parent)
    return parent


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="jjpattern",
        description="Fit and diagnose critical current versus magnetic field of Josephson "
                    "junctions.",
    )
    parser.add_argument("--version", action="version", version=f"jjpattern {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    analysis = _analysis_parent()

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

    extract = sub.add_parser("extract", parents=[_reading_parent()],
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


def _lengths(text, option, scale):
    from .errors import InputError

    try:
        return tuple(float(v) * scale for v in str(text).split(","))
    except ValueError:
        raise InputError(f"{option} {text!r}: not a number; write e.g. 150 or 150,200") from None


def _exclusion(text: str) -> tuple[float, float]:
    from .errors import InputError
    from .io.units import parse_field_interval

    lo, hi = parse_field_interval(text, "--exclude")
    if lo is None or hi is None:
        raise InputError(f"--exclude {text!r}: give both ends, e.g. 0.41:0.43mT (use "
                         "--field-range to cut one side)")
    return lo, hi


#: Options whose value may start with '-' (a negative field), which argparse takes for an
#: option of its own unless it is attached with '='.
_INTERVAL_OPTIONS = ("--field-range", "--exclude")


def _attach_interval_values(argv: list) -> list:
    """``--field-range -2:2mT`` as ``--field-range=-2:2mT``, so that argparse accepts it."""
    out, k = [], 0
    while k < len(argv):
        arg = argv[k]
        if (arg in _INTERVAL_OPTIONS and k + 1 < len(argv)
                and str(argv[k + 1]).startswith("-") and ":" in str(argv[k + 1])):
            out.append(f"{arg}={argv[k + 1]}")
            k += 2
            continue
        out.append(arg)
        k += 1
    return out


def _figure_formats(text: str) -> tuple[str, ...]:
    from .errors import InputError

    formats = tuple(dict.fromkeys("." + f.strip().lower().lstrip(".")
                                  for f in text.split(",") if f.strip()))
    bad = [f for f in formats if f not in (".png", ".pdf", ".svg")]
    if bad or not formats:
        raise InputError(f"--figures {text!r}: choose from png, pdf and svg, comma-separated")
    return formats


def settings_from_args(args):
    """The one place where command-line options become :class:`Settings` (SI units)."""
    from .extract.registry import parse_threshold
    from .io.limits import parse_read_limits
    from .io.units import coil_constant_T_per_A, parse_field_interval
    from .settings import (
        DiagnoseSettings,
        ExtractSettings,
        FitSettings,
        JunctionSettings,
        ReadSettings,
        ReportSettings,
        Settings,
    )

    def scaled(value, scale):
        return None if value is None else value * scale

    read = ReadSettings(
        field_col=args.field_col, ic_cols=tuple(args.ic_col), field_unit=args.field_unit,
        current_unit=args.current_unit,
        coil_T_per_A=coil_constant_T_per_A(args.coil_constant) if args.coil_constant else None,
        bias_col=args.bias_col, signal_col=args.signal_col, signal_unit=args.signal_unit,
        transpose=args.transpose, field_from_name=args.field_from_name,
        decimal=args.decimal,
        field_range_T=parse_field_interval(args.field_range, "--field-range")
        if args.field_range else (),
        exclude_T=tuple(_exclusion(text) for text in args.exclude),
        allow_external=args.allow_external, **parse_read_limits(args.read_limit))
    extract = ExtractSettings(
        criterion=args.criterion, threshold=parse_threshold(args.threshold, args.criterion),
        gap_J=scaled(args.gap_meV, 1.602176634e-22),  # 1 meV in J (e is exact in SI)
        tc_K=args.tc_K,
        temperature_K=args.temperature_K)
    if not hasattr(args, "model"):  # extract: reading and extraction only
        return Settings(read=read, extract=extract)
    junction = JunctionSettings(
        length_m=scaled(args.length_um, 1e-6), width_m=scaled(args.width_um, 1e-6),
        barrier_m=scaled(args.barrier_nm, 1e-9),
        electrode_m=_lengths(args.electrode_nm, "--electrode-nm", 1e-9)
        if args.electrode_nm else (),
        london_m=_lengths(args.london_nm, "--london-nm", 1e-9) if args.london_nm else (),
        jc_A_m2=scaled(args.jc_kA_cm2, 1e7), planar=args.planar)
    report = (ReportSettings(figure_formats=_figure_formats(args.figures)) if args.figures
              else ReportSettings())
    return Settings(read=read, extract=extract,
                    fit=FitSettings(model=args.model, node_floor=args.node_floor,
                                    loss=args.loss),
                    diagnose=DiagnoseSettings(seed=args.seed), junction=junction,
                    report=report)


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
                report__figure_formats=_figure_formats(args.figures))
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

        path, entries = starter_manifest(args.path)
        print(f"wrote a starter manifest listing {len(entries)} inputs: {path}")
        print("fill in the sizes (length and width across the field, in um) and, if you have "
              f"them, chip, cooldown and positions; then run: jjpattern batch {path} --out DIR")
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
    args = parser.parse_args(_attach_interval_values(argv))
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
