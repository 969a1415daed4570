"""Readable tables of histories, drift flags and comparisons (units for people)."""

from __future__ import annotations

from ..fmt import key_unit
from ..report.display import AREA_UNITS, CURRENT_UNITS, FIELD_UNITS, format_measure, pick_unit

_UNITS = {"A": CURRENT_UNITS, "T": FIELD_UNITS, "m2": AREA_UNITS}


#: Words for the numbers compared; the unit follows in brackets ("Ic0 (µA)").
_WORDS = {"ic0_A": "Ic0", "period_T": "period", "field_offset_T": "field offset",
          "effective_area_m2": "effective area", "node_floor_A": "node floor"}


def _label(quantity: str, unit: str) -> str:
    words = _WORDS.get(quantity) or key_unit(quantity)[0]
    return f"{words} ({unit})" if unit else words


def _cell(value, err, unit) -> str:
    if value is None:
        return "-"
    return format_measure(value, err, None, unit).removesuffix(f" {unit[0]}")


def _units(fits):
    ic0 = next((f["ic0_A"] for f in fits if f.get("ic0_A")), 1e-6)
    period = next((f["period_T"] for f in fits if f.get("period_T")), 1e-3)
    return pick_unit(abs(ic0), CURRENT_UNITS), pick_unit(abs(period), FIELD_UNITS)


def _table(header, rows) -> list[str]:
    widths = [max(len(str(r[i])) for r in [header] + rows) for i in range(len(header))]
    return ["  ".join(str(c).ljust(w) for c, w in zip(r, widths, strict=True)).rstrip()
            for r in [header] + rows]


def drift_line(flag: dict) -> str:
    """One drift flag in words with its numbers."""
    e = flag["evidence"]
    where = f"{flag['branch']} branch: " if flag.get("branch") else ""
    since = ""
    if "previous_record" in e:
        label = e.get("previous_cooldown") or e.get("previous_measured") or "no label"
        since = f" since record {e['previous_record']} ({label})"
        if not e.get("same_settings", True):
            since += ", analysed with other settings"
    if flag["code"] == "chip-drift":
        size = e.get("median_relative_change")
        size = (f"median {100 * size:+.1f} %" if size is not None
                else f"median {e.get('median_change_periods', 0):+.2f} periods")
        where = (f"cooldown {e['cooldown']}" if e.get("cooldown") is not None
                 else "from A to B")
        return (f"chip {e.get('chip') or '(unnamed)'}, {where}: {e['quantity']} "
                f"{e['direction']} in {e['junctions_changed']} of {e['junctions_compared']} "
                f"junctions compared ({size}): look for a common cause first")
    sigma = e.get("significance_sigma")
    sigma = "exact values" if sigma is None else f"{sigma:.1f} sigma"
    if flag["code"] == "offset-moved":
        return (f"{where}field offset moved by {e['change_periods']:+.2f} periods ({sigma}; "
                f"tolerance {e['tolerance_periods']:g} periods){since}")
    name = "Ic0" if flag["code"] == "ic0-changed" else "period"
    return (f"{where}{name} changed by {100 * e['relative_change']:+.2f} % ({sigma}; "
            f"tolerance {100 * e['tolerance_fraction']:g} %){since}")


def changes_line(changed: dict | None) -> str:
    if not changed:
        return ""
    parts = [f"{c['setting']} {c['from']!r} -> {c['to']!r}" for c in changed["settings"]]
    return (f"same input as record {changed['previous_record']}, "
            + ("; ".join(parts) if parts else "settings hash differs"))


