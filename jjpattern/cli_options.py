"""Command-line options: the groups shared by the commands, and their one mapping onto
:class:`~jjpattern.settings.Settings` (SI units) in :func:`settings_from_args`.

What reading or fitting needs is imported inside the functions, so ``--help`` stays light.
"""

from __future__ import annotations

import argparse

from .cli_catalog import add_catalog_options


def reading_parent() -> argparse.ArgumentParser:
    """Options of reading a file and extracting a raw map (every command that reads one)."""
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


def analysis_parent() -> argparse.ArgumentParser:
    """:func:`reading_parent` with geometry, fitting, report and catalog options."""
    parent = argparse.ArgumentParser(add_help=False, parents=[reading_parent()])
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
                       default="auto", metavar="MODEL",
                       help="pattern model (default: auto, which fits every model and "
                            "chooses by the Bayesian information criterion with a margin; "
                            "a name fits that model alone): "
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


def attach_interval_values(argv: list) -> list:
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


def figure_formats(text: str) -> tuple[str, ...]:
    """``'png,SVG'`` as ``('.png', '.svg')``; another format is a user mistake."""
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
    report = (ReportSettings(figure_formats=figure_formats(args.figures)) if args.figures
              else ReportSettings())
    return Settings(read=read, extract=extract,
                    fit=FitSettings(model=args.model, node_floor=args.node_floor,
                                    loss=args.loss),
                    diagnose=DiagnoseSettings(seed=args.seed), junction=junction,
                    report=report)
