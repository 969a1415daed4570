"""Figures of a junction's history and of a comparison between two cooldowns."""

from __future__ import annotations

import numpy as np

from ..report.display import CURRENT_UNITS, FIELD_UNITS, pick_unit
from ..report.plot import BRANCH_COLOURS

DRIFT_COLOUR = "#CC79A7"
_PANELS = (("ic0_A", "ic0_stderr_A", "Ic0", "ic0-changed"),
           ("period_T", "period_stderr_T", "period", "period-changed"),
           ("field_offset_T", "field_offset_stderr_T", "field offset", "offset-moved"))


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib import pyplot as plt

    return plt


def history_figure(history: dict):
    """Ic0, period and offset of every record against measurement, with error bars; a
    ring marks a drift flag."""
    plt = _pyplot()
    records = history["records"]
    fits = [f for r in records for f in r["fits"]]
    ic0 = next((f["ic0_A"] for f in fits if f.get("ic0_A")), 1e-6)
    period = next((f["period_T"] for f in fits if f.get("period_T")), 1e-3)
    units = {"ic0_A": pick_unit(abs(ic0), CURRENT_UNITS),
             "period_T": pick_unit(abs(period), FIELD_UNITS)}
    units["field_offset_T"] = units["period_T"]
    fig, axes = plt.subplots(3, 1, sharex=True, figsize=(7.0, 6.4), layout="constrained")
    x = np.arange(len(records))
    # positive first, as in the pattern figure
    branches = sorted({f["branch"] for f in fits}, key=lambda b: (b != "positive", b))
    shift = {b: (i - (len(branches) - 1) / 2) * 0.08 for i, b in enumerate(branches)}
    for ax, (key, err_key, name, code) in zip(axes, _PANELS, strict=True):
        unit, factor = units[key]
        for branch in branches:
            xs, ys, es, ring = [], [], [], []
            for i, r in enumerate(records):
                fit = next((f for f in r["fits"] if f["branch"] == branch), None)
                if fit is None or fit.get(key) is None:
                    continue
                xs.append(i + shift[branch])
                ys.append(fit[key] / factor)
                es.append((fit.get(err_key) or 0.0) / factor)
                ring.append(any(d["code"] == code and d["branch"] == branch
                                for d in r["drift"]))
            colour = BRANCH_COLOURS.get(branch, "#009E73")
            ax.errorbar(xs, ys, yerr=es, fmt="o-", ms=4, lw=0.8, capsize=3, color=colour,
                        label=f"{branch} branch")
            flagged = np.asarray(ring, dtype=bool)
            if flagged.any():
                ax.plot(np.asarray(xs)[flagged], np.asarray(ys)[flagged], "o", ms=11,
                        mfc="none", mec=DRIFT_COLOUR, mew=1.6)
        ax.set_ylabel(f"{name} ({unit})")
        ax.grid(alpha=0.25, lw=0.5)
    axes[0].plot([], [], "o", ms=9, mfc="none", mec=DRIFT_COLOUR, mew=1.6, label="drift flag")
    axes[0].legend(frameon=False, fontsize=8)
    axes[-1].set_xticks(x)
    axes[-1].set_xticklabels([_tick(r) for r in records], rotation=30, ha="right", fontsize=8)
    axes[-1].set_xlabel("measurement (record, cooldown or date), oldest first")
    chip = f" (chip {history['chip']})" if history["chip"] else ""
    fig.suptitle(f"history of junction {history['junction']}{chip}", fontsize=10,
                 parse_math=False)
    return fig


def _tick(record: dict) -> str:
    label = record["cooldown"] or record["measured_iso"] or record["measured"] or ""
    return f"#{record['id']} {label}".strip()


def compare_figure(comparison: dict):
    """B relative to A for every junction: Ic0 and period in per cent, offset in periods,
    with error bars and the tolerance band; drift flags in colour."""
    plt = _pyplot()
    tol = comparison["tolerances"]
    names = [j["junction"] for j in comparison["junctions"]]
    fig, axes = plt.subplots(3, 1, sharex=True, figsize=(max(5.0, 1.0 + 0.45 * len(names)),
                                                        6.4), layout="constrained")
    bands = (100 * tol["ic0_fraction"], 100 * tol["period_fraction"], tol["offset_periods"])
    labels = ("Ic0 change (%)", "period change (%)", "offset change (periods)")
    for ax, (key, _, _, code), band, label in zip(axes, _PANELS, bands, labels, strict=True):
        ax.axhspan(-band, band, color="#DDDDDD", lw=0, label="tolerance")
        ax.axhline(0.0, color="#888888", lw=0.8)
        for j, entry in enumerate(comparison["junctions"]):
            for b in entry["branches"]:
                value, err = _relative(b, key)
                if value is None:
                    continue
                flagged = any(f["code"] == code and f["branch"] == b["branch"]
                              for f in entry["drift"])
                colour = DRIFT_COLOUR if flagged else BRANCH_COLOURS.get(b["branch"],
                                                                          "#009E73")
                dx = -0.1 if b["branch"] == "positive" else 0.1
                ax.errorbar([j + dx], [value], yerr=[err or 0.0], fmt="o", ms=4, capsize=3,
                            color=colour)
        ax.set_ylabel(label)
        ax.grid(alpha=0.25, lw=0.5)
    for branch, colour in BRANCH_COLOURS.items():
        axes[0].plot([], [], "o", color=colour, label=f"{branch} branch")
    axes[0].plot([], [], "o", color=DRIFT_COLOUR, label="drift flag")
    axes[0].legend(frameon=False, fontsize=7, ncol=4)
    axes[-1].set_xticks(np.arange(len(names)))
    axes[-1].set_xticklabels(names, rotation=45, ha="right", fontsize=8)
    axes[-1].set_xlim(-0.6, len(names) - 0.4)
    title = f"B: {comparison['b']}\nagainst A: {comparison['a']}"
    for flag in comparison["chip"]:
        e = flag["evidence"]
        title += (f"\nchip-wide: {e['quantity']} {e['direction']} in {e['junctions_changed']} "
                  f"of {e['junctions_compared']} junctions")
    fig.suptitle(title, fontsize=9, parse_math=False)
    return fig


def _relative(branch: dict, key: str):
    """The change of ``key`` in the panel's unit (per cent, or periods for the offset)."""
    n = next(n for n in branch["numbers"] if n["quantity"] == key)
    if n["difference"] is None:
        return None, None
    if key == "field_offset_T":
        period = next(m for m in branch["numbers"] if m["quantity"] == "period_T")
        p = period["a"] or period["b"]
        if not p:
            return None, None
        err = n["difference_stderr"]
        return n["difference"] / p, (None if err is None else err / p)
    if not n["a"]:
        return None, None
    err = n["difference_stderr"]
    return 100 * n["difference"] / abs(n["a"]), (None if err is None else 100 * err / abs(n["a"]))
