"""Command line: argument parsing only; the work happens in the layers it calls.

Exit status: 0 analysed (flags or not), 2 bad input or usage, 1 internal error.
"""

from __future__ import annotations

import argparse
import os
import sys

from . import __version__

EXIT_OK, EXIT_INTERNAL, EXIT_INPUT = 0, 1, 2


def _add_input_options(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("reading the file")
    group.add_argument("--field-col", metavar="NAME",
                       help="field column (or HDF5 dataset path, or .npz key)")
    group.add_argument("--ic-col", metavar="NAME", action="append", default=[],
                       help="critical-current column; repeat for a second branch")
    group.add_argument("--field-unit", metavar="UNIT",
                       help="unit of the field column: T, mT, uT, nT, G or Oe (as mu0*H)")
    group.add_argument("--current-unit", metavar="UNIT",
                       help="unit of the current columns: A, mA, uA, nA or pA")


def _add_fit_options(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("fitting")
    group.add_argument("--geometry", choices=("rectangular", "circular"),
                       default="rectangular", help="junction shape (default: rectangular)")
    group.add_argument("--node-floor", choices=("auto", "on", "off"), default="auto",
                       help="fit a floor for lifted nodes; auto keeps it when it helps "
                            "(default: auto)")
    group.add_argument("--loss", choices=("linear", "soft_l1", "huber", "cauchy"),
                       default="linear",
                       help="linear is least squares; the others resist glitches and "
                            "premature switching (default: linear)")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="jjpattern",
        description="Fit and diagnose critical current versus magnetic field of Josephson "
                    "junctions.",
    )
    parser.add_argument("--version", action="version", version=f"jjpattern {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    analyze = sub.add_parser("analyze", help="fit an Ic(B) sweep and report period, area, Ic0",
                             description="Fit an Ic(B) sweep (CSV/TSV/text, HDF5 or .npz).")
    analyze.add_argument("path", help="the sweep file")
    analyze.add_argument("--json", action="store_true",
                         help="print one JSON document instead of the summary")
    analyze.add_argument("--plot", metavar="FILE",
                         help="write the pattern figure (.png, .pdf or .svg)")
    _add_input_options(analyze)
    _add_fit_options(analyze)

    demo = sub.add_parser("demo", help="analyse the bundled demo sweeps",
                          description="Run the whole analysis on the bundled demo chip.")
    demo.add_argument("--out", metavar="DIR", default="jjpattern-demo",
                      help="folder for the results (default: ./jjpattern-demo)")
    return parser


def _input_options(args) -> dict:
    return {
        "field_col": args.field_col, "ic_cols": tuple(args.ic_col),
        "field_unit": args.field_unit, "current_unit": args.current_unit,
    }


def _fit_options(args) -> dict:
    return {"geometry": args.geometry, "node_floor": args.node_floor, "loss": args.loss}


def run_analyze(args) -> int:
    from .analysis import analyze_sweep
    from .io import load
    from .report.jsondoc import build_document, dumps
    from .report.summary import render_summary

    if args.plot:
        from .report.plot import check_plot_path

        check_plot_path(args.plot)
    sweep = load(args.path, **_input_options(args))
    analysis = analyze_sweep(sweep, **_fit_options(args))
    if args.plot:
        from .report.plot import pattern_figure, save_figure

        save_figure(pattern_figure(analysis.fits, os.path.basename(args.path)), args.plot)
    if args.json:
        extra = {"input_options": _input_options(args), "plot": args.plot}
        print(dumps(build_document(analysis, extra)))
    else:
        print(render_summary(analysis))
        if args.plot:
            print(f"\nfigure written to {args.plot}")
    return EXIT_OK


def run_demo(args) -> int:
    from .demo import run_demo as demo

    demo(args.out, echo=print)
    return EXIT_OK


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return EXIT_INPUT
    from .errors import InputError

    handlers = {"analyze": run_analyze, "demo": run_demo}
    try:
        return handlers[args.command](args)
    except InputError as exc:
        print(f"jjpattern: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print("jjpattern: interrupted", file=sys.stderr)
        return 130
    except Exception as exc:  # noqa: BLE001 - last line of defence, no traceback for users
        if os.environ.get("JJPATTERN_DEBUG"):
            raise
        print(f"jjpattern: internal error ({exc.__class__.__name__}: {exc}); this is a bug, "
              "please report it with the input file (JJPATTERN_DEBUG=1 shows the traceback)",
              file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":
    sys.exit(main())
