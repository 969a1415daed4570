"""The loaded Ic(B) sweep in SI, and the clean-up every loader shares."""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..sampling import tidy
from ..settings import ReadSettings
from .units import current_factor, field_factor, split_header

#: A fit needs at least this many usable points per branch.
MIN_POINTS = 10

_FIELD_NAMES = {
    "b", "h", "bz", "hz", "b_z", "h_z", "field", "bfield", "b_field", "hfield", "h_field",
    "mu0h", "mu0_h", "applied_field", "magnetic_field", "field_applied", "b_applied",
}
_COIL_NAMES = {
    "coil", "i_coil", "icoil", "coil_current", "magnet", "i_magnet", "magnet_current",
    "i_field", "field_current",
}
_IC_NAME = re.compile(
    r"^(?:ic|i_c|isw|i_sw|ic_sw|icrit|i_crit|iswitch|i_switch)"
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

    @property
    def points_used(self) -> int:
        return int(self.field_T.size)


@dataclass(frozen=True)
class Sweep:
    """A measured Ic(B) sweep: one or two branches plus metadata from the file."""

    path: str | None
    sha256: str | None
    branches: tuple[Branch, ...]
    metadata: dict = field(default_factory=dict)
    field_column: str = ""
    rows_read: int = 0

    def branch(self, name: str) -> Branch:
        for b in self.branches:
            if b.name == name:
                return b
        raise KeyError(name)

    def summary(self) -> dict:
        """The ``input`` block of the JSON document."""
        return {
            "path": self.path,
            "sha256": self.sha256,
            "rows_read": self.rows_read,
            "field_column": self.field_column,
            "points_used": sum(b.points_used for b in self.branches),
            "points_dropped": sum(b.points_dropped for b in self.branches),
            "duplicates_merged": sum(b.duplicates_merged for b in self.branches),
            "branches": [
                {"branch": b.name, "column": b.column, "points_used": b.points_used,
                 "points_dropped": b.points_dropped, "duplicates_merged": b.duplicates_merged}
                for b in self.branches
            ],
            "metadata": dict(self.metadata),
        }


def role_key(name: str) -> str:
    """Normalise a column name for role recognition (case, spaces, hyphens between words)."""
    key = name.strip().lower().replace("\u00b5", "u").replace("\u03bc", "u")
    return re.sub(r"[\s.]+", "_", key)


def ic_branch_hint(name: str) -> str | None:
    """``'positive'``/``'negative'`` if the name marks a branch, ``''`` if it is a plain Ic name."""
    match = _IC_NAME.match(role_key(name))
    if not match:
        return None
    hint = match.group("branch")
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
    if coil_T_per_A is None:
        return raw * field_factor(unit, where)
    return raw * current_factor(unit, where) * coil_T_per_A


def _find(columns, wanted, source, what):
    for col in columns:
        if col == wanted or split_header(col)[0] == wanted:
            return col
    raise InputError(
        f"{source}: no {what} column named {wanted!r}; the columns are "
        f"{', '.join(repr(c) for c in columns)}"
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
) -> Sweep:
    """Pick the field and Ic columns, convert to SI and clean each branch.

    Parameters
    ----------
    columns : dict
        Column (or dataset) name to 1-D array of raw numbers, in file order,
        or to the message naming its first cell that is not a number.
    settings : ReadSettings, optional
        ``field_col``, ``ic_cols``, ``field_unit``, ``current_unit`` and
        ``coil_T_per_A`` override recognition from the names.
    units : dict, optional
        Units given apart from the names (HDF5 attributes); otherwise taken
        from the names (``'B (mT)'``, ``'B_mT'``).
    """
    settings = settings or ReadSettings()
    field_col, ic_cols = settings.field_col, settings.ic_cols
    field_unit, current_unit = settings.field_unit, settings.current_unit
    coil_T_per_A = settings.coil_T_per_A
    units = units or {}
    names = list(columns)
    if field_col is not None:
        fcol = _find(names, field_col, source, "field")
    else:
        found = [c for c in names if is_field_name(split_header(c)[0], coil_T_per_A is not None)]
        if not found:
            raise InputError(
                f"{source}: no field column recognised among "
                f"{', '.join(repr(c) for c in names)}; name it like 'B (mT)' or pass "
                "--field-col (for a magnet current, also --coil-constant)"
            )
        if len(found) > 1:
            raise InputError(
                f"{source}: several field columns ({', '.join(map(repr, found))}); "
                "choose one with --field-col"
            )
        fcol = found[0]
    if ic_cols:
        icols = [_find(names, c, source, "critical-current") for c in ic_cols]
    else:
        icols = [c for c in names if c != fcol and ic_branch_hint(split_header(c)[0]) is not None]
        if not icols:
            raise InputError(
                f"{source}: no critical-current column recognised among "
                f"{', '.join(repr(c) for c in names)}; name it like 'Ic (uA)' or pass --ic-col"
            )

    field_raw = numeric(columns, fcol, where)
    f_unit = field_unit or units.get(fcol) or split_header(fcol)[1]
    if not f_unit:
        raise InputError(
            f"{source}: {where} {fcol!r} has no unit; write it as 'B (mT)' or pass --field-unit"
        )
    field_T = field_values_T(field_raw, f_unit, f"{source}: {where} {fcol!r}", coil_T_per_A)

    branches = {}
    for col in icols:
        raw = numeric(columns, col, where)
        c_unit = current_unit or units.get(col) or split_header(col)[1]
        if not c_unit:
            raise InputError(
                f"{source}: {where} {col!r} has no unit; write it as 'Ic (uA)' or pass "
                "--current-unit"
            )
        values = raw * current_factor(c_unit, f"{source}: {where} {col!r}")
        branch = _clean_branch(field_T, values, col, source, where)
        if branch.name in branches:
            raise InputError(
                f"{source}: {where}s {branches[branch.name].column!r} and {col!r} are both "
                f"{branch.name}-branch critical currents; choose with --ic-col"
            )
        branches[branch.name] = branch
    ordered = tuple(branches[k] for k in ("positive", "negative") if k in branches)
    return Sweep(
        path=source, sha256=sha256, branches=ordered, metadata=dict(metadata or {}),
        field_column=fcol, rows_read=int(field_raw.size),
    )


def _clean_branch(field_T, values, col, source, where) -> Branch:
    finite = np.isfinite(field_T) & np.isfinite(values)
    if not finite.any():
        raise InputError(f"{source}: {where} {col!r} has no finite values next to a finite field")
    v = values[finite]
    if not np.any(v != 0):
        raise InputError(
            f"{source}: {where} {col!r} is zero everywhere; check the column and its unit"
        )
    hint = ic_branch_hint(split_header(col)[0])
    sign = np.sign(np.median(v)) or np.sign(v[np.nonzero(v)[0][0]])
    name = hint or ("negative" if sign < 0 else "positive")
    # Negative-branch columns come either as negative values or as magnitudes.
    clean = tidy(field_T, values * sign)
    if clean.x.size < MIN_POINTS:
        raise InputError(
            f"{source}: {where} {col!r} has only {clean.x.size} usable points; a fit needs at "
            f"least {MIN_POINTS}"
        )
    return Branch(
        name=name, column=col, field_T=clean.x, ic_A=clean.y,
        points_dropped=clean.dropped, duplicates_merged=clean.merged,
    )
