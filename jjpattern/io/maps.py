"""Raw V(I, B) maps in SI, built from arrays or a long table (the readers do the files).

Every map reader ends in :class:`IVMap`: one row per field step, the bias in
acquisition order along each row (NaN-padded where rows differ in length),
and the measured voltage (V) or differential resistance dV/dI (ohm). When
every row has the same bias values the bias is one row broadcast over the
map (stride 0 along the field), which extraction uses as its fast path.

HDF5 default layout: 1-D ``field`` (n_field) and ``bias`` (n_bias, or 2-D
(n_field, n_bias) when the bias differs per row), and 2-D ``voltage`` or
``dvdi`` of shape (n_field, n_bias), each with a ``units`` attribute.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..settings import ReadSettings
from .digest import DigestField
from .limits import (
    MAX_SIGNAL,
    check_current,
    check_field,
    check_signal,
    clip,
    names_list,
    real,
    scaled,
)
from .sweep import field_values_T, is_field_name, numeric, role_key
from .units import (
    current_factor,
    given_unit,
    resistance_factor,
    split_header,
    voltage_factor,
)

_BIAS_NAMES = {"i", "bias", "i_bias", "ibias", "current", "i_dc", "idc", "i_set", "iset"}
_VOLTAGE_NAMES = {"v", "voltage", "vdc", "v_dc", "u", "v_meas"}
_DVDI_NAMES = {"dvdi", "dv/di", "dv_di", "dvdi_lockin", "r_diff", "rdiff", "dv/di_lockin"}


@dataclass(frozen=True)
class IVMap:
    """A raw map: ``signal[i, k]`` measured at ``field_T[i]`` and ``bias_A[i, k]``.

    ``bias_A`` is usually one row broadcast over the map (read-only, stride 0
    along the field); test with ``bias_A.strides[0] == 0``.
    """

    path: str
    sha256: str | None = DigestField()  # may hold a Digest, hashed on first use
    field_T: np.ndarray
    bias_A: np.ndarray
    signal: np.ndarray
    kind: str  # "voltage" (V) or "dvdi" (ohm)
    metadata: dict = field(default_factory=dict)
    layout: str = ""

    @property
    def shape(self):
        return self.signal.shape


def map_role(name: str) -> str | None:
    """``'bias'``, ``'voltage'`` or ``'dvdi'`` for a recognised map column name."""
    key = role_key(name)
    if key in _BIAS_NAMES:
        return "bias"
    if key in _VOLTAGE_NAMES:
        return "voltage"
    if key in _DVDI_NAMES:
        return "dvdi"
    return None


def looks_like_map(names) -> bool:
    """True when the names include a bias and a voltage or dV/dI column."""
    roles = {map_role(split_header(n)[0]) for n in names}
    return "bias" in roles and bool(roles & {"voltage", "dvdi"})


def pick_column(names, role, explicit, source, what) -> str:
    """The column (or dataset) of a role: the one named, or the one recognised."""
    if explicit:
        for n in names:
            if n == explicit or split_header(n)[0] == explicit:
                return n
        raise InputError(f"{source}: no {what} named {clip(explicit)}; found "
                         f"{names_list(names)}")
    if role == "field":
        found = [n for n in names if is_field_name(split_header(n)[0], coil=True)]
    elif role == "signal":
        found = [n for n in names if map_role(split_header(n)[0]) in ("voltage", "dvdi")]
    else:
        found = [n for n in names if map_role(split_header(n)[0]) == role]
    if len(found) != 1:
        option = {"field": "--field-col", "bias": "--bias-col", "signal": "--signal-col"}[role]
        problem = "none" if not found else f"several ({names_list(found)})"
        raise InputError(f"{source}: {what}: {problem} recognised among "
                         f"{names_list(names)}; choose one with {option}")
    return found[0]


def _signal_kind(name: str, unit: str | None) -> str:
    role = map_role(split_header(name)[0])
    if role in ("voltage", "dvdi"):
        return role
    return "dvdi" if unit and "ohm" in unit.lower() or unit in ("\u03a9",) else "voltage"


def _signal_factor(kind, unit, where) -> float:
    if kind == "dvdi":
        return resistance_factor(unit, where)
    return voltage_factor(unit, where)


def choose_kind(kind: str, settings: ReadSettings, looks_like_a_map: bool) -> str:
    """``'sweep'`` or ``'map'``: as asked, else from explicit columns, else from the data."""
    if kind not in ("auto", "sweep", "map"):
        raise ValueError(f"kind must be 'auto', 'sweep' or 'map', not {kind!r}")
    if kind != "auto":
        return kind
    if settings.ic_cols:
        return "sweep"
    if settings.bias_col or settings.signal_col:
        return "map"
    return "map" if looks_like_a_map else "sweep"


def _units(unit_of, name, given, source, what, option, coil=False):
    unit = given_unit(given, unit_of(name), f"{source}: {what} {clip(name)}", option, coil)
    if not unit:
        raise InputError(f"{source}: {what} {clip(name)} has no unit; add one or pass {option}")
    return unit


def share_bias(bias_A: np.ndarray) -> np.ndarray:
    """A 2-D bias whose rows are all equal (NaN padding included) as one broadcast row."""
    if bias_A.ndim != 2 or bias_A.shape[0] < 2 or bias_A.strides[0] == 0:
        return bias_A
    first = bias_A[0]
    same = (bias_A == first) | (np.isnan(bias_A) & np.isnan(first))
    return np.broadcast_to(first, bias_A.shape) if same.all() else bias_A


def from_long_table(columns: dict, *, source, sha256, metadata,
                    settings: ReadSettings) -> IVMap:
    """Pivot a long table (one row per field and bias point, any order) into a map."""
    names = list(columns)
    fcol = pick_column(names, "field", settings.field_col, source, "field column")
    bcol = pick_column(names, "bias", settings.bias_col, source, "bias column")
    scol = pick_column(names, "signal", settings.signal_col, source, "voltage or dV/dI column")
    unit_of = lambda n: split_header(n)[1]  # noqa: E731
    f_unit = _units(unit_of, fcol, settings.field_unit, source, "column", "--field-unit",
                    settings.coil_T_per_A is not None)
    b_unit = _units(unit_of, bcol, settings.current_unit, source, "column", "--current-unit")
    s_unit = _units(unit_of, scol, settings.signal_unit, source, "column", "--signal-unit")
    kind = _signal_kind(scol, s_unit)
    field_T = field_values_T(numeric(columns, fcol, "column"), f_unit,
                             f"{source}: column {clip(fcol)}", settings.coil_T_per_A)
    bias = scaled(numeric(columns, bcol, "column"), current_factor(
        b_unit, f"{source}: column {clip(bcol)}"), source, f"column {clip(bcol)}")
    signal = scaled(numeric(columns, scol, "column"), _signal_factor(
        kind, s_unit, f"{source}: column {clip(scol)}"), source, f"column {clip(scol)}")
    check_field(source, f"column {clip(fcol)}", field_T, span=False)
    check_current(source, f"column {clip(bcol)}", bias)
    check_signal(source, f"column {clip(scol)}", signal, kind)
    keep = np.isfinite(field_T)
    field_T, bias, signal = field_T[keep], bias[keep], signal[keep]
    if field_T.size == 0:
        raise InputError(f"{source}: the field column has no finite values")
    steps, inverse = np.unique(field_T, return_inverse=True)
    # Stable sort keeps the file order inside each field step: that is the sweep order.
    order = np.argsort(inverse, kind="stable")
    counts = np.bincount(inverse)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    col = np.arange(order.size) - np.repeat(starts, counts)
    b2 = np.full((steps.size, counts.max()), np.nan)
    s2 = np.full_like(b2, np.nan)
    b2[inverse[order], col] = bias[order]
    s2[inverse[order], col] = signal[order]
    return IVMap(source, sha256, steps, share_bias(b2), s2, kind, dict(metadata), "long table")


def permute_rows(values, order) -> None:
    """``values[:] = values[order]`` through one row buffer instead of a second map."""
    done = np.zeros(order.size, dtype=bool)
    for start in np.flatnonzero(order != np.arange(order.size)):
        if done[start]:
            continue
        saved, i = values[start].copy(), start
        while order[i] != start:  # follow the cycle: row i takes row order[i]
            values[i], done[i], i = values[order[i]], True, order[i]
        values[i], done[i] = saved, True


def _rows(values, order, owned):
    """``(rows in field order, C-contiguous; whether they may be changed in place)``, at
    most one copy. ``owned`` arrays (just read from a file) are reordered in place."""
    if not values.flags.c_contiguous:
        values, owned = np.ascontiguousarray(values), True
    if order is not None:
        if owned and values.flags.writeable:
            permute_rows(values, order)
        else:
            values, owned = values[order], True
    return values, owned and values.flags.writeable


def _rows_si(values, order, factor, owned):
    """Rows in field order, C-contiguous, times ``factor``; at most one copy."""
    values, owned = _rows(values, order, owned)
    if factor == 1.0:
        return values
    if owned:
        values *= factor
        return values
    return values * factor


def from_arrays(field_raw, bias_raw, signal_raw, units: dict, names: dict, *, source, sha256,
                metadata, settings: ReadSettings, owned: bool = False) -> IVMap:
    """Build a map from HDF5-style arrays, transposing (n_bias, n_field) layouts.

    A 1-D bias (or a 2-D one with equal rows) stays one row broadcast over the
    map. With ``owned`` the float64 arrays belong to the caller no longer and
    are scaled in place instead of copied. ``signal_raw`` may be a read not yet
    done (``shape``, ``ndim``, ``whole()`` and ``scaled(factor, limit, order)``, see
    :class:`jjpattern.io.stored.StoredMap`): it is read once its unit is known, into
    an array of its own scaled and screened block by block as it arrives.
    """
    deferred = hasattr(signal_raw, "scaled")
    for role, values in (("field", field_raw), ("bias", bias_raw), ("signal", signal_raw)):
        if not (deferred and role == "signal"):  # a deferred read gives float64
            real(values, source, f"{clip(names[role])}")
    field_raw = np.asarray(field_raw, dtype=float).ravel()
    bias_raw = np.asarray(bias_raw, dtype=float)
    sig = signal_raw if deferred else np.asarray(signal_raw, dtype=float)
    n_f = field_raw.size
    if sig.ndim != 2:
        raise InputError(f"{source}: {clip(names['signal'])} must be 2-D, found shape {sig.shape}")
    layout = "field x bias"
    if settings.transpose or (sig.shape[0] != n_f and sig.shape[1] == n_f):
        if deferred:
            sig, deferred, owned = sig.whole(), False, True
        sig = sig.T
        bias_raw = bias_raw.T if bias_raw.ndim == 2 else bias_raw
        layout = "bias x field (transposed on reading)"
    if sig.shape[0] != n_f:
        raise InputError(f"{source}: {clip(names['signal'])} has shape {sig.shape} but there are "
                         f"{n_f} field values; the map must be (n_field, n_bias)")
    if bias_raw.ndim == 1:
        if bias_raw.size != sig.shape[1]:
            raise InputError(f"{source}: {clip(names['bias'])} has {bias_raw.size} values but the "
                             f"map has {sig.shape[1]} bias points per row")
    elif bias_raw.shape != sig.shape:
        raise InputError(f"{source}: {clip(names['bias'])} has shape {bias_raw.shape}, the map "
                         f"{sig.shape}; they must match")
    where = f"{source}: dataset"
    f_unit = _units(units.get, names["field"], settings.field_unit, source, "dataset",
                    "--field-unit", settings.coil_T_per_A is not None)
    b_unit = _units(units.get, names["bias"], settings.current_unit, source, "dataset",
                    "--current-unit")
    s_unit = _units(units.get, names["signal"], settings.signal_unit, source, "dataset",
                    "--signal-unit")
    kind = _signal_kind(names["signal"], s_unit)
    field_T = field_values_T(field_raw, f_unit, f"{where} {clip(names['field'])}",
                             settings.coil_T_per_A)
    b_factor = current_factor(b_unit, f"{where} {clip(names['bias'])}")
    s_factor = _signal_factor(kind, s_unit, f"{where} {clip(names['signal'])}")
    check_field(source, clip(names["field"]), field_T, span=False)
    order = np.argsort(field_T, kind="stable")
    if np.array_equal(order, np.arange(n_f)):
        order = None  # already in field order: no copy
    else:
        field_T = field_T[order]
    # Signalling NaNs of a damaged file stay NaN quietly; an overflow to infinity is refused
    # by the checks below.
    with np.errstate(invalid="ignore", over="ignore"):
        if deferred:  # scaled and screened as read; the sentence only if something is amiss
            signal, inside = sig.scaled(s_factor, MAX_SIGNAL[kind], order)
            if not inside:
                check_signal(source, clip(names["signal"]), signal, kind)
        else:
            signal, in_place = _rows(sig, order, owned)
            if not in_place and s_factor != 1.0:
                signal, s_factor = signal * s_factor, 1.0
            # An owned signal is scaled in place by the check, in the same pass over the map.
            check_signal(source, clip(names["signal"]), signal, kind, scale=s_factor)
        if bias_raw.ndim == 1:
            bias = np.broadcast_to(bias_raw * b_factor, signal.shape)
        else:
            bias = share_bias(_rows_si(bias_raw, order, b_factor, owned))
    check_current(source, clip(names["bias"]), bias[0] if bias.strides[0] == 0 else bias)
    return IVMap(source, sha256, field_T, bias, signal, kind, dict(metadata), layout)
