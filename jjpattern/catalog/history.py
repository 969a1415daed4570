"""A junction's history from the catalog: its records in measurement order, with drift."""

from __future__ import annotations

import csv
import difflib
import io
from dataclasses import asdict

from ..errors import InputError
from ..fmt import plural
from .drift import DEFAULT_TOLERANCES, Tolerances, chip_drift, junction_drift
from .store import in_order

#: Columns of one (record, branch) row in CSV exports, SI units in the names.
ROW_COLUMNS = (
    "record_id", "junction", "chip", "cooldown", "measured", "temperature_K", "branch",
    "model", "ic0_A", "ic0_stderr_A", "period_T", "period_stderr_T", "field_offset_T",
    "field_offset_stderr_T", "effective_area_m2", "effective_area_stderr_m2",
    "node_floor_A", "node_floor_stderr_A", "reduced_chisq", "loss", "flags", "drift",
    "input_path", "input_sha256", "settings_sha256", "tool_version", "recorded_utc",
    "recorded_by",
)


def choose_chip(catalog, junction: str, chip: str | None) -> str:
    """The chip of ``junction``; an error naming the choices when it is on several."""
    chips = catalog.chips_of(junction)
    if not chips:
        close = difflib.get_close_matches(junction, catalog.names("junction"), n=4)
        hint = f"; similar names: {', '.join(close)}" if close else ""
        held = plural(catalog.info()["records"], "record")
        raise InputError(f"{catalog.path} holds {held}, none of junction {junction!r}{hint}; "
                         "`jjpattern catalog list junctions` shows the recorded names, and "
                         "--catalog PATH reads another catalog")
    if chip is None:
        if len(chips) > 1:
            shown = ", ".join(repr(c) if c else "(no chip)" for c in chips)
            raise InputError(f"junction {junction!r} is on several chips ({shown}); "
                             "choose one with --chip")
        return chips[0]
    if chip not in chips:
        raise InputError(f"junction {junction!r} has no records on chip {chip!r}; it is on "
                         f"{', '.join(repr(c) for c in chips)}")
    return chip


def junction_history(catalog, junction: str, chip: str | None = None,
                     tol: Tolerances = DEFAULT_TOLERANCES) -> dict:
    """``{"junction", "chip", "tolerances", "records": [...]}``, oldest measurement first.

    Each record carries its fit numbers, its analysis flags, what changed in
    its settings, and ``drift``: flags against the junction's previous
    measurement, plus ``chip-drift`` when the chip changed as a whole in that cooldown.
    """
    chip = choose_chip(catalog, junction, chip)
    rows = in_order(catalog.records(junction=junction, chip=chip))
    drift = junction_drift(rows, tol)
    chipwide = chip_drift(catalog.records(chip=chip), tol) if chip else {}
    records = []
    for row in rows:
        entry = row.to_dict()
        flags = drift[row.id][0] + chipwide.get(row.cooldown, [])
        entry["drift"] = [f.to_dict() for f in flags]
        records.append(entry)
    return {"junction": junction, "chip": chip, "tolerances": asdict(tol),
            "records": records}


def flat_rows(records) -> list[dict]:
    """One row per (record, branch) with ``ROW_COLUMNS`` (records as in a history)."""
    out = []
    for rec in records:
        fits = rec["fits"] or [{"branch": "", "model": ""}]
        for fit in fits:
            row = {k: rec.get(k) for k in ROW_COLUMNS}
            row["record_id"] = rec["id"]
            row.update({k: fit.get(k) for k in ROW_COLUMNS if k in fit})
            row["flags"] = " ".join(f["code"] for f in rec["flags"]
                                    if f["branch"] in (None, fit["branch"]))
            row["drift"] = " ".join(f["code"] for f in rec.get("drift", [])
                                    if f["branch"] in (None, fit["branch"]))
            out.append(row)
    return out


def rows_csv(rows) -> str:
    """CSV text of flat rows; floats written so that they read back exactly."""
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=ROW_COLUMNS, lineterminator="\n")
    writer.writeheader()
    for row in rows:
        writer.writerow({k: ("" if v is None else repr(v) if isinstance(v, float) else v)
                         for k, v in row.items()})
    return buffer.getvalue()
