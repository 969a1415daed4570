"""The readable text summary printed by ``jjpattern analyze`` without ``--json``."""

from __future__ import annotations

from ..fmt import (  # noqa: F401  (the words are re-exported for html and methods)
    RESISTANCE_UNITS,
    branch_words,
    fixed,
    flag_heading,
    flag_words,
    plural,
    shown_path,
    sweep_words,
)
from .display import (
    AREA_UNITS,
    CURRENT_UNITS,
    FIELD_UNITS,
    VOLTAGE_UNITS,
    format_measure,
    format_si_key,
    pick_unit,
)
from .geometry import geometry_rows

_PLAIN = (("", 1.0),)


def _length(value_T) -> str:
    return format_measure(value_T, None, FIELD_UNITS, digits=4)


def layout_lines(info: dict) -> list[str]:
    """Sentences on how the file was laid out and what reading did (the ``layout`` block)."""
    layout = info.get("layout") or {}
    out = []
    how = []
    if layout.get("container"):
        how.append(f"read as {layout['container']}"
                   + (f" (group {layout['group']})" if layout.get("group") else ""))
    elif layout.get("group"):
        how.append(f"read from group {layout['group']}")
    if layout.get("decimal") == ",":
        how.append("numbers written with a decimal comma")
    if layout.get("units_row_line"):
        how.append(f"units taken from the row under the names (line {layout['units_row_line']})")
    if how:
        text = "; ".join(how)
        out.append(text[0].upper() + text[1:] + ".")
    for signed in layout.get("signed_columns", []):
        text = (f"Column {signed['column']!r} holds both polarities: "
                f"{signed['positive_rows']} positive and {signed['negative_rows']} negative "
                "rows, fitted as two branches")
        aside = signed["zero_rows_set_aside"]
        text += f"; {aside} rows reading zero set aside" if aside else ""
        for side in ("positive", "negative"):
            if signed.get(f"{side}_rows_set_aside"):
                text += (f"; the {signed[f'{side}_rows_set_aside']} {side} rows, too few to "
                         "fit, set aside")
        out.append(text + ".")
    segments = layout.get("segments")
    if segments:
        names = ", ".join(dict.fromkeys(s["segment"] for s in segments))
        out.append(f"The field was swept both ways ({names}); each sweep is fitted on its own.")
    if layout.get("points_in_short_reversals"):
        out.append(f"{layout['points_in_short_reversals']} points measured while the field "
                   "briefly turned back (too few to fit) set aside.")
    window = layout.get("field_window")
    if window:
        if window.get("field_range_T"):
            lo, hi = window["field_range_T"]
            ends = (f"from {_length(lo)}" if lo is not None else "") + (
                f"{' ' if lo is not None else ''}up to {_length(hi)}" if hi is not None else "")
            out.append(f"Field range {ends}: {plural(window['points_outside_range'], 'row')} "
                       "outside left out (a row is one field value with every branch on it).")
        for lo, hi in window.get("exclude_T", []):
            out.append(f"Excluded by hand: {_length(lo)} to {_length(hi)}.")
        if window.get("exclude_T"):
            out.append(f"{plural(window['points_excluded'], 'row')} in the excluded intervals "
                       "left out.")
    if layout.get("duplicates_averaged"):
        out.append(layout["duplicates_averaged"][0].upper() + layout["duplicates_averaged"][1:]
                   + ".")
    return out


def hysteresis_lines(block: dict | None) -> list[str]:
    """One line per pair of sweeps compared (second against first, as swept)."""
    if not block:
        return []
    out = []
    for pair in block["pairs"]:
        shift = format_measure(pair["offset_shift_T"], pair["offset_shift_stderr_T"],
                               FIELD_UNITS)
        parts = [f"offset shift {shift}"]
        if pair.get("offset_shift_periods") is not None:
            parts[-1] += f" ({pair['offset_shift_periods']:+.3f} periods)"
        for key, name in (("period_ratio", "period ratio"), ("ic0_ratio", "Ic0 ratio")):
            if pair.get(key) is not None:
                plain = format_measure(pair[key], pair[f"{key}_stderr"], _PLAIN, _PLAIN[0])
                parts.append(f"{name} {plain.strip()}")
        out.append(f"{pair['branch']} branch, {sweep_words(pair['second'])} against "
                   f"{sweep_words(pair['first'])}: " + ", ".join(parts))
    return out


