"""Command line of the history catalog: ``history``, ``compare``, ``catalog ...``, and the
``--catalog`` option of ``analyze`` and ``report``.

Only argparse at import time (the parser must start fast); everything else is
imported by the handlers.
"""

from __future__ import annotations

import argparse
import json
import os
import sys

EXIT_OK = 0


def add_catalog_options(parent: argparse.ArgumentParser) -> None:
    """``--catalog PATH``, ``--no-catalog`` and ``--catalog-label`` for analysing commands."""
    group = parent.add_argument_group("history catalog")
    group.add_argument("--catalog", metavar="PATH",
                       help="record the result in this catalog file (made if missing); "
                            "without it, results go to $JJPATTERN_CATALOG or to the default "
                            "catalog once `jjpattern catalog init` has made it")
    group.add_argument("--no-catalog", action="store_true",
                       help="record nothing in any catalog this time")
    group.add_argument("--catalog-label", metavar="KEY=VALUE", action="append", default=[],
                       help="junction, chip, cooldown, date or temperature_K for the catalog, "
                            "in place of the file's metadata; repeat for several")


def _tolerance_parent() -> argparse.ArgumentParser:
    parent = argparse.ArgumentParser(add_help=False)
    group = parent.add_argument_group("drift flags (a change must exceed both the tolerance "
                                      "and --drift-sigma combined standard errors)")
    group.add_argument("--ic0-tolerance", metavar="FRACTION", default="5%",
                       help="smallest change of Ic0 that counts, e.g. 0.05 or 5%% "
                            "(default 5%%)")
    group.add_argument("--period-tolerance", metavar="FRACTION", default="1%",
                       help="smallest change of the period (default 1%%)")
    group.add_argument("--offset-tolerance", metavar="PERIODS", type=float, default=0.1,
                       help="smallest move of the field offset, in periods (default 0.1)")
    group.add_argument("--drift-sigma", metavar="N", type=float, default=5.0,
                       help="combined standard errors a change must exceed (default 5)")
    return parent


def _catalog_path_parent() -> argparse.ArgumentParser:
    parent = argparse.ArgumentParser(add_help=False)
    parent.add_argument("--catalog", metavar="PATH",
                        help="the catalog file (default: $JJPATTERN_CATALOG, else the "
                             "catalog made by `jjpattern catalog init`)")
    return parent


def add_catalog_commands(sub) -> None:
    """Add ``history``, ``compare`` and ``catalog`` to the ``jjpattern`` subparsers."""
    where, tol = _catalog_path_parent(), _tolerance_parent()
    history = sub.add_parser(
        "history", parents=[where, tol], help="a junction's results across cooldowns",
        description="Table of a junction's recorded results, oldest measurement first, with "
                    "drift flags against the previous measurement.")
    history.add_argument("junction", help="the junction's name as recorded")
    history.add_argument("--chip", help="the chip, when the junction name is on several")
    out = history.add_mutually_exclusive_group()
    out.add_argument("--json", action="store_true", help="print the history as JSON")
    out.add_argument("--csv", metavar="FILE", help="write one row per record and branch")
    history.add_argument("--plot", metavar="FILE",
                         help="draw Ic0, period and offset against measurement")
    history.set_defaults(handler=run_history)

    compare = sub.add_parser(
        "compare", parents=[where, tol], help="differences between two results or chips",
        description="Compare two results: result.json files, input files (analysed with "
                    "default settings), folders of results (whole chips), or catalog "
                    "records written #ID or NAME@COOLDOWN (a junction or a chip).")
    compare.add_argument("a", metavar="A", help="the earlier result(s)")
    compare.add_argument("b", metavar="B", help="the later result(s)")
    compare.add_argument("--json", action="store_true", help="print the comparison as JSON")
    compare.add_argument("--csv", metavar="FILE", help="write one row per number compared")
    compare.add_argument("--plot", metavar="FILE", help="draw the changes junction by junction")
    compare.set_defaults(handler=run_compare)

    catalog = sub.add_parser("catalog", help="make, inspect, export and merge catalogs",
                             description="The history catalog: one SQLite file of results.")
    catalog.set_defaults(handler=lambda args: _usage(catalog))
    verbs = catalog.add_subparsers(dest="catalog_command", metavar="ACTION")
    init = verbs.add_parser("init", help="make a catalog (default: in your data folder)",
                            description="Make a catalog. Without PATH it is the default "
                                        "one, and analyze and report record into it from "
                                        "now on (--no-catalog skips).")
    init.add_argument("path", nargs="?", help="where to make it")
    init.set_defaults(handler=run_init)
    verbs.add_parser("where", help="show which catalog is used").set_defaults(handler=run_where)
    listing = verbs.add_parser("list", parents=[where, tol],
                               help="list chips, junctions, cooldowns or records")
    listing.add_argument("what", nargs="?", default="chips",
                         choices=("chips", "junctions", "cooldowns", "records"))
    for name in ("chip", "junction", "cooldown"):
        listing.add_argument(f"--{name}", help=f"only this {name}")
    listing.add_argument("--json", action="store_true", help="print JSON")
    listing.set_defaults(handler=run_list)
    show = verbs.add_parser("show", parents=[where, tol], help="show one record")
    show.add_argument("record", type=int, help="the record id (catalog list records)")
    show.add_argument("--json", action="store_true", help="print the result document")
    show.set_defaults(handler=run_show)
    export = verbs.add_parser("export", parents=[where, tol],
                              help="write records to .csv, .parquet, .jsonl or .sqlite")
    export.add_argument("out", help="the file; the format follows the suffix")
    for name in ("chip", "junction", "cooldown"):
        export.add_argument(f"--{name}", help=f"only this {name}")
    export.set_defaults(handler=run_export)
    imp = verbs.add_parser("import", parents=[where],
                           help="merge catalogs or result documents, without duplicates",
                           description="Add another catalog (.sqlite), exported .jsonl, "
                                       "result.json files or folders of them.")
    imp.add_argument("sources", nargs="+", metavar="SOURCE")
    imp.add_argument("--catalog-label", metavar="KEY=VALUE", action="append", default=[],
                     help="labels for result documents whose metadata lack them")
    imp.set_defaults(handler=run_import)


