"""The loaded Ic(B) sweep in SI, and the clean-up every loader shares.

:func:`build_sweep` keeps the file order until the end: rows outside the field
window are left out, a signed current column is split by sign into a positive
and a negative branch, each branch is split where the field turns round
(:mod:`jjpattern.io.layout`), and only then is each segment sorted and its
equal fields averaged.
"""

from __future__ import annotations

import dataclasses
import re
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..fmt import plural
from ..sampling import tidy
from ..settings import ReadSettings
from .digest import DigestField
from .layout import MIN_POINTS, field_window, run_labels, signed_split, sweep_runs
from .limits import check_current, check_field, check_rows, clip, names_list, scaled
from .units import (
    FIELD_UNITS,
    current_factor,
    field_factor,
    given_unit,
    normalise_unit,
    split_header,
)

_FIELD_NAMES = {
    "b", "h", "bz", "hz", "b_z", "h_z", "field", "bfield", "b_field", "hfield", "h_field",
    "mu0h", "mu0_h", "applied_field", "magnetic_field", "field_applied", "b_applied",
    "b_ext", "bext", "h_ext", "hext", "external_field", "field_b", "field_h", "field_bz",
    "magnetic_field_b", "applied_magnetic_field", "perpendicular_field", "b_perp",
}
_COIL_NAMES = {
    "coil", "i_coil", "icoil", "coil_current", "magnet", "i_magnet", "magnet_current",
    "i_field", "field_current",
}
_IC_NAME = re.compile(
    r"^(?:(?P<pre>pos|neg|positive|negative)_)?"
    r"(?:ic|i_c|isw|i_sw|ic_sw|icrit|i_crit|iswitch|i_switch|critical_current|"
    r"switching_current|i_critical|i_switching)"
    r"(?:[_ ]?(?P<branch>\+|-|pos|neg|plus|minus|p|n|positive|negative))?$"
)
_NEGATIVE = {"-", "neg", "minus", "n", "negative"}


@dataclass(frozen=True)
class Branch:
    """One critical-current branch, cleaned, sorted by field, magnitudes in ampere."""

    name: str
    column: str
    field_T: np.ndarray
    ic_A: np.ndarray
    points_dropped: int
    duplicates_merged: int
    #: Which run of the field sweep: ``""`` for a sweep in one direction, else ``"up"``,
    #: ``"down"`` (numbered, ``"up 2"``, when a direction comes back).
    segment: str = ""

    @property
    def points_used(self) -> int:
        return int(self.field_T.size)

    def __repr__(self) -> str:
        return f"Branch({self.label!r}, column={self.column!r}, points={self.points_used})"

    @property
    def label(self) -> str:
        """The name of this fit in the result: ``"positive"``, or ``"positive up"``."""
        return f"{self.name} {self.segment}" if self.segment else self.name


@dataclass(frozen=True)
class Sweep:
    """A measured Ic(B) sweep: one or two branches plus metadata from the file."""

    path: str | None
    sha256: str | None = DigestField()  # may hold a Digest, hashed on first use
    branches: tuple[Branch, ...]
    metadata: dict = field(default_factory=dict)
    field_column: str = ""
    rows_read: int = 0
    #: How the file was laid out and what reading did about it (decimal comma, units row,
    #: signed column, segments, field window); empty for a plain table.
    layout: dict = field(default_factory=dict)

    def __repr__(self) -> str:
        points = sum(b.points_used for b in self.branches)
        fields = [b.field_T for b in self.branches if b.field_T.size]
        if not fields:
            return f"Sweep(branches={len(self.branches)}, points={points})"
        lo = min(float(f.min()) for f in fields)
        hi = max(float(f.max()) for f in fields)
        from ..fmt import FIELD_UNITS, pick_unit

        unit, factor = pick_unit(max(abs(lo), abs(hi)), FIELD_UNITS)
        column = f" {self.field_column!r}" if self.field_column else ""
        return (f"Sweep(branches={len(self.branches)}, points={points}, field{column} "
                f"{lo / factor:.3g}..{hi / factor:.3g} {unit})")

    def branch(self, name: str) -> Branch:
        for b in self.branches:
            if b.name == name:
                return b
        raise KeyError(name)

    def summary(self) -> dict:
        """The ``input`` block of the JSON document."""
        out = {
            "path": self.path,
            "sha256": self.sha256,
            "rows_read": self.rows_read,
            "field_column": self.field_column,
            "points_used": sum(b.points_used for b in self.branches),
            "points_dropped": sum(b.points_dropped for b in self.branches),
            "duplicates_merged": sum(b.duplicates_merged for b in self.branches),
            "branches": [
                {"branch": b.label, "segment": b.segment, "column": b.column,
                 "points_used": b.points_used, "points_dropped": b.points_dropped,
                 "duplicates_merged": b.duplicates_merged}
                for b in self.branches
            ],
            "metadata": dict(self.metadata),
        }
        if self.layout:
            out["layout"] = dict(self.layout)
        return out