def history_text(history: dict) -> str:
    """The table of ``jjpattern history``: one line per record and branch, then details."""
    records = history["records"]
    chip = history["chip"] or "(no chip)"
    lines = [f"junction {history['junction']} on chip {chip}: {len(records)} record"
             f"{'s' if len(records) != 1 else ''}, oldest measurement first"]
    (cname, cfac), (fname, ffac) = _units([f for r in records for f in r["fits"]])
    cu, fu = (cname, cfac), (fname, ffac)
    header = ["rec", "cooldown", "date", "T (K)", "branch", "model", f"Ic0 ({cname})",
              f"period ({fname})", f"offset ({fname})", "flags"]
    rows = []
    for r in records:
        for fit in r["fits"] or [{"branch": "-", "model": "-"}]:
            codes = [f["code"] for f in r["flags"] if f["branch"] in (None, fit["branch"])]
            codes += [f"DRIFT {f['code']}" for f in r["drift"]
                      if f["branch"] in (None, fit["branch"])]
            temp = "-" if r["temperature_K"] is None else f"{r['temperature_K']:g}"
            rows.append([r["id"], r["cooldown"] or "-", r["measured_iso"] or r["measured"]
                         or "-", temp, fit["branch"], fit["model"],
                         _cell(fit.get("ic0_A"), fit.get("ic0_stderr_A"), cu),
                         _cell(fit.get("period_T"), fit.get("period_stderr_T"), fu),
                         _cell(fit.get("field_offset_T"), fit.get("field_offset_stderr_T"), fu),
                         ", ".join(codes) or "-"])
    lines += _table(header, rows)
    drift = [(r, f) for r in records for f in r["drift"]]
    if drift:
        lines += ["", "drift:"]
        lines += [f"  record {r['id']} ({r['cooldown'] or r['measured'] or 'no label'}), "
                  f"{drift_line(f)}" for r, f in drift]
    changed = [(r, changes_line(r["changed"])) for r in records if r["changed"]]
    if changed:
        lines += ["", "reanalyses:"]
        lines += [f"  record {r['id']}: {text}" for r, text in changed]
    return "\n".join(lines)


def compare_text(comparison: dict) -> str:
    """The differences of ``jjpattern compare``, junction by junction."""
    lines = [f"A: {comparison['a']}", f"B: {comparison['b']}", ""]
    for j in comparison["junctions"]:
        lines.append(f"junction {j['junction']}" + (f" (A: {j['name_a']}, B: {j['name_b']})"
                                                      if j.get("name_a") else ""))
        for b in j["branches"]:
            models = (b["model_a"] if b["model_a"] == b["model_b"]
                      else f"models differ: {b['model_a']} / {b['model_b']}, not compared")
            lines.append(f"  {b['branch']} branch ({models})")
            numbers = [n for n in b["numbers"] if n["a"] is not None or n["b"] is not None]
            if not numbers:
                lines[-1] += ": numbers withheld in both"
                continue
            withheld = {side: all(n[side] is None for n in numbers) for side in ("a", "b")}
            rows = []
            for n in numbers:
                units = _UNITS.get(n["quantity"].rsplit("_", 1)[-1])
                unit = (pick_unit(abs(n["a"] or n["b"]), units) if units else ("", 1.0))
                rel = n.get("relative_change")
                rows.append([_label(n["quantity"], unit[0])]
                            + ["withheld" if withheld[side]
                               else _cell(n[side], n[f"{side}_stderr"], unit)
                               for side in ("a", "b")]
                            + [_cell(n["difference"], n["difference_stderr"], unit),
                               "-" if rel is None else f"{100 * rel:+.2f} %",
                               "-" if n["significance_sigma"] is None
                               else f"{n['significance_sigma']:.1f}"])
            lines += ["    " + s for s in _table(["number", "A", "B", "B - A", "relative",
                                                   "sigma"], rows)]
        for f in j["drift"]:
            lines.append(f"  DRIFT {f['code']}: {drift_line(f)}")
        lines.append("")
    for side in ("a", "b"):
        only = comparison[f"only_in_{side}"]
        if only:
            lines.append(f"only in {side.upper()}: {', '.join(only)}")
    if comparison["chip"]:
        lines += [f"DRIFT chip-drift: {drift_line(f)}" for f in comparison["chip"]]
    elif len(comparison["junctions"]) > 1:
        lines.append("no chip-wide drift")
    return "\n".join(lines).rstrip()