def choice_sentence(choice: dict | None) -> str:
    """The automatic model choice in words (empty when the model was given)."""
    if not choice:
        return ""
    text = _choice_words(choice)
    own = choice.get("this_branch")
    if choice.get("branches") and own and (own.get("chosen"), own.get("decision")) != (
            choice["chosen"], choice["decision"]):
        text += f" (this branch alone: {_choice_words(own, short=True)})"
    return text


def _choice_words(choice: dict, short: bool = False) -> str:
    chosen, runner = choice["chosen"], choice.get("runner_up")
    together = bool(choice.get("branches"))
    text = ("" if short else
            f"chosen automatically by {choice['criterion']} over "
            f"{len(choice['candidates'])} models"
            + (f", summed over {choice['branches']} branches" if together else "") + ": ")
    margin = choice["margin"]
    aside = choice.get("set_aside") or []
    aside = ("; set aside as not describing the data: " + ", ".join(map(_aside_words, aside))
             if aside else "")
    if choice["decision"] == "none fits":
        what = "the branches together" if together else "the data"
        return (f"{text}no model describes {what}, so the reference {chosen} model is "
                f"reported{aside}")
    if runner is None:
        return f"{text}{chosen}{aside}"
    diff = choice["criterion_difference"]
    if choice["decision"] == "clear":
        return (f"{text}{chosen}, BIC lower than the next ({runner}) by {diff:.1f}; a clear "
                f"choice needs {margin:g}{aside}")
    lowest = choice["lowest_criterion"]
    if lowest != chosen:
        return (f"{text}near tie, {lowest} is lower by {-diff:.1f}, less than the margin "
                f"{margin:g}, so the simpler {chosen} model is reported{aside}")
    return (f"{text}near tie between {chosen} and {runner} ({diff:+.1f}, margin "
            f"{margin:g}); the simpler {chosen} model is reported{aside}")


def _aside_words(entry: dict) -> str:
    """One set-aside model with its evidence, short (the block's ``reason`` is the long
    form)."""
    if "shape parameter" in entry["reason"]:
        return f"{entry['model']} (reduced chi-square {entry['reduced_chisq']:.3g})"
    ratio = entry.get("residual_runs_ratio")
    return (f"{entry['model']} (residual sign runs z = {entry['residual_runs_z']:.1f}"
            + (f", {ratio:.2f} of those expected" if ratio is not None else "") + ")")


#: Names for people of the numbers models derive (others: the key in words).
DERIVED_NAMES = {
    "length_over_josephson_depth": "L/lambda_J",
    "jc_times_area_A": "Jc W L",
    "lower_critical_field_T": "lower critical field mu0 Hc1",
    "pattern_max_A": "largest Ic",
    "pattern_max_field_from_offset_T": "largest Ic at B - B0 =",
}


def derived_items(fit) -> list:
    """``(name, text)`` for the model's own derived numbers (L/lambda_J, Jc W L, ...)."""
    rows = []
    for key, value in (fit.derived or {}).items():
        err = (fit.derived_stderr or {}).get(key)
        name = DERIVED_NAMES.get(key) or key.removesuffix("_A").removesuffix("_T").replace(
            "_", " ")
        text = (format_measure(value, err, CURRENT_UNITS) if key.endswith("_A")
                else format_si_key(key, value, err))
        rows.append((name, text))
    return rows