def role_key(name: str) -> str:
    """Normalise a column name for role recognition (case, spaces, hyphens between words)."""
    key = name.strip().lower().replace("\u00b5", "u").replace("\u03bc", "u")
    key = re.sub(r"(?<=[a-z0-9])-(?=[a-z])", "_", key)
    return re.sub(r"[\s.]+", "_", key).strip("_")


def ic_branch_hint(name: str) -> str | None:
    """``'positive'``/``'negative'`` if the name marks a branch, ``''`` if it is a plain Ic name."""
    match = _IC_NAME.match(role_key(name))
    if not match:
        return None
    hint = match.group("branch") or match.group("pre")
    if hint is None:
        return ""
    return "negative" if hint in _NEGATIVE else "positive"


def is_field_name(name: str, coil: bool = False) -> bool:
    """A field column name; with ``coil`` also a magnet-current name (``I_coil``)."""
    key = role_key(name)
    return key in _FIELD_NAMES or (coil and key in _COIL_NAMES)


def numeric(columns: dict, name: str, where: str) -> np.ndarray:
    """The column as floats, or the loader's message about its first non-number."""
    values = columns[name]
    if isinstance(values, str):
        raise InputError(values)
    return np.asarray(values, dtype=float)


def field_values_T(raw, unit, where, coil_T_per_A=None) -> np.ndarray:
    """Field in tesla from a field column, or from a magnet current times the coil constant."""
    path, _, label = where.partition(": ")
    if coil_T_per_A is None:
        return scaled(raw, field_factor(unit, where), path, label)
    if normalise_unit(unit) in FIELD_UNITS:
        raise InputError(f"{where} is already a field (in {unit.strip()}); --coil-constant is "
                         "for a magnet-current axis (e.g. 'I_magnet (A)'), so leave it out")
    return scaled(raw, current_factor(unit, where) * coil_T_per_A, path, label)


def _find(columns, wanted, source, what):
    for col in columns:
        if col == wanted or split_header(col)[0] == wanted:
            return col
    raise InputError(
        f"{source}: no {what} column named {clip(wanted)}; the columns are "
        f"{names_list(columns)}"
    )