def _usage(parser) -> int:
    parser.print_help()
    return 2


# -- helpers -------------------------------------------------------------------------------
def _fraction(text, option):
    from .errors import InputError

    raw = str(text).strip()
    try:
        value = float(raw[:-1]) / 100 if raw.endswith("%") else float(raw)
    except ValueError:
        raise InputError(f"{option} {text!r}: not a number; write e.g. 0.05 or 5%") from None
    if not 0 <= value < 10:
        raise InputError(f"{option} {text!r}: out of range; write a fraction like 0.05")
    return value


def tolerances(args):
    from .catalog.drift import Tolerances

    return Tolerances(ic0_fraction=_fraction(args.ic0_tolerance, "--ic0-tolerance"),
                      period_fraction=_fraction(args.period_tolerance, "--period-tolerance"),
                      offset_periods=args.offset_tolerance, sigma=args.drift_sigma)


def parse_labels(items) -> dict:
    from .catalog.document import LABEL_KEYS
    from .errors import InputError

    out = {}
    for item in items or ():
        key, eq, value = item.partition("=")
        if not eq or key.strip() not in LABEL_KEYS:
            raise InputError(f"--catalog-label {item!r}: write KEY=VALUE with KEY one of "
                             f"{', '.join(LABEL_KEYS)}")
        out[key.strip()] = value
    return out


def _open(args, *, create=False):
    from .catalog import catalog_for_reading, open_catalog

    return open_catalog(catalog_for_reading(args.catalog), create=create)


def _dump(value) -> str:
    from .result import plain

    return json.dumps(plain(value), indent=2, ensure_ascii=False, allow_nan=False)


def _save_plot(fig_maker, path, echo=print):
    from .report.plot import check_plot_path, save_figure

    check_plot_path(path)
    save_figure(fig_maker(), path)
    echo(f"figure written to {path}")