def _fit_lines(fit) -> list[str]:
    if fit.withheld:
        head = f"{fit.branch} branch, {fit.model} model: numbers withheld"
        lines = [head, f"  {fit.withheld['text']}."]
        choice = choice_sentence(fit.model_choice)
        if choice:
            lines.append(f"  model {choice}")
        return lines + [f"  in window: {plural(fit.points_used, 'point')}; no fit curve is drawn"]
    scale = fit.period_T or fit.best_params.get("period_T") or abs(fit.field_max_T)
    field_unit = pick_unit(scale, FIELD_UNITS)
    current_unit = pick_unit(fit.ic_max_A or 1e-6, CURRENT_UNITS)
    rows = [
        ("period", format_measure(fit.period_T, fit.period_stderr_T, FIELD_UNITS, field_unit)),
        ("effective area", format_measure(fit.effective_area_m2, fit.effective_area_stderr_m2,
                                          AREA_UNITS)),
        ("field offset", format_measure(fit.field_offset_T, fit.field_offset_stderr_T,
                                        FIELD_UNITS, field_unit)),
        ("Ic0", format_measure(fit.ic0_A, fit.ic0_stderr_A, CURRENT_UNITS, current_unit)),
    ]
    if fit.node_floor_A is not None:
        rows.append(("node floor", format_measure(fit.node_floor_A, fit.node_floor_stderr_A,
                                                  CURRENT_UNITS, current_unit)))
    if fit.reduced_chisq is not None:
        noise = format_measure(fit.noise_A, None, CURRENT_UNITS, current_unit, digits=2)
        rows.append(("reduced chi-square", f"{fit.reduced_chisq:.2f} (point-to-point noise "
                                           f"{noise})"))
    if fit.lobes_observed is not None:
        rows.append(("in window", f"{plural(fit.lobes_observed, 'lobe')}, "
                                  f"{plural(fit.nodes_observed, 'node')}, "
                                  f"{plural(fit.points_used, 'point')}"))
    if fit.loss != "linear":
        rows.append(("robust loss", f"{fit.loss}, "
                                    f"{plural(fit.points_downweighted, 'point')} down-weighted"))
    rows += derived_items(fit)
    choice = choice_sentence(fit.model_choice)
    if choice:
        rows.append(("model", choice))
    width = max(len(k) for k, _ in rows)
    head = f"{branch_words(fit.branch, fit.segment)}, {fit.model} model"
    lines = [head] + [f"  {k.ljust(width)}  {v}" for k, v in rows]
    from ..physics.models import get_model

    try:
        meaning = get_model(fit.model).ic0_meaning
    except ValueError:
        meaning = ""
    if meaning:
        lines.append(f"  Ic0 here is {meaning}")
    return lines


def edge_fraction_text(d: dict) -> str:
    """The edge fraction with its spread over the resamplings, rounded to it."""
    return format_measure(d["edge_fraction"], d.get("edge_fraction_stderr"), digits=3)


def centre_text(d: dict) -> str:
    """The centre of mass of J(x) in junction lengths, rounded to its spread, and to
    0.001 L where the spread is smaller (a symmetric reconstruction is centred exactly)."""
    value, spread = d["centre_of_mass_over_length"], d.get("centre_of_mass_stderr")
    if spread is None or spread < 5e-4:
        return f"{fixed(value, 3)} L"
    return format_measure(value, spread, (("L", 1.0),), ("L", 1.0))


def _counts(entry: dict) -> str:
    return ", ".join(f"{v} {k}" for k, v in sorted(entry["status_counts"].items()))


def level_text(threshold: dict) -> str:
    """The extraction level and how it was chosen: ``'1.26 µV (5 x zero-branch noise)'``."""
    level, chosen = threshold.get("value"), threshold.get("chosen") or ""
    if level is None:
        return chosen or "none"
    units = VOLTAGE_UNITS if threshold.get("unit") == "V" else RESISTANCE_UNITS
    text = format_measure(level, None, units, digits=3)
    return f"{text} ({chosen})" if chosen else text


def rn_text(rn_ohm) -> str:
    """The normal resistance, or that it was not fitted."""
    return "not fitted" if rn_ohm is None else format_measure(rn_ohm, None, RESISTANCE_UNITS)


def _extraction_lines(result) -> list[str]:
    ex = result.extraction
    shown = level_text(ex["threshold"])
    n_field, n_bias = ex["map_shape"]
    lines = [f"  extracted from a {n_field} x {n_bias} {ex['signal']} map: "
             f"{ex['criterion']} criterion, level {shown}"]
    if ex["normal_resistance_ohm"] is not None:
        lines.append(f"  normal resistance {rn_text(ex['normal_resistance_ohm'])}")
    for b in ex["branches"]:
        ratio = b["retrapping_over_switching"]
        ratio = "" if ratio is None else f", retrapping/switching {ratio:.3f}"
        lines.append(f"  {b['branch']}: {b['source']}, {_counts(b)}{ratio}")
    icrn = result.icrn
    if icrn:
        volts = lambda v: format_measure(v, None, VOLTAGE_UNITS, digits=4)  # noqa: E731
        text = f"  IcRn {volts(icrn['icrn_V'])}"
        if "ambegaokar_baratoff_V" in icrn:
            text += (f"; Ambegaokar-Baratoff {volts(icrn['ambegaokar_baratoff_V'])}, "
                     f"ratio {icrn['icrn_over_ab']:.3f}")
        lines.append(text)
    return lines