def build_sweep(
    columns: dict,
    *,
    source: str,
    sha256: str | None = None,
    settings: ReadSettings | None = None,
    units: dict | None = None,
    metadata: dict | None = None,
    where: str = "column",
    layout: dict | None = None,
) -> Sweep:
    """Pick the field and Ic columns, convert to SI, split by sign and direction, clean.

    Parameters
    ----------
    columns : dict
        Column (or dataset) name to 1-D array of raw numbers, in file order,
        or to the message naming its first cell that is not a number.
    settings : ReadSettings, optional
        ``field_col``, ``ic_cols``, ``field_unit``, ``current_unit`` and
        ``coil_T_per_A`` override recognition from the names;
        ``field_range_T`` and ``exclude_T`` leave rows out.
    units : dict, optional
        Units given apart from the names (HDF5 attributes); otherwise taken
        from the names (``'B (mT)'``, ``'B_mT'``).
    layout : dict, optional
        What the reader found about the file's layout (decimal comma, units
        row), carried into :attr:`Sweep.layout`.
    """
    settings = settings or ReadSettings()
    units = units or {}
    names = list(columns)
    fcol = _field_column(names, settings, source)
    if settings.ic_cols:
        icols = [_find(names, c, source, "critical-current") for c in settings.ic_cols]
    else:
        icols = [c for c in names if c != fcol and ic_branch_hint(split_header(c)[0]) is not None]
        if not icols:
            raise InputError(
                f"{source}: no critical-current column recognised among "
                f"{names_list(names)}; name it like 'Ic (uA)' or pass --ic-col"
            )

    shapes = getattr(columns, "shapes", None)  # sizes known before reading (HDF5, npz)
    first = None if shapes else columns[fcol]
    check_rows(source, shapes[fcol][0] if shapes else 0 if isinstance(first, str)
               else len(first), settings)
    field_raw = numeric(columns, fcol, where)
    f_unit = given_unit(settings.field_unit, units.get(fcol) or split_header(fcol)[1],
                        f"{source}: {where} {clip(fcol)}", "--field-unit",
                        coil=settings.coil_T_per_A is not None)
    if not f_unit:
        raise InputError(
            f"{source}: {where} {clip(fcol)} has no unit; write it as 'B (mT)' or pass --field-unit"
        )
    field_T = field_values_T(field_raw, f_unit, f"{source}: {where} {clip(fcol)}",
                             settings.coil_T_per_A)
    check_field(source, f"{where} {clip(fcol)}", field_T)
    keep, outside, excluded = field_window(field_T, settings.field_range_T, settings.exclude_T)
    notes = dict(layout or {})
    if settings.field_range_T or settings.exclude_T:
        notes["field_window"] = {
            "field_range_T": list(settings.field_range_T) or None,
            "points_outside_range": outside,
            "exclude_T": [list(pair) for pair in settings.exclude_T],
            "points_excluded": excluded,
        }

    found: dict[str, list[Branch]] = {}
    columns_of: dict[str, str] = {}
    aside_total = 0
    for col in icols:
        raw = numeric(columns, col, where)
        c_unit = given_unit(settings.current_unit, units.get(col) or split_header(col)[1],
                            f"{source}: {where} {clip(col)}", "--current-unit")
        if not c_unit:
            raise InputError(
                f"{source}: {where} {clip(col)} has no unit; write it as 'Ic (uA)' or pass "
                "--current-unit"
            )
        values = scaled(raw, current_factor(c_unit, f"{source}: {where} {clip(col)}"), source,
                        f"{where} {clip(col)}")
        check_current(source, f"{where} {clip(col)}", values)
        for name, magnitudes, dropped, what in _polarities(field_T, values, keep, col,
                                                           source, where, notes):
            if name in found:
                raise InputError(
                    f"{source}: {where}s {clip(columns_of[name])} and {clip(col)} are both "
                    f"{name}-branch critical currents; choose with --ic-col")
            segments, aside = _segments(field_T, magnitudes, keep, name, col, source, what,
                                        dropped)
            found[name], columns_of[name] = segments, col
            aside_total += aside
    if aside_total:
        notes["points_in_short_reversals"] = aside_total
    _label_segments(found, notes)
    ordered = tuple(b for k in ("positive", "negative") for b in found.get(k, ()))
    merged = sum(b.duplicates_merged for b in ordered)
    if merged:
        notes["duplicates_averaged"] = (
            f"{plural(merged, 'point')} at a field already measured in the same branch and sweep "
            f"direction {'was' if merged == 1 else 'were'} averaged with it: the file gives no "
            "other way to tell them apart")
    return Sweep(
        path=source, sha256=sha256, branches=ordered, metadata=dict(metadata or {}),
        field_column=fcol, rows_read=int(field_raw.size), layout=notes,
    )


def _field_column(names, settings, source) -> str:
    if settings.field_col is not None:
        return _find(names, settings.field_col, source, "field")
    found = [c for c in names
             if is_field_name(split_header(c)[0], settings.coil_T_per_A is not None)]
    if not found:
        raise InputError(
            f"{source}: no field column recognised among "
            f"{names_list(names)}; name it like 'B (mT)' or pass "
            "--field-col (for a magnet current, also --coil-constant)"
        )
    if len(found) > 1:
        raise InputError(
            f"{source}: several field columns ({names_list(found)}); "
            "choose one with --field-col"
        )
    return found[0]


