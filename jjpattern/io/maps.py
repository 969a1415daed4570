"""Raw V(I, B) maps: HDF5 arrays, long-form text tables, or a folder of I-V files.

Every reader ends in :class:`IVMap`: one row per field step, the bias in
acquisition order along each row (NaN-padded where rows differ in length),
and the measured voltage (V) or differential resistance dV/dI (ohm).

HDF5 default layout: 1-D ``field`` (n_field) and ``bias`` (n_bias, or 2-D
(n_field, n_bias) when the bias differs per row), and 2-D ``voltage`` or
``dvdi`` of shape (n_field, n_bias), each with a ``units`` attribute.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .sweep import field_values_T, is_field_name, numeric, role_key
from .units import current_factor, resistance_factor, split_header, voltage_factor

_BIAS_NAMES = {"i", "bias", "i_bias", "ibias", "current", "i_dc", "idc", "i_set", "iset"}
_VOLTAGE_NAMES = {"v", "voltage", "vdc", "v_dc", "u", "v_meas"}
_DVDI_NAMES = {"dvdi", "dv/di", "dv_di", "dvdi_lockin", "r_diff", "rdiff", "dv/di_lockin"}


@dataclass(frozen=True)
class IVMap:
    """A raw map: ``signal[i, k]`` measured at ``field_T[i]`` and ``bias_A[i, k]``."""

    path: str
    sha256: str | None
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


def _pick(names, role, explicit, source, what):
    if explicit:
        for n in names:
            if n == explicit or split_header(n)[0] == explicit:
                return n
        raise InputError(f"{source}: no {what} named {explicit!r}; found "
                         f"{', '.join(map(repr, names))}")
    if role == "field":
        found = [n for n in names if is_field_name(split_header(n)[0], coil=True)]
    elif role == "signal":
        found = [n for n in names if map_role(split_header(n)[0]) in ("voltage", "dvdi")]
    else:
        found = [n for n in names if map_role(split_header(n)[0]) == role]
    if len(found) != 1:
        option = {"field": "--field-col", "bias": "--bias-col", "signal": "--signal-col"}[role]
        problem = "none" if not found else f"several ({', '.join(map(repr, found))})"
        raise InputError(f"{source}: {what}: {problem} recognised among "
                         f"{', '.join(map(repr, names))}; choose one with {option}")
    return found[0]


def _signal_kind(name: str, unit: str | None) -> str:
    role = map_role(split_header(name)[0])
    if role in ("voltage", "dvdi"):
        return role
    return "dvdi" if unit and "ohm" in unit.lower() or unit in ("\u03a9",) else "voltage"


def _signal_si(raw, kind, unit, where):
    if kind == "dvdi":
        return raw * resistance_factor(unit, where)
    return raw * voltage_factor(unit, where)


@dataclass
class MapOptions:
    """Column / dataset choices and units for raw maps (all optional)."""

    field_col: str | None = None
    bias_col: str | None = None
    signal_col: str | None = None
    field_unit: str | None = None
    current_unit: str | None = None
    signal_unit: str | None = None
    coil_T_per_A: float | None = None
    transpose: bool = False
    field_from_name: str | None = None


def _units(unit_of, name, given, source, what, option):
    unit = given or unit_of(name)
    if not unit:
        raise InputError(f"{source}: {what} {name!r} has no unit; add one or pass {option}")
    return unit


def from_long_table(columns: dict, *, source, sha256, metadata, opts: MapOptions) -> IVMap:
    """Pivot a long table (one row per field and bias point, any order) into a map."""
    names = list(columns)
    fcol = _pick(names, "field", opts.field_col, source, "field column")
    bcol = _pick(names, "bias", opts.bias_col, source, "bias column")
    scol = _pick(names, "signal", opts.signal_col, source, "voltage or dV/dI column")
    unit_of = lambda n: split_header(n)[1]  # noqa: E731
    f_unit = _units(unit_of, fcol, opts.field_unit, source, "column", "--field-unit")
    b_unit = _units(unit_of, bcol, opts.current_unit, source, "column", "--current-unit")
    s_unit = _units(unit_of, scol, opts.signal_unit, source, "column", "--signal-unit")
    kind = _signal_kind(scol, s_unit)
    field_T = field_values_T(numeric(columns, fcol, "column"), f_unit,
                             f"{source}: column {fcol!r}", opts.coil_T_per_A)
    bias = numeric(columns, bcol, "column") * current_factor(b_unit, f"{source}: column {bcol!r}")
    signal = _signal_si(numeric(columns, scol, "column"), kind, s_unit,
                        f"{source}: column {scol!r}")
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
    return IVMap(source, sha256, steps, b2, s2, kind, dict(metadata), "long table")


def from_arrays(field_raw, bias_raw, signal_raw, units: dict, names: dict, *, source, sha256,
                metadata, opts: MapOptions) -> IVMap:
    """Build a map from HDF5-style arrays, transposing (n_bias, n_field) layouts."""
    field_raw = np.asarray(field_raw, dtype=float).ravel()
    bias_raw = np.asarray(bias_raw, dtype=float)
    sig = np.asarray(signal_raw, dtype=float)
    n_f = field_raw.size
    if sig.ndim != 2:
        raise InputError(f"{source}: {names['signal']!r} must be 2-D, found shape {sig.shape}")
    layout = "field x bias"
    if opts.transpose or (sig.shape[0] != n_f and sig.shape[1] == n_f):
        sig = sig.T
        bias_raw = bias_raw.T if bias_raw.ndim == 2 else bias_raw
        layout = "bias x field (transposed on reading)"
    if sig.shape[0] != n_f:
        raise InputError(f"{source}: {names['signal']!r} has shape {sig.shape} but there are "
                         f"{n_f} field values; the map must be (n_field, n_bias)")
    if bias_raw.ndim == 1:
        if bias_raw.size != sig.shape[1]:
            raise InputError(f"{source}: {names['bias']!r} has {bias_raw.size} values but the "
                             f"map has {sig.shape[1]} bias points per row")
        bias_raw = np.broadcast_to(bias_raw, sig.shape)
    elif bias_raw.shape != sig.shape:
        raise InputError(f"{source}: {names['bias']!r} has shape {bias_raw.shape}, the map "
                         f"{sig.shape}; they must match")
    where = f"{source}: dataset"
    f_unit = _units(units.get, names["field"], opts.field_unit, source, "dataset",
                    "--field-unit")
    b_unit = _units(units.get, names["bias"], opts.current_unit, source, "dataset",
                    "--current-unit")
    s_unit = _units(units.get, names["signal"], opts.signal_unit, source, "dataset",
                    "--signal-unit")
    kind = _signal_kind(names["signal"], s_unit)
    field_T = field_values_T(field_raw, f_unit, f"{where} {names['field']!r}",
                             opts.coil_T_per_A)
    bias = bias_raw * current_factor(b_unit, f"{where} {names['bias']!r}")
    signal = _signal_si(sig, kind, s_unit, f"{where} {names['signal']!r}")
    order = np.argsort(field_T, kind="stable")
    return IVMap(source, sha256, field_T[order], np.array(bias[order]), signal[order], kind,
                 dict(metadata), layout)


def read_hdf5_map(path: str, sha256, opts: MapOptions) -> IVMap:
    """Read the default HDF5 map layout (or the named dataset paths)."""
    import h5py

    from .hdf5 import _text

    try:
        handle = h5py.File(path, "r")
    except OSError as exc:
        raise InputError(f"{path}: not a readable HDF5 file ({exc.__class__.__name__})") from None
    with handle:
        datasets = {k: v for k, v in handle.items() if isinstance(v, h5py.Dataset)}
        names = {}
        for role, explicit in (("field", opts.field_col), ("bias", opts.bias_col),
                               ("signal", opts.signal_col)):
            if explicit:
                if explicit not in handle or not isinstance(handle[explicit], h5py.Dataset):
                    raise InputError(f"{path}: no dataset at {explicit!r}; check the path")
                names[role] = explicit
            else:
                names[role] = _pick(list(datasets), role, None, path, f"{role} dataset")
        arrays = {r: handle[n][()] for r, n in names.items()}
        units = {n: _text(handle[n].attrs[a]) for n in names.values()
                 for a in ("units", "unit") if a in handle[n].attrs}
        metadata = {k: _text(v) for k, v in handle.attrs.items()}
    return from_arrays(arrays["field"], arrays["bias"], arrays["signal"], units, names,
                       source=path, sha256=sha256, metadata=metadata, opts=opts)


def hdf5_has_map(path: str) -> bool:
    """True when the file's root holds a 2-D dataset (a raw map rather than a sweep)."""
    import h5py

    try:
        with h5py.File(path, "r") as handle:
            return any(isinstance(v, h5py.Dataset) and v.ndim == 2 for v in handle.values())
    except OSError:
        return False