# -- analyze / report ----------------------------------------------------------------------
def record_after_run(args, result, *, source_path=None, echo=print) -> None:
    """Record ``result`` when a catalog is in use and say where, with any drift found."""
    from .catalog import catalog_for_recording, open_catalog
    from .catalog.history import junction_history
    from .catalog.text import changes_line, drift_line

    path = catalog_for_recording(getattr(args, "catalog", None),
                                 disabled=getattr(args, "no_catalog", False))
    if path is None:
        return
    if source_path is None and str(getattr(args, "path", "")).lower().endswith(".json"):
        # A saved document is recorded as written: its settings hash belongs to the
        # jjpattern version that made it, which Result.to_dict() would recompute.
        with open(args.path, encoding="utf-8") as handle:
            result = json.load(handle)
    with open_catalog(path) as catalog:
        done = catalog.record(result, source_path=source_path,
                              labels=parse_labels(getattr(args, "catalog_label", [])))
        row = catalog.record_row(done.record_id)
        history = junction_history(catalog, row.junction, row.chip)
    if done.created:
        echo(f"recorded in catalog {path} as record {done.record_id}")
        if row.changed:
            echo(f"  reanalysis: {changes_line(row.changed)}")
    else:
        echo(f"already in catalog {path} as record {done.record_id} (same input, same "
             "settings)")
    entry = next(r for r in history["records"] if r["id"] == done.record_id)
    for flag in entry["drift"]:
        echo(f"  DRIFT {flag['code']}: {drift_line(flag)}")


# -- history and compare ---------------------------------------------------------------------
def run_history(args) -> int:
    from .catalog.history import flat_rows, junction_history, rows_csv
    from .catalog.text import history_text
    from .fmt import plural
    from .report.files import write_text

    if args.plot:
        from .report.plot import check_plot_path

        check_plot_path(args.plot)
    with _open(args) as catalog:
        history = junction_history(catalog, args.junction, args.chip, tolerances(args))
    if args.json:
        print(_dump(history))
    elif args.csv:
        write_text(args.csv, rows_csv(flat_rows(history["records"])))
        print(f"{plural(len(history['records']), 'record')} written to {args.csv}")
    else:
        print(history_text(history))
    if args.plot:
        from .catalog.figures import history_figure

        _save_plot(lambda: history_figure(history), args.plot,
                   echo=lambda s: print(s, file=sys.stderr if args.json else sys.stdout))
    return EXIT_OK


def run_compare(args) -> int:
    from .catalog import catalog_for_reading
    from .catalog.compare import compare_sides, load_side
    from .catalog.text import compare_text
    from .errors import InputError

    if args.plot:
        from .report.plot import check_plot_path

        check_plot_path(args.plot)
    try:
        catalog_path = catalog_for_reading(args.catalog)
    except InputError:
        catalog_path = None
    label_a, side_a = load_side(args.a, catalog_path)
    label_b, side_b = load_side(args.b, catalog_path)
    comparison = compare_sides(side_a, side_b, label_a=label_a, label_b=label_b,
                               tol=tolerances(args))
    if not comparison["junctions"]:
        raise InputError(f"{args.a} and {args.b} share no junction; compare results of the "
                         "same junctions")
    print(_dump(comparison) if args.json else compare_text(comparison))
    echo = (lambda s: print(s, file=sys.stderr)) if args.json else print
    if args.csv:
        from .report.files import write_text

        write_text(args.csv, _compare_csv(comparison))
        echo(f"table written to {args.csv}")
    if args.plot:
        from .catalog.figures import compare_figure

        _save_plot(lambda: compare_figure(comparison), args.plot, echo=echo)
    return EXIT_OK


def _compare_csv(comparison) -> str:
    import csv
    import io

    columns = ("junction", "branch", "model_a", "model_b", "quantity", "a", "a_stderr", "b",
               "b_stderr", "difference", "difference_stderr", "significance_sigma",
               "relative_change", "drift")
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(columns)
    for j in comparison["junctions"]:
        for b in j["branches"]:
            codes = " ".join(f["code"] for f in j["drift"] if f["branch"] == b["branch"])
            for n in b["numbers"]:
                values = [j["junction"], b["branch"], b["model_a"], b["model_b"]]
                values += [n[k] for k in columns[4:-1]] + [codes]
                writer.writerow(["" if v is None else repr(v) if isinstance(v, float) else v
                                 for v in values])
    return buffer.getvalue()


# -- catalog ... ------------------------------------------------------------------------------
def run_init(args) -> int:
    from .catalog import open_catalog
    from .catalog.paths import configured_catalog
    from .fmt import plural

    path, why = (os.path.expanduser(args.path), "given") if args.path else configured_catalog()
    if not args.path:
        os.makedirs(os.path.dirname(path), exist_ok=True)
    existed = os.path.isfile(path)
    with open_catalog(path) as catalog:
        info = catalog.info()
    state = "exists already" if existed else "made"
    print(f"catalog {state}: {path} ({plural(info['records'], 'record')}, layout "
          f"{info['layout']})")
    if args.path:
        print(f"record into it with --catalog {path}, or set JJPATTERN_CATALOG={path}")
    else:
        print(f"({why}) analyze and report record every result into it from now on; "
              "--no-catalog skips one run")
    return EXIT_OK