def _polarities(field_T, values, keep, col, source, where, notes):
    """``(branch, magnitudes in file order, non-finite rows, what)`` of one current column.

    A column named for a branch is that branch; an unnamed one holding both signs
    is split by sign (zero rows set aside, and a side too short to fit set aside with
    them); otherwise its sign names the branch.
    """
    finite = np.isfinite(field_T) & np.isfinite(values)
    if not finite.any():
        raise InputError(f"{source}: {where} {clip(col)} has no finite values next to a "
                         "finite field")
    v = values[finite]
    if not np.any(v != 0):
        raise InputError(
            f"{source}: {where} {clip(col)} is zero everywhere; check the column and its unit"
        )
    dropped = int((~finite).sum())
    hint = ic_branch_hint(split_header(col)[0])
    split = None if hint else signed_split(np.where(finite, values, np.nan))
    if split is None:
        sign = np.sign(np.median(v)) or np.sign(v[np.nonzero(v)[0][0]])
        # Negative-branch columns come either as negative values or as magnitudes.
        name = hint or ("negative" if sign < 0 else "positive")
        return [(name, np.where(finite, values * sign, np.nan), dropped, f"{where} {clip(col)}")]
    pos, neg = split
    zero = int((finite & (values == 0)).sum())
    note = {"column": col, "positive_rows": int(pos.sum()), "negative_rows": int(neg.sum()),
            "zero_rows_set_aside": zero, "nonfinite_rows_set_aside": dropped}
    out = []
    for name, rows, magnitudes in (("positive", pos, values), ("negative", neg, -values)):
        if (rows & keep).sum() < MIN_POINTS:
            note[f"{name}_rows_set_aside"] = int(rows.sum())  # too few for a fit of their own
            continue
        out.append((name, np.where(rows, magnitudes, np.nan), 0,
                    f"the {name} values of {where} {clip(col)}"))
    if not out:
        raise InputError(f"{source}: {where} {clip(col)} holds too few rows of either sign inside "
                         f"the field window for a fit (at least {MIN_POINTS} are needed)")
    out[0] = out[0][:2] + (dropped,) + out[0][3:]
    notes.setdefault("signed_columns", []).append(note)
    return out


def _segments(field_T, magnitudes, keep, name, col, source, what, dropped):
    """The branch's runs of one field direction, each cleaned, with their directions;
    and the number of rows set aside in short reversals."""
    rows = np.flatnonzero(keep & np.isfinite(field_T) & np.isfinite(magnitudes))
    if rows.size < MIN_POINTS:
        window = " inside the field window" if not keep.all() else ""
        raise InputError(f"{source}: {what} has only {rows.size} usable points{window}; a fit "
                         f"needs at least {MIN_POINTS}")
    runs, aside = sweep_runs(field_T[rows])
    out = []
    for k, run in enumerate(runs):
        inside = rows[run.start:run.stop][~aside[run.start:run.stop]]
        clean = tidy(field_T[inside], magnitudes[inside])
        if clean.x.size < MIN_POINTS:  # only a single run can be this short
            window = " inside the field window" if not keep.all() else ""
            raise InputError(
                f"{source}: {what} has only {clean.x.size} usable points{window}; a fit needs "
                f"at least {MIN_POINTS}"
            )
        out.append((Branch(name=name, column=col, field_T=clean.x, ic_A=clean.y,
                           points_dropped=dropped if k == 0 else 0,
                           duplicates_merged=clean.merged), run.direction))
    return out, int(aside.sum())


def _label_segments(found: dict, notes: dict) -> None:
    """Name the segments ``up``/``down`` when some branch turns round, else leave them ``""``."""
    if all(len(runs) == 1 for runs in found.values()):
        for name, runs in found.items():
            found[name] = [runs[0][0]]
        return
    listing = []
    for name, runs in found.items():
        labels = run_labels([direction for _, direction in runs])
        found[name] = [dataclasses.replace(b, segment=label)
                       for (b, _), label in zip(runs, labels, strict=True)]
        listing += [{"branch": b.label, "segment": b.segment, "points": b.points_used,
                     "field_min_T": float(b.field_T[0]), "field_max_T": float(b.field_T[-1])}
                    for b in found[name]]
    notes["segments"] = listing
