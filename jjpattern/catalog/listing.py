"""What a catalog holds: chips, junctions, cooldowns or records, as rows for a table."""

from __future__ import annotations

from .document import natural_key
from .drift import DEFAULT_TOLERANCES, Tolerances, chip_drift, junction_drift
from .store import in_order

LISTS = ("chips", "junctions", "cooldowns", "records")


def listing(catalog, what: str = "chips", *, tol: Tolerances = DEFAULT_TOLERANCES,
            **filters) -> list[dict]:
    """Rows describing the records that match ``filters`` (chip, junction, cooldown)."""
    if what not in LISTS:
        raise ValueError(what)
    rows = catalog.records(**filters)
    if what == "records":
        return [{"id": r.id, "chip": r.chip, "junction": r.junction, "cooldown": r.cooldown,
                 "measured": r.measured, "settings": r.settings_sha256[:12],
                 "flags": len(r.flags), "recorded_utc": r.recorded_utc,
                 "recorded_by": r.recorded_by} for r in rows]
    groups: dict = {}
    key = {"chips": lambda r: (r.chip,), "junctions": lambda r: (r.chip, r.junction),
           "cooldowns": lambda r: (r.chip, r.cooldown)}[what]
    for r in rows:
        groups.setdefault(key(r), []).append(r)
    out = []
    for k in sorted(groups, key=lambda k: [natural_key(part) for part in k]):
        rs = in_order(groups[k])
        entry = {"chip": k[0]}
        if what == "junctions":
            drift = junction_drift(rs, tol)
            entry.update(junction=k[1], latest_drift=sorted(
                {f.code for f in drift[rs[-1].id][0]}))
        if what == "cooldowns":
            entry.update(cooldown=k[1], measured=min((r.measured_iso or r.measured
                                                      for r in rs), default=""))
            flags = chip_drift(catalog.records(chip=k[0]), tol).get(k[1], []) if k[0] else []
            entry["chip_drift"] = sorted({f.evidence["quantity"] for f in flags})
        entry.update(
            junctions=len({r.junction for r in rs}),
            cooldowns=len({r.cooldown for r in rs}),
            inputs=len({r.input_sha256 for r in rs}), records=len(rs),
            last_recorded=max(r.recorded_utc for r in rs))
        out.append(entry)
    return out


def listing_text(rows: list[dict]) -> str:
    if not rows:
        return "no records"
    header = list(rows[0])
    cells = [[_show(row[h]) for h in header] for row in rows]
    widths = [max(len(str(c)) for c in col) for col in zip(header, *cells, strict=True)]
    return "\n".join("  ".join(str(c).ljust(w) for c, w in zip(r, widths, strict=True)).rstrip()
                     for r in [header] + cells)


def _show(value) -> str:
    if isinstance(value, list):
        return ", ".join(value) or "-"
    if value == "" or value is None:
        return "-"
    return str(value)
