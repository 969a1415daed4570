"""The readable text summary printed by ``jjpattern analyze`` without ``--json``."""

from __future__ import annotations

from .display import (
    AREA_UNITS,
    CURRENT_UNITS,
    FIELD_UNITS,
    VOLTAGE_UNITS,
    derived_rows,
    format_measure,
    format_si_key,
    pick_unit,
)


def choice_sentence(choice: dict | None) -> str:
    """The automatic model choice in words (empty when the model was given)."""
    if not choice:
        return ""
    chosen, runner = choice["chosen"], choice.get("runner_up")
    text = f"chosen automatically by {choice['criterion']} over {len(choice['candidates'])} models"
    if choice.get("branches"):
        text += f", summed over {choice['branches']} branches"
    if runner is None:
        return text
    diff = choice["criterion_difference"]
    if choice["decision"] == "clear":
        return (f"{text}: {chosen}, next {runner} {diff:+.1f} "
                f"(margin {choice['margin']:g})")
    lowest = choice["lowest_criterion"]
    if lowest != chosen:
        return (f"{text}: near tie, {lowest} is lower by {-diff:.1f}, less than the margin "
                f"{choice['margin']:g}, so the simpler {chosen} model is reported")
    return (f"{text}: near tie between {chosen} and {runner} ({diff:+.1f}, margin "
            f"{choice['margin']:g}); the simpler {chosen} model is reported")


def derived_items(fit) -> list:
    """``(name, text)`` for the model's own derived numbers (L/lambda_J, Jc W L, ...)."""
    rows = []
    for key, value in (fit.derived or {}).items():
        err = (fit.derived_stderr or {}).get(key)
        name = key.removesuffix("_A").removesuffix("_T").replace("_", " ")
        text = (format_measure(value, err, CURRENT_UNITS) if key.endswith("_A")
                else format_si_key(key, value, err))
        rows.append((name.replace("jc times area", "Jc times area"), text))
    return rows


def _fit_lines(fit) -> list[str]:
    if fit.withheld:
        head = f"{fit.branch} branch, {fit.model} model: numbers withheld"
        lines = [head, f"  {fit.withheld['text']}."]
        choice = choice_sentence(fit.model_choice)
        if choice:
            lines.append(f"  model {choice}")
        return lines + [f"  in window: {fit.points_used} points; no fit curve is drawn"]
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
        rows.append(("in window", f"{fit.lobes_observed} lobes, {fit.nodes_observed} nodes, "
                                  f"{fit.points_used} points"))
    if fit.loss != "linear":
        rows.append(("robust loss", f"{fit.loss}, {fit.points_downweighted} points "
                                    "down-weighted"))
    rows += derived_items(fit)
    choice = choice_sentence(fit.model_choice)
    if choice:
        rows.append(("model", choice))
    width = max(len(k) for k, _ in rows)
    head = f"{fit.branch} branch, {fit.model} model"
    lines = [head] + [f"  {k.ljust(width)}  {v}" for k, v in rows]
    from ..physics.models import get_model

    try:
        meaning = get_model(fit.model).ic0_meaning
    except ValueError:
        meaning = ""
    if meaning:
        lines.append(f"  Ic0 here is {meaning}")
    return lines


def _counts(entry: dict) -> str:
    return ", ".join(f"{v} {k}" for k, v in sorted(entry["status_counts"].items()))


def _extraction_lines(result) -> list[str]:
    ex = result.extraction
    threshold = ex["threshold"]
    level = threshold.get("value")
    if level is None:
        shown = threshold.get("chosen", "")
    elif threshold["unit"] == "V":
        shown = f"{format_measure(level, None, VOLTAGE_UNITS, digits=3)} ({threshold['chosen']})"
    else:
        shown = f"{level:.3g} Ω ({threshold['chosen']})"
    n_field, n_bias = ex["map_shape"]
    lines = [f"  extracted from a {n_field} x {n_bias} {ex['signal']} map: "
             f"{ex['criterion']} criterion, level {shown}"]
    if ex["normal_resistance_ohm"] is not None:
        lines.append(f"  normal resistance {ex['normal_resistance_ohm']:.4g} Ω")
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
    lines = [f"jjpattern {result.tool['version']}: {info['path']}"]
    meta = info["metadata"]
    if meta:
        lines.append("  " + "; ".join(f"{k}: {v}" for k, v in meta.items()))
    lines.append(
        f"  {info['points_used']} points used, {info['points_dropped']} non-finite dropped, "
        f"{info['duplicates_merged']} duplicate fields averaged"
    )
    if result.extraction is not None:
        lines.extend(_extraction_lines(result))
    for fit in result.fits:
        lines.append("")
        lines.extend(_fit_lines(fit))
    for branch, d in result.current_density.items():
        lines.append("")
        lines.append(f"current density, {branch} branch ({d['method']}, resolution "
                     f"{d['resolution_over_length']:.3f} L)")
        lines.append(f"  edge fraction {d['edge_fraction']:.3f} (outer 10 % each side; 0.2 for "
                     f"uniform), centre of mass {d['centre_of_mass_over_length']:+.3f} L")
    if result.geometry:
        lines.append("")
        lines.append("geometry and materials")
        for name, text in derived_rows(result.geometry):
            lines.append(f"  {name}: {text}")
    flags = result.flags
    lines.append("")
    if not flags:
        lines.append("flags: none")
    else:
        lines.append("flags:")
        for flag in flags:
            where = f"{flag.branch} branch" if flag.branch else "both branches"
            lines.append(f"  [{flag.severity}] {flag.code} ({where}): {flag.message}")
    return "\n".join(lines)