def run_where(args) -> int:
    from .catalog.paths import configured_catalog
    from .fmt import plural

    path, why = configured_catalog()
    if os.path.isfile(path):
        from .catalog import open_catalog

        with open_catalog(path, create=False) as catalog:
            info = catalog.info()
        print(f"{path} ({why}; {plural(info['records'], 'record')}, layout {info['layout']})")
    else:
        print(f"{path} ({why}; not made: `jjpattern catalog init` makes it, and until then "
              "results are recorded only with --catalog PATH)")
    return EXIT_OK


def run_list(args) -> int:
    from .catalog.listing import listing, listing_text

    with _open(args) as catalog:
        rows = listing(catalog, args.what, tol=tolerances(args), chip=args.chip,
                       junction=args.junction, cooldown=args.cooldown)
    print(_dump(rows) if args.json else listing_text(rows))
    return EXIT_OK


def run_show(args) -> int:
    from .catalog.history import junction_history
    from .catalog.text import changes_line, drift_line
    from .report.summary import render_summary

    with _open(args) as catalog:
        row = catalog.record_row(args.record)
        if args.json:
            print(json.dumps(catalog.document(row.id), indent=2, ensure_ascii=False))
            return EXIT_OK
        result = catalog.result(row.id)
        history = junction_history(catalog, row.junction, row.chip, tolerances(args))
    entry = next(r for r in history["records"] if r["id"] == row.id)
    print(f"record {row.id}: junction {row.junction}, chip {row.chip or '-'}, cooldown "
          f"{row.cooldown or '-'}, measured {row.measured or '-'}, temperature "
          f"{'-' if row.temperature_K is None else f'{row.temperature_K:g} K'}")
    print(f"input {row.input_path or '-'} (sha256 {row.input_sha256[:16]}...), settings "
          f"{row.settings_sha256[:16]}..., jjpattern {row.tool_version}")
    print(f"recorded {row.recorded_utc} by {row.recorded_by or 'unknown'}")
    if row.changed:
        print(f"reanalysis: {changes_line(row.changed)}")
    for flag in entry["drift"]:
        print(f"DRIFT {flag['code']}: {drift_line(flag)}")
    print()
    print(render_summary(result))
    return EXIT_OK


def run_export(args) -> int:
    from .catalog.transfer import export_catalog
    from .fmt import plural

    with _open(args) as catalog:
        n = export_catalog(catalog, args.out, tol=tolerances(args), chip=args.chip,
                           junction=args.junction, cooldown=args.cooldown)
    print(f"{plural(n, 'record')} written to {args.out}")
    return EXIT_OK


def run_import(args) -> int:
    from .catalog import catalog_for_reading, open_catalog
    from .catalog.transfer import import_sources
    from .fmt import plural

    labels = parse_labels(args.catalog_label)
    path = os.path.expanduser(args.catalog) if args.catalog else catalog_for_reading(None)
    with open_catalog(path) as catalog:
        report = import_sources(catalog, args.sources, labels=labels)
    for source, c in report.items():
        skipped = f", {c['skipped']} JSON files that are not results skipped" \
            if c["skipped"] else ""
        print(f"{source}: {plural(c['added'], 'record')} added, {c['present']} already present"
              f"{skipped}")
    print(f"catalog {path}")
    return EXIT_OK


def record_batch_after_run(args, results_dir: str, echo=print) -> None:
    """Record every result document of a batch folder, from this one process (the workers
    never write to the catalog); already-recorded documents are left as they are."""
    from .catalog import catalog_for_recording, open_catalog

    path = catalog_for_recording(getattr(args, "catalog", None),
                                 disabled=getattr(args, "no_catalog", False))
    if path is None or not os.path.isdir(results_dir):
        return
    created = present = 0
    labels = parse_labels(getattr(args, "catalog_label", []))
    with open_catalog(path) as catalog:
        for name in sorted(os.listdir(results_dir)):
            if not name.endswith(".json"):
                continue
            with open(os.path.join(results_dir, name), encoding="utf-8") as handle:
                document = json.load(handle)
            done = catalog.record(document, labels=labels)
            created += bool(done.created)
            present += not done.created
    echo(f"catalog {path}: {created} new records, {present} already there")
