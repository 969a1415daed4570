"""The readable text summary printed by ``jjpattern analyze`` without ``--json``."""

from __future__ import annotations

from .display import (
    AREA_UNITS,
    CURRENT_UNITS,
    FIELD_UNITS,
    VOLTAGE_UNITS,
    derived_rows,
    format_measure,
    pick_unit,
)


def _fit_lines(fit) -> list[str]:
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
    width = max(len(k) for k, _ in rows)
    head = f"{fit.branch} branch, {fit.model} model"
    return [head] + [f"  {k.ljust(width)}  {v}" for k, v in rows]


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
        ref = d.get("uniform_reference")
        uniform = (f"{ref['edge_fraction']:.3f} for a uniform junction through the same "
                   "reconstruction" if ref else "0.2 for exactly uniform current")
        lines.append(f"  edge fraction {d['edge_fraction']:.3f} (outer 10 % each side; "
                     f"{uniform}), centre of mass {d['centre_of_mass_over_length']:+.3f} L")
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
