"""Drift flags: did a junction change since its previous measurement, did a whole chip?

A number has changed when the difference is both beyond ``sigma`` combined
standard errors (the data can tell) and beyond a tolerance (it matters:
a few per cent of Ic0 between cooldowns is common from temperature alone).
Pure functions over fit-number dicts and :class:`~jjpattern.catalog.store.RecordRow`
lists; nothing here touches the database.
"""

from __future__ import annotations

import math
import statistics
from dataclasses import dataclass

from ..flags import Flag, make_flag


@dataclass(frozen=True)
class Tolerances:
    """When a change counts as drift.

    Attributes
    ----------
    ic0_fraction, period_fraction : float
        Smallest relative change of Ic0 (default 5 %) and of the period (1 %).
    offset_periods : float
        Smallest move of the field offset, in periods (a tenth).
    sigma : float
        The change must also exceed this many combined standard errors.
    chip_fraction, chip_min_junctions : float, int
        ``chip-drift`` when at least this fraction of the junctions compared, and at
        least this many, changed the same number in the same direction.
    """

    ic0_fraction: float = 0.05
    period_fraction: float = 0.01
    offset_periods: float = 0.1
    sigma: float = 5.0
    chip_fraction: float = 0.5
    chip_min_junctions: int = 3


DEFAULT_TOLERANCES = Tolerances()

#: code -> (number, its standard error, unit suffix of the evidence keys).
QUANTITIES = {
    "ic0-changed": ("ic0_A", "ic0_stderr_A", "A"),
    "period-changed": ("period_T", "period_stderr_T", "T"),
    "offset-moved": ("field_offset_T", "field_offset_stderr_T", "T"),
}


def difference(a, a_err, b, b_err):
    """``(b - a, its standard error, |b - a| / error)``; ``None`` parts when unknown."""
    if a is None or b is None:
        return None, None, None
    d = b - a
    if a_err is None or b_err is None:
        return d, None, None
    err = math.hypot(a_err, b_err)
    return d, err, (abs(d) / err if err > 0 else None)


def _usable(x) -> bool:
    return x is not None and math.isfinite(x)


def fit_drift(previous: dict, current: dict, tol: Tolerances = DEFAULT_TOLERANCES,
              **context) -> tuple[list[Flag], set]:
    """Drift flags of one branch against its previous fit, and the codes that were checked.

    ``previous`` and ``current`` hold the fit numbers (``ic0_A``, ``ic0_stderr_A``,
    ``period_T``, ...; ``model``, ``branch``). Fits of different models are not
    compared (their periods do not mean the same). ``context`` goes into the
    evidence (previous record id, cooldown).
    """
    if previous.get("model") != current.get("model"):
        return [], set()
    flags, checked = [], set()
    period = previous.get("period_T") or current.get("period_T")
    for code, (key, err_key, unit) in QUANTITIES.items():
        a, b = previous.get(key), current.get(key)
        a_err, b_err = previous.get(err_key), current.get(err_key)
        if not all(_usable(v) for v in (a, b, a_err, b_err)):
            continue
        if code == "offset-moved":
            if not _usable(period) or period <= 0:
                continue
            threshold = tol.offset_periods * abs(period)
        else:
            threshold = (tol.ic0_fraction if code == "ic0-changed"
                         else tol.period_fraction) * abs(a)
        checked.add(code)
        d, err, z = difference(a, a_err, b, b_err)
        beyond_errors = (z is not None and z > tol.sigma) or (err == 0 and d != 0)
        if abs(d) <= threshold or not beyond_errors:
            continue
        evidence = {**context, f"previous_{key}": a, f"previous_{err_key}": a_err,
                    key: b, err_key: b_err, f"change_{unit}": d, f"change_stderr_{unit}": err,
                    "significance_sigma": z, "sigma_threshold": tol.sigma}
        if code == "offset-moved":
            evidence.update(change_periods=d / abs(period),
                            tolerance_periods=tol.offset_periods)
        else:
            evidence.update(relative_change=d / abs(a), tolerance_fraction=threshold / abs(a))
        flags.append(make_flag(code, current.get("branch"), **evidence))
    return flags, checked


def _reference(earlier, row, branch, model):
    """The record of the latest earlier measurement (another input) with this branch and
    model; among its records the one with the same settings, else the last."""
    candidates = [p for p in earlier if p.input_sha256 != row.input_sha256
                  and (p.fit(branch) or {}).get("model") == model]
    if not candidates:
        return None
    last = [p for p in candidates if p.input_sha256 == candidates[-1].input_sha256]
    return next((p for p in last if p.settings_sha256 == row.settings_sha256), last[-1])


def junction_drift(rows, tol: Tolerances = DEFAULT_TOLERANCES) -> dict:
    """For each record of one junction (rows in measurement order): ``(flags, checked)``."""
    out = {}
    for i, row in enumerate(rows):
        flags, checked = [], set()
        for fit in row.fits:
            ref = _reference(rows[:i], row, fit["branch"], fit["model"])
            if ref is None:
                continue
            more, codes = fit_drift(ref.fit(fit["branch"]), fit, tol,
                                    previous_record=ref.id, previous_cooldown=ref.cooldown,
                                    previous_measured=ref.measured,
                                    same_settings=ref.settings_sha256 == row.settings_sha256)
            flags += more
            checked |= codes
        out[row.id] = (flags, checked)
    return out


def chip_flags(results: dict, tol: Tolerances = DEFAULT_TOLERANCES, **context) -> list[Flag]:
    """``chip-drift`` flags from each junction's ``(flags, checked)`` between two cooldowns.

    A quantity counts when at least ``chip_min_junctions`` junctions, and at least
    ``chip_fraction`` of those where it was checked, changed it in the same direction.
    """
    out = []
    for code, (_, _, unit) in QUANTITIES.items():
        checked = [j for j, (_, codes) in results.items() if code in codes]
        moves: dict = {"up": {}, "down": {}}
        for junction, (flags, _) in results.items():
            for f in flags:
                if f.code == code:
                    direction = "up" if f.evidence[f"change_{unit}"] > 0 else "down"
                    # one vote per junction (two branches moving together are one junction)
                    moves[direction].setdefault(junction, f)
        for direction, found in moves.items():
            n = len(found)
            if n < tol.chip_min_junctions or n < tol.chip_fraction * len(checked):
                continue
            size_key = "change_periods" if code == "offset-moved" else "relative_change"
            out.append(make_flag(
                "chip-drift", None, **context, quantity=code, direction=direction,
                junctions_changed=n, junctions_compared=len(checked),
                junctions=sorted(found),
                **{f"median_{size_key}": statistics.median(
                    f.evidence[size_key] for f in found.values())}))
    return out


def chip_drift(rows, tol: Tolerances = DEFAULT_TOLERANCES) -> dict:
    """``chip-drift`` flags of one chip, per cooldown label: for each junction its last
    record in that cooldown against the junction's previous measurement."""
    from .store import in_order

    if not rows:
        return {}
    by_junction: dict = {}
    for row in rows:
        by_junction.setdefault(row.junction, []).append(row)
    per_junction = {j: junction_drift(in_order(rs), tol) for j, rs in by_junction.items()}
    out = {}
    for cooldown in sorted({r.cooldown for r in rows}):
        results = {}
        for junction, rs in by_junction.items():
            mine = [r for r in in_order(rs) if r.cooldown == cooldown]
            if mine:
                results[junction] = per_junction[junction][mine[-1].id]
        flags = chip_flags(results, tol, chip=rows[0].chip, cooldown=cooldown)
        if flags:
            out[cooldown] = flags
    return out
