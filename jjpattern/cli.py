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


def _add_map_options(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("raw V(I, B) maps")
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
    group.add_argument("--coil-constant", metavar="K",
                       help="the field axis is a magnet current; field per current, e.g. "
                            "2.5mT/A")
    group.add_argument("--criterion", default="auto",
                       choices=("auto", "voltage", "dvdi-peak", "dvdi-threshold",
                                "resistance"),
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


def _add_junction_options(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group(
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
    group.add_argument("--seed", type=int, default=0,
                       help="seed of the resampled current-density band (default 0)")


def _add_fit_options(parser: argparse.ArgumentParser) -> None:
    _add_junction_options(parser)
    group = parser.add_argument_group("fitting")
    group.add_argument("--geometry", choices=("rectangular", "circular", "two-channel"),
                       default="rectangular",
                       help="junction shape; two-channel is a SQUID-like pair of channels "
                            "(default: rectangular)")
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
    analyze.add_argument("--map-plot", metavar="FILE",
                         help="raw maps: write the map with the extracted branches")
    analyze.add_argument("--report", metavar="DIR",
                         help="also write a full report (HTML, JSON, methods text, figures)")
    _add_input_options(analyze)
    _add_map_options(analyze)
    _add_fit_options(analyze)

    report = sub.add_parser("report", help="write a self-contained report folder",
                            description="Analyse a sweep or raw map and write report.html, "
                                        "result.json, methods.txt, CSV tables and figures.")
    report.add_argument("path", help="the sweep or map")
    report.add_argument("--out", metavar="DIR", required=True, help="the report folder")
    _add_input_options(report)
    _add_map_options(report)
    _add_fit_options(report)

    extract = sub.add_parser("extract", help="read Ic+ and Ic- from a raw V(I, B) map",
                             description="Extract the critical-current branches of a raw map "
                                         "(HDF5, long text table, or a folder of I-V files).")
    extract.add_argument("path", help="the map file or folder")
    extract.add_argument("--out", metavar="FILE.csv", required=True,
                         help="where to write the extracted Ic(B) table")
    extract.add_argument("--plot", metavar="FILE", help="write the map figure")
    _add_input_options(extract)
    _add_map_options(extract)

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
    return {"geometry": args.geometry, "node_floor": args.node_floor, "loss": args.loss,
            "seed": args.seed}


def _junction(args, metadata: dict):
    """Geometry inputs in SI from the options, else from the file's metadata."""
    from .diagnose.run import GeometryInputs
    from .errors import InputError

    def value(option, key, scale):
        given = getattr(args, option)
        raw = given if given is not None else metadata.get(key)
        if raw is None or raw == "":
            return None
        try:
            parts = [float(v) for v in str(raw).split(",")]
        except ValueError:
            raise InputError(f"{'--' + option.replace('_', '-') if given is not None else key}"
                             f" = {raw!r}: not a number") from None
        return [v * scale for v in parts]

    def one(option, key, scale):
        v = value(option, key, scale)
        return None if v is None else v[0]

    electrodes = value("electrode_nm", "electrode_nm", 1e-9) or [None]
    london = value("london_nm", "london_nm", 1e-9) or [None]
    planar = args.planar or str(metadata.get("planar", "")).lower() in ("1", "yes", "true")
    return GeometryInputs(
        length_m=one("length_um", "length_um", 1e-6), width_m=one("width_um", "width_um", 1e-6),
        barrier_m=one("barrier_nm", "barrier_nm", 1e-9),
        t1_m=electrodes[0], t2_m=electrodes[1] if len(electrodes) > 1 else None,
        lambda1_m=london[0], lambda2_m=london[1] if len(london) > 1 else None,
        jc_A_m2=one("jc_kA_cm2", "jc_kA_cm2", 1e7), planar=planar)


def _map_options(args):
    from .io.maps import MapOptions
    from .io.units import coil_constant_T_per_A

    return MapOptions(
        field_col=args.field_col, bias_col=args.bias_col, signal_col=args.signal_col,
        field_unit=args.field_unit, current_unit=args.current_unit,
        signal_unit=args.signal_unit, transpose=args.transpose,
        field_from_name=args.field_from_name,
        coil_T_per_A=coil_constant_T_per_A(args.coil_constant) if args.coil_constant else None,
    )


def _extraction_options(args) -> dict:
    from .io.units import parse_threshold

    return {"criterion": args.criterion,
            "threshold": parse_threshold(args.threshold, args.criterion)}


def _sweep_options(args) -> dict:
    from .io.units import coil_constant_T_per_A

    options = _input_options(args)
    if args.coil_constant:
        options["coil_T_per_A"] = coil_constant_T_per_A(args.coil_constant)
    return options


def _check_plots(*paths):
    from .report.plot import check_plot_path

    for path in paths:
        if path:
            check_plot_path(path)


def _analysis(args):
    """Load the input (sweep or raw map) and analyse it with the options given."""
    from scipy.constants import e

    from .analysis import analyze_map, analyze_sweep
    from .io import open_input
    from .io.maps import IVMap

    data = open_input(args.path, sweep_options=_sweep_options(args),
                      map_options=_map_options(args))
    junction = _junction(args, data.metadata)
    if isinstance(data, IVMap):
        gap_J = args.gap_meV * 1e-3 * e if args.gap_meV is not None else None
        return analyze_map(data, **_extraction_options(args), gap_J=gap_J, tc_K=args.tc_K,
                           temperature_K=args.temperature_K, junction=junction,
                           **_fit_options(args))
    return analyze_sweep(data, junction=junction, **_fit_options(args))


def _settings(args) -> dict:
    """Options beyond the fit settings, recorded in the JSON ``settings`` block."""
    return {"input_options": _input_options(args),
            "map_options": {k: getattr(args, k) for k in (
                "bias_col", "signal_col", "signal_unit", "transpose", "field_from_name",
                "criterion", "threshold", "gap_meV", "tc_K", "temperature_K")},
            "coil_constant": args.coil_constant,
            "junction_options": {k: getattr(args, k) for k in (
                "length_um", "width_um", "barrier_nm", "electrode_nm", "london_nm",
                "jc_kA_cm2", "planar")}}


def _write_report(analysis, args, out_dir):
    from .report.bundle import write_report

    return write_report(analysis, out_dir, args.argv, _settings(args))


def run_report(args) -> int:
    analysis = _analysis(args)
    paths = _write_report(analysis, args, args.out)
    print(f"report written to {paths['report.html']}")
    return EXIT_OK


def run_analyze(args) -> int:
    from .report.jsondoc import build_document, dumps
    from .report.summary import render_summary

    _check_plots(args.plot, args.map_plot)
    analysis = _analysis(args)
    written = []
    if args.plot:
        from .report.plot import pattern_figure, save_figure

        save_figure(pattern_figure(analysis.fits, os.path.basename(args.path)), args.plot)
        written.append(args.plot)
    if args.map_plot and analysis.extraction is not None:
        from .report.plot import map_figure, save_figure

        save_figure(map_figure(analysis.extraction), args.map_plot)
        written.append(args.map_plot)
    report = _write_report(analysis, args, args.report)["report.html"] if args.report else None
    if args.json:
        print(dumps(build_document(analysis, _settings(args))))
    else:
        print(render_summary(analysis))
        for path in written:
            print(f"\nfigure written to {path}")
        if report:
            print(f"\nreport written to {report}")
    return EXIT_OK


def run_extract(args) -> int:
    from .extract.engine import extract
    from .io import load_map

    _check_plots(args.plot)
    extraction = extract(load_map(args.path, _map_options(args)), **_extraction_options(args))
    from .report.files import write_text

    write_text(args.out, extraction.table_csv())
    for b in extraction.branches:
        counts = ", ".join(f"{v} {k}" for k, v in sorted(b.counts().items()))
        print(f"{b.name} branch ({b.source}): {counts}")
    level = extraction.threshold.get("value")
    shown = "none" if level is None else f"{level:.4g} {extraction.threshold['unit']}"
    rn = "not fitted" if extraction.rn_ohm is None else f"{extraction.rn_ohm:.4g} Ohm"
    print(f"criterion {extraction.criterion}, level {shown} "
          f"({extraction.threshold.get('chosen')}), Rn {rn}")
    print(f"table written to {args.out}")
    if args.plot:
        from .report.plot import map_figure, save_figure

        save_figure(map_figure(extraction), args.plot)
        print(f"figure written to {args.plot}")
    return EXIT_OK


def run_demo(args) -> int:
    from .demo import run_demo as demo

    demo(args.out, echo=print)
    return EXIT_OK


def main(argv=None) -> int:
    parser = build_parser()
    argv = sys.argv[1:] if argv is None else list(argv)
    args = parser.parse_args(argv)
    args.argv = argv
    if args.command is None:
        parser.print_help()
        return EXIT_INPUT
    from .errors import InputError

    handlers = {"analyze": run_analyze, "extract": run_extract, "report": run_report,
                "demo": run_demo}
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