def _field_of_file(path, metadata, opts: MapOptions):
    """The field of one I-V file, from its name (``--field-from-name``) or a metadata line."""
    name = os.path.basename(path)
    if opts.field_from_name:
        match = re.search(opts.field_from_name, name)
        if not match:
            raise InputError(f"{path}: the file name does not match --field-from-name "
                             f"{opts.field_from_name!r}")
        text = match.groupdict().get("field") or match.group(1)
        unit = opts.field_unit
        if not unit:
            raise InputError(f"{path}: a field taken from the file name needs --field-unit")
        return float(text), unit
    for key, value in metadata.items():
        k_name, k_unit = split_header(key)
        if is_field_name(k_name, coil=opts.coil_T_per_A is not None):
            parts = value.split()
            unit = k_unit or (parts[1] if len(parts) > 1 else None) or opts.field_unit
            try:
                return float(parts[0]), unit
            except (ValueError, IndexError):
                raise InputError(f"{path}: metadata {key!r} = {value!r} is not a field value"
                                 ) from None
    raise InputError(f"{path}: no field value; add a line '# field: 1.25 mT' or pass "
                     "--field-from-name with a pattern for the file name")


def read_iv_folder(folder: str, opts: MapOptions) -> IVMap:
    """One I-V file per field step; the field from a metadata line or the file name."""
    import hashlib

    from .text import decode, parse_table

    files = sorted(os.path.join(folder, f) for f in os.listdir(folder)
                   if not f.startswith(".") and os.path.isfile(os.path.join(folder, f)))
    if not files:
        raise InputError(f"{folder}: the folder holds no I-V files")
    rows, fields, digest, meta0 = [], [], hashlib.sha256(), {}
    for path in files:
        with open(path, "rb") as handle:
            raw = handle.read()
        digest.update(raw)
        metadata, columns, _ = parse_table(decode(raw, path), path)
        value, unit = _field_of_file(path, metadata, opts)
        if not unit:
            raise InputError(f"{path}: the field value has no unit; pass --field-unit")
        columns = {**columns, "__field__": np.full(len(next(iter(columns.values()))), value)}
        one = from_long_table(columns, source=path, sha256=None, metadata=metadata,
                              opts=MapOptions(**{**opts.__dict__, "field_col": "__field__",
                                                 "field_unit": unit}))
        rows.append((one.bias_A[0], one.signal[0], one.kind))
        fields.append(one.field_T[0])
        meta0 = meta0 or metadata
    kinds = {k for _, _, k in rows}
    if len(kinds) > 1:
        raise InputError(f"{folder}: some files hold voltage and others dV/dI; use one kind")
    width = max(r[0].size for r in rows)
    bias = np.full((len(rows), width), np.nan)
    signal = np.full_like(bias, np.nan)
    for i, (b, s, _) in enumerate(rows):
        bias[i, :b.size], signal[i, :s.size] = b, s
    order = np.argsort(fields, kind="stable")
    return IVMap(folder, digest.hexdigest(), np.asarray(fields)[order], bias[order],
                 signal[order], kinds.pop(), meta0, "folder of I-V files")
