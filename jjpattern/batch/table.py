"""The batch summary: one row per junction and branch, every number with its unit.

Rows are built from result documents alone (never from live fits), so an
interrupted and resumed batch gives the same table as an uninterrupted one.
Rows are sorted by chip, junction and cooldown (natural order, ``J2`` before
``J10``) and branch; the table holds no timestamp.
"""

from __future__ import annotations

import csv
import io
import math
import re

from ..result import FIT_KEYS

#: Leading columns, in order; the fitted numbers follow, then geometry numbers (sorted).
ID_COLUMNS = ("chip", "junction", "cooldown", "branch", "status", "error", "flags", "model",
              "file", "manifest_row", "result_file")
SIZE_COLUMNS = ("length_m", "width_m", "area_m2")
#: Junction-level numbers of the IcRn comparison, repeated on each branch row.
ICRN_KEYS = ("rn_ohm", "icrn_V", "ambegaokar_baratoff_V", "icrn_over_ab")
TRAILING_COLUMNS = ("input_sha256", "settings_sha256")
BRANCH_ORDER = {"positive": 0, "negative": 1}


def natural_key(text) -> list:
    """Sort key that puts ``J2`` before ``J10``."""
    return [(0, int(p), "") if p.isdigit() else (1, 0, p.lower())
            for p in re.split(r"(\d+)", "" if text is None else str(text)) if p]


def xy_columns(xy_unit: str) -> tuple[str, str]:
    """Position columns: ``x_m, y_m`` for lengths, ``x_grid, y_grid`` for die indices."""
    return ("x_m", "y_m") if xy_unit == "m" else ("x_grid", "y_grid")


def manifest_cells(row, relative_file: str, xy_unit: str, result_file: str) -> dict:
    """The manifest's columns of a junction, in SI, and where its result document goes."""
    x_name, y_name = xy_columns(xy_unit)
    return {"chip": row.chip or "", "junction": row.junction, "cooldown": row.cooldown or "",
            "file": relative_file, "manifest_row": row.row_number,
            "result_file": result_file, x_name: row.x,
            y_name: row.y, "length_m": row.length_m, "width_m": row.width_m,
            "area_m2": row.area_m2}


def result_rows(result, cells: dict) -> list[dict]:
    """One row per fitted branch of ``result`` (a :class:`~jjpattern.result.Result`)."""
    geometry = result.geometry or {}
    geo_numbers = {k: v for k, v in geometry.items() if k not in ("inputs", "branch")}
    icrn = {k: (result.icrn or {}).get(k) for k in ICRN_KEYS} if result.icrn else {}
    metadata = result.input.get("metadata") or {}
    # The file's own chip and cooldown lines fill what the manifest leaves blank.
    cells = {**cells, **{k: str(metadata[k]) for k in ("chip", "cooldown")
                         if not cells.get(k) and metadata.get(k)}}
    rows = []
    for fit in result.fits:
        mine = [f for f in result.flags if f.branch in (None, fit.branch)]
        codes = sorted({f.code for f in mine})
        # An error flag means the analysis withheld the branch's headline numbers: not "ok".
        status = "withheld" if any(f.severity == "error" for f in mine) else "ok"
        row = {**cells, "branch": fit.branch, "status": status, "error": "",
               "flags": ";".join(codes), **fit.numbers(), **icrn}
        if geometry.get("branch") == fit.branch:
            row.update(geo_numbers)
        row["input_sha256"] = result.input.get("sha256") or ""
        row["settings_sha256"] = result.settings.hash()
        rows.append(row)
    return rows


def failed_row(cells: dict, error: str, input_sha256: str, settings_sha256: str) -> dict:
    """The row of a junction that could not be analysed."""
    return {**cells, "branch": "", "status": "failed", "error": error, "flags": "",
            "input_sha256": input_sha256, "settings_sha256": settings_sha256}


def sort_rows(rows: list[dict]) -> list[dict]:
    return sorted(rows, key=lambda r: (natural_key(r.get("chip")), natural_key(r["junction"]),
                                       natural_key(r.get("cooldown")),
                                       BRANCH_ORDER.get(r.get("branch"), 2),
                                       str(r.get("branch") or "")))


def columns_of(rows: list[dict]) -> list[str]:
    """Column order: identity, position, sizes, fit numbers, the rest sorted, hashes."""
    present = set().union(*(r.keys() for r in rows)) if rows else set()
    fixed = [*ID_COLUMNS, "x_m", "y_m", "x_grid", "y_grid", *SIZE_COLUMNS,
             *[k for k in FIT_KEYS if k not in ("branch", "model")], *ICRN_KEYS]
    head = [c for c in fixed if c in present or c in ID_COLUMNS or c in SIZE_COLUMNS]
    rest = sorted(present - set(head) - set(TRAILING_COLUMNS))
    return head + rest + list(TRAILING_COLUMNS)


def _cell(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ""
    return str(value)


def summary_csv(rows: list[dict]) -> str:
    """The summary as CSV text: floats written so that they read back exactly."""
    rows = sort_rows(rows)
    cols = columns_of(rows)
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(cols)
    for row in rows:
        writer.writerow([_cell(row.get(c)) for c in cols])
    return out.getvalue()


def summary_frame(rows: list[dict]):
    """The summary as a pandas DataFrame (the parquet file and the chip statistics)."""
    import pandas as pd

    rows = sort_rows(rows)
    return pd.DataFrame(rows, columns=columns_of(rows))


def write_parquet(rows: list[dict], path: str) -> bool:
    """Write ``summary.parquet`` when pyarrow is importable; ``False`` when it is not."""
    try:
        import pyarrow  # noqa: F401
    except ImportError:
        return False
    from ..outdir import atomic_file

    with atomic_file(path, binary=True) as handle:
        summary_frame(rows).to_parquet(handle, index=False)
    return True


def junction_table(rows: list[dict], xy_unit: str):
    """One row per junction for :mod:`jjpattern.batch.chipstats`.

    The positive branch stands for the junction (the first fitted branch when
    there is none); flags are those of all branches. A junction measured in
    several cooldowns of one chip is named ``junction (cooldown)``.
    """
    import pandas as pd

    x_name, y_name = xy_columns(xy_unit)
    groups: dict[tuple, list[dict]] = {}
    for row in sort_rows(rows):
        groups.setdefault((row.get("chip") or "", row["junction"], row.get("cooldown") or ""),
                          []).append(row)
    cooldowns: dict[tuple, set] = {}
    for chip, junction, cooldown in groups:
        cooldowns.setdefault((chip, junction), set()).add(cooldown)
    out = []
    for (chip, junction, cooldown), branch_rows in groups.items():
        main = next((r for r in branch_rows if r["status"] == "ok"
                     and (r.get("period_T") is not None or r.get("ic0_A") is not None)),
                    branch_rows[0])
        label = junction if len(cooldowns[chip, junction]) == 1 else f"{junction} ({cooldown})"
        codes = sorted({c for r in branch_rows for c in (r.get("flags") or "").split(";") if c})
        out.append({
            "junction": label, "chip": chip, "cooldown": cooldown, "status": main["status"],
            "branch": main.get("branch") or "", "error": main.get("error") or "",
            **{k: main.get(k) for k in ("ic0_A", "ic0_stderr_A", "period_T", "period_stderr_T",
                                        "field_offset_T", "field_offset_stderr_T",
                                        "length_m", "width_m", "area_m2")},
            "x": main.get(x_name), "y": main.get(y_name), "flags": codes,
            "file": main.get("file"), "manifest_row": main.get("manifest_row"),
            "result_file": main.get("result_file"),
        })
    return pd.DataFrame(out)