def render_summary(result) -> str:
    """Several short blocks: the input, each branch's numbers, then the flags."""
    info = result.input
    lines = [f"jjpattern {result.tool['version']}: {shown_path(info['path'])}"]
    meta = info["metadata"]
    if meta:
        lines.append("  " + "; ".join(f"{k}: {v}" for k, v in meta.items()))
    lines.append(
        f"  {plural(info['points_used'], 'point')} used, {info['points_dropped']} non-finite "
        f"dropped, {plural(info['duplicates_merged'], 'duplicate field')} averaged"
    )
    lines.extend(f"  {line}" for line in layout_lines(info))
    if result.extraction is not None:
        lines.extend(_extraction_lines(result))
    for fit in result.fits:
        lines.append("")
        lines.extend(_fit_lines(fit))
    segments = {f.branch: f.segment for f in result.fits}
    for branch, d in result.current_density.items():
        lines.append("")
        lines.append(f"current density, {branch_words(branch, segments.get(branch, ''))} "
                     f"({d['method']}, resolution "
                     f"{d['resolution_over_length']:.3f} L)")
        ref = d.get("uniform_reference")
        uniform = (f"{format_measure(ref['edge_fraction'], None, digits=3)} for a uniform "
                   "junction through the same reconstruction" if ref
                   else "0.2 for exactly uniform current")
        lines.append(f"  edge fraction {edge_fraction_text(d)} (outer 10 % each side; "
                     f"{uniform}), centre of mass {centre_text(d)}")
    if result.geometry:
        lines.append("")
        lines.append("geometry and materials")
        for name, text, note in geometry_rows(result.geometry):
            lines.append(f"  {name}: {text}" + (f" ({note})" if note else ""))
    hysteresis = hysteresis_lines(getattr(result, "field_hysteresis", None))
    if hysteresis:
        lines.append("")
        lines.append("field hysteresis (each sweep against the one before it)")
        lines.extend(f"  {line}" for line in hysteresis)
    flags = result.flags
    lines.append("")
    if not flags:
        lines.append("flags: none")
    else:
        lines.append("flags:")
        for flag in flags:
            lines.append(f"  {flag_heading(flag, result.fits)}: {flag.message}")
    return "\n".join(lines)


def short_summary(result) -> list[str]:
    """A few lines on what was found: each branch's period and Ic0, and the flags counted."""
    polarities = len({f.branch.split()[0] for f in result.fits if f.branch})
    head = f"{result.title}: {plural(polarities, 'branch', 'branches')} fitted"
    if len(result.fits) > polarities:
        head += f", each sweep of the field on its own ({len(result.fits)} fits)"
    lines = [head]
    for fit in result.fits:
        where = branch_words(fit.branch, fit.segment)
        if fit.withheld or fit.period_T is None:
            lines.append(f"  {where}: numbers withheld ({fit.model} model)")
            continue
        period = format_measure(fit.period_T, fit.period_stderr_T, FIELD_UNITS)
        ic0 = ("Ic0 not given" if fit.ic0_A is None else
               "Ic0 " + format_measure(fit.ic0_A, fit.ic0_stderr_A, CURRENT_UNITS,
                                       pick_unit(fit.ic_max_A or 1e-6, CURRENT_UNITS)))
        lines.append(f"  {where}: period {period}, {ic0} ({fit.model} model)")
    by_severity = {}
    for flag in result.flags:
        by_severity.setdefault(flag.severity, []).append(flag.code)
    if not by_severity:
        lines.append("  flags: none")
    for severity in ("error", "warning", "info"):
        codes = list(dict.fromkeys(by_severity.get(severity, [])))
        if codes:
            lines.append(f"  {severity}: {', '.join(codes)}")
    return lines
