"""The batch manifest: one row per measured junction, converted to SI at the edge.

Columns: ``file`` (relative to the manifest) and ``junction`` are required;
``chip``, ``cooldown``, ``x``, ``y``, ``area`` are read into the row; any
setting of :mod:`jjpattern.settings` can be given per row by its name
(``loss``, ``node_floor``, ``seed``) or dotted (``fit.loss``), and a setting
whose name ends in an SI unit takes the unit from the header instead
(``length (um)``, ``L [µm]``, ``barrier_nm``, ``jc (kA/cm2)``, ``gap (meV)``).
An empty cell keeps the default. Other columns are kept as text metadata.
"""

from __future__ import annotations

import difflib
import io
import math
import os
import re
from dataclasses import dataclass, field, fields

from ..errors import InputError
from ..settings import Settings
from .starter import write_starter_manifest

__all__ = ["ManifestRow", "read_manifest", "write_starter_manifest"]

_LENGTH = {"m": 1.0, "cm": 1e-2, "mm": 1e-3, "um": 1e-6, "micron": 1e-6, "nm": 1e-9,
           "\u00e5": 1e-10}
_AREA = {"m2": 1.0, "cm2": 1e-4, "mm2": 1e-6, "um2": 1e-12, "nm2": 1e-18}
_JC = {"a/m2": 1.0, "a/cm2": 1e4, "ka/cm2": 1e7, "ma/cm2": 10.0, "ua/um2": 1e6,
       "a/um2": 1e12}
_TEMPERATURE = {"k": 1.0, "mk": 1e-3}
_ENERGY = {"j": 1.0, "ev": None, "mev": None, "uev": None}  # eV factors filled from scipy
#: SI suffix of a setting name -> the units a header may use instead.
_SUFFIX_UNITS = {"_A_m2": _JC, "_m": _LENGTH, "_K": _TEMPERATURE, "_J": _ENERGY}
#: Short names people use for the geometry settings.
_ALIASES = {"l": "length", "len": "length", "w": "width", "d": "barrier",
            "barrier_thickness": "barrier", "electrodes": "electrode", "t": "electrode",
            "electrode_thickness": "electrode", "lambda": "london", "lambda_l": "london",
            "london_depth": "london", "j_c": "jc", "critical_current_density": "jc",
            "a": "area", "geometry": "model"}
_ROW_COLUMNS = ("file", "junction", "chip", "cooldown", "x", "y", "area")
_TRUE, _FALSE = {"1", "yes", "y", "true", "t"}, {"0", "no", "n", "false", "f"}
_BRACKETED = re.compile(r"^(?P<name>.*?)\s*[\(\[](?P<unit>[^\)\]]*)[\)\]]$")


@dataclass(frozen=True)
class ManifestRow:
    """One junction of a manifest, in SI.

    ``settings_overrides`` maps dotted setting names (``"fit.loss"``,
    ``"junction.length_m"``) to values in SI; ``x`` and ``y`` are in metres when
    ``xy_unit`` is ``"m"`` and as written (die or grid indices) when it is ``""``.
    """

    row_number: int
    file_path: str
    junction: str
    chip: str | None = None
    cooldown: str | None = None
    x: float | None = None
    y: float | None = None
    area_m2: float | None = None
    settings_overrides: dict = field(default_factory=dict)
    metadata: dict = field(default_factory=dict)
    xy_unit: str = ""

    @property
    def length_m(self) -> float | None:
        return self.settings_overrides.get("junction.length_m")

    @property
    def width_m(self) -> float | None:
        return self.settings_overrides.get("junction.width_m")

    def settings(self, base: Settings | None = None) -> Settings:
        """``base`` (default settings if None) with this row's overrides applied."""
        base = base or Settings()
        if not self.settings_overrides:
            return base
        return base.replace(**{k.replace(".", "__"): v for k, v in self.settings_overrides.items()})


@dataclass(frozen=True)
class _Column:
    header: str
    kind: str  # one of _ROW_COLUMNS, "setting" or "meta"
    target: str | None = None  # dotted setting name
    vtype: str = "str"
    factor: float = 1.0
    unit: str | None = None


def _energy_units() -> dict:
    from scipy.constants import electron_volt

    return {"j": 1.0, "ev": electron_volt, "mev": 1e-3 * electron_volt,
            "uev": 1e-6 * electron_volt}


def _lower(text: str) -> str:
    """Lower case, micro as ``u``, squared as ``2``."""
    return text.strip().lower().translate(str.maketrans({"\u00b5": "u", "\u03bc": "u",
                                                        "\u00b2": "2"}))


def _key(text: str) -> str:
    """:func:`_lower`, then spaces and hyphens as ``_``."""
    return re.sub(r"[\s\-]+", "_", _lower(text))


def _stages() -> dict:
    return {f.name: f.default_factory for f in fields(Settings)}


def _setting_names() -> tuple[dict, dict]:
    """Exact names -> [dotted], and unit-free base names -> (dotted, unit table)."""
    exact: dict[str, list[str]] = {}
    bases: dict[str, tuple[str, dict]] = {}
    for stage, cls in _stages().items():
        for f in fields(cls):
            dotted = f"{stage}.{f.name}"
            exact.setdefault(f.name.lower(), []).append(dotted)
            exact.setdefault(dotted.lower(), []).append(dotted)
            for suffix, table in _SUFFIX_UNITS.items():
                if f.name.endswith(suffix):
                    bases[f.name[: -len(suffix)].lower()] = (dotted, table)
                    break
    return exact, bases


def _vtype(dotted: str) -> str:
    """``bool``, ``int``, ``float``, ``floats``, ``strs`` or ``str`` from the annotation."""
    stage, name = dotted.split(".")
    text = str({f.name: f.type for f in fields(_stages()[stage])}[name])
    for word, vtype in (("tuple[float", "floats"), ("tuple[str", "strs"), ("bool", "bool"),
                        ("int", "int"), ("float", "float")):
        if word in text:
            return vtype
    return "str"


def _split(header: str, tables: list[dict]) -> tuple[str, str | None]:
    """``'L [um]'``, ``'length_um'``, ``'jc_kA/cm2'`` -> (name key, unit key)."""
    match = _BRACKETED.match(_lower(header))
    if match and match.group("name"):
        return _key(match.group("name")), _key(match.group("unit"))
    text = _key(header)
    for i, char in enumerate(text):
        if char == "_" and i:
            for unit in (text[i + 1:], text[i + 1:].replace("_", "/")):
                if any(unit in t for t in tables):
                    return text[:i], unit
    return text, None


def _classify(header: str, where: str, exact: dict, bases: dict) -> _Column:
    key = _key(header)
    if key in exact:
        targets = exact[key]
        if len(targets) > 1:
            raise InputError(f"{where}: column {header!r} names a setting of several stages "
                             f"({', '.join(targets)}); write the dotted name instead")
        return _Column(header, "setting", targets[0], _vtype(targets[0]))
    all_tables = [_LENGTH, _AREA, _JC, _TEMPERATURE, _ENERGY]
    name, unit = _split(header, all_tables)
    name = _ALIASES.get(name, name)
    if name in ("x", "y", "area"):
        table = _AREA if name == "area" else _LENGTH
        if unit is None:
            if name == "area":
                raise InputError(f"{where}: column {header!r} needs a unit; write it as "
                                 "'area (um2)'")
            return _Column(header, name)
        return _Column(header, name, factor=_factor(unit, table, header, where), unit=unit)
    if name in _ROW_COLUMNS and unit is None:
        return _Column(header, name)
    if name in bases:
        dotted, table = bases[name]
        if table is _ENERGY:
            table = _energy_units()
        if unit is None:
            example = {"_m": "um", "_K": "K", "_J": "meV", "_A_m2": "kA/cm2"}
            suffix = next(s for s, t in _SUFFIX_UNITS.items() if dotted.endswith(s))
            raise InputError(f"{where}: column {header!r} needs a unit; write it as "
                             f"'{name} ({example[suffix]})' or use the SI name "
                             f"{dotted.split('.')[1]!r}")
        return _Column(header, "setting", dotted, _vtype(dotted),
                       _factor(unit, table, header, where), unit)
    if name in exact and unit is None and len(exact[name]) == 1:
        return _Column(header, "setting", exact[name][0], _vtype(exact[name][0]))
    if unit is not None and (name in exact or name in _ROW_COLUMNS):
        raise InputError(f"{where}: column {header!r} takes no unit; remove {unit!r}")
    close = difflib.get_close_matches(key, [k for k in exact if "." not in k] + list(bases),
                                      n=1, cutoff=0.85)
    if close or "." in key:
        hint = f" to {close[0]!r} if that was meant" if close else ""
        raise InputError(f"{where}: column {header!r} is not a setting of jjpattern; rename "
                         f"it{hint} (the settings are listed in jjpattern.settings)")
    return _Column(header, "meta")


def _factor(unit: str, table: dict, header: str, where: str) -> float:
    if unit not in table:
        raise InputError(f"{where}: column {header!r} has unknown unit {unit!r}; use one of "
                         f"{', '.join(table)}")
    return table[unit]


def _columns(headers: list, where: str) -> list[_Column]:
    exact, bases = _setting_names()
    cols = [_classify(h, where, exact, bases) if h else _Column(f"column {i + 1}", "meta")
            for i, h in enumerate(headers)]
    seen: dict[str, str] = {}
    for col in cols:
        if col.kind == "meta":
            continue
        slot = col.target or col.kind
        if slot in seen:
            raise InputError(f"{where}: columns {seen[slot]!r} and {col.header!r} both give "
                             f"{slot}; keep one")
        seen[slot] = col.header
    for required in ("file", "junction"):
        if required not in seen:
            raise InputError(f"{where}: no {required!r} column; the header row needs 'file' "
                             "(path relative to the manifest) and 'junction' (an id)")
    xy = [c for c in cols if c.kind in ("x", "y")]
    if len(xy) == 1:
        raise InputError(f"{where}: only one of the columns 'x' and 'y' is given; add the other")
    if xy and (xy[0].unit is None) != (xy[1].unit is None):
        raise InputError(f"{where}: only one of the columns {xy[0].header!r} and "
                         f"{xy[1].header!r} has a unit; give both a unit, e.g. 'x (mm)', or "
                         "neither")
    return cols


def _number(text: str, col: _Column, where: str) -> float:
    try:
        value = float(text)
    except ValueError:
        unit = f" in {col.unit}" if col.unit else ""
        raise InputError(f"{where}, column {col.header!r}: {text!r} is not a number; write a "
                         f"number{unit}") from None
    if value != value or value in (float("inf"), float("-inf")):
        raise InputError(f"{where}, column {col.header!r}: {text!r} is not a finite number; "
                         "write a number or leave the cell empty")
    # Dividing by an exact power of ten keeps 10 um at exactly 1e-05 m.
    exponent = -math.log10(col.factor)
    return value / 10.0 ** round(exponent) if exponent == round(exponent) > 0 else \
        value * col.factor


def _value(text: str, col: _Column, where: str):
    vtype = col.vtype
    if vtype == "bool":
        if text.lower() in _TRUE:
            return True
        if text.lower() in _FALSE:
            return False
        raise InputError(f"{where}, column {col.header!r}: {text!r} is not yes or no; write "
                         "yes or no")
    if vtype == "int":
        value = _number(text, col, where)
        if value != int(value):
            raise InputError(f"{where}, column {col.header!r}: {text!r} is not a whole number; "
                             "write a whole number")
        return int(value)
    if vtype == "float":
        value = _number(text, col, where)
    elif vtype == "floats":
        value = tuple(_number(p, col, where) for p in re.split(r"[,;\s]+", text) if p)
    elif vtype == "strs":
        return tuple(p.strip() for p in text.split(",") if p.strip())
    else:
        if col.target == "fit.model":
            from ..physics.patterns import PATTERNS

            if text not in PATTERNS and text != "auto":  # auto: the choice by BIC
                raise InputError(f"{where}, column {col.header!r}: unknown model {text!r}; use "
                                 f"auto, {', '.join(PATTERNS)}")
        return text
    positive = col.target.startswith("junction.")
    values = value if isinstance(value, tuple) else (value,)
    if positive and any(v < 0 or (v == 0 and col.target != "junction.barrier_m")
                        for v in values):
        raise InputError(f"{where}, column {col.header!r}: {text!r} must be positive; "
                         "correct the size")
    return value


def _read_text(path: str) -> str:
    if not os.path.isfile(path):
        raise InputError(f"{path}: manifest not found; check the path")
    with open(path, "rb") as handle:
        raw = handle.read()
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        return raw.decode("latin-1")


def _table(path: str):
    """Header cells, and (spreadsheet row number, cells) of each non-empty data row."""
    import pandas as pd

    lines = _read_text(path).splitlines()
    start = next((i for i, line in enumerate(lines)
                  if line.strip() and not line.lstrip().startswith("#")), None)
    if start is None:
        raise InputError(f"{path}: the manifest is empty; write a header row with 'file' and "
                         "'junction' and one row per junction")
    delim = max((",", "\t", ";"), key=lines[start].count)
    try:
        frame = pd.read_csv(io.StringIO("\n".join(lines[start:])), sep=delim, header=None,
                            dtype=str, keep_default_na=False, skip_blank_lines=False)
    except pd.errors.ParserError as exc:
        found = re.search(r"line (\d+)", str(exc))
        row = f"row {start + int(found.group(1))}" if found else "a row"
        raise InputError(f"{path}: {row} has more cells than the header; quote values that "
                         f"contain {delim!r}") from None
    cells = frame.fillna("").to_numpy()
    header = [str(h).strip() for h in cells[0]]
    rows = []
    for i, values in enumerate(cells[1:]):
        values = [str(v).strip() for v in values]
        if any(values) and not values[0].startswith("#"):
            rows.append((start + 2 + i, values))
    return header, rows, start + 1


def read_manifest(path, *, check_files: bool = True) -> list[ManifestRow]:
    """Read a manifest CSV (comma, semicolon or tab) into one :class:`ManifestRow` per junction.

    Parameters
    ----------
    path : str or path-like
        The manifest. ``file`` entries are relative to its folder.
    check_files : bool
        Raise when a listed file or folder does not exist.

    Raises
    ------
    InputError
        Naming the manifest, the row (header = row 1) and the column, and the fix.
    """
    path = os.path.abspath(os.fspath(path))
    header, rows, header_row = _table(path)
    cols = _columns(header, f"{path}: row {header_row}")
    folder = os.path.dirname(path)
    out: list[ManifestRow] = []
    first_row: dict[tuple, int] = {}
    for number, values in rows:
        where = f"{path}: row {number}"
        row: dict = {"settings_overrides": {}, "metadata": {}}
        for col, text in zip(cols, values, strict=False):
            if not text:
                continue
            if col.kind == "setting":
                row["settings_overrides"][col.target] = _value(text, col, where)
            elif col.kind == "meta":
                row["metadata"][col.header] = text
            elif col.kind in ("x", "y"):
                row[col.kind] = _number(text, col, where)
                row["xy_unit"] = "m" if col.unit else ""
            elif col.kind == "area":
                row["area_m2"] = _number(text, col, where)
                if row["area_m2"] <= 0:
                    raise InputError(f"{where}, column {col.header!r}: {text!r} must be "
                                     "positive; correct the area")
            else:
                row[col.kind] = text
        for required in ("file", "junction"):
            if required not in row:
                name = next(c.header for c in cols if c.kind == required)
                raise InputError(f"{where}, column {name!r}: the cell is empty; fill it in or "
                                 "delete the row")
        if ("x" in row) != ("y" in row):
            raise InputError(f"{where}, columns 'x' and 'y': only one is filled; give both "
                             "or neither")
        file_path = os.path.normpath(os.path.join(folder, row.pop("file")))
        if check_files and not os.path.exists(file_path):
            name = next(c.header for c in cols if c.kind == "file")
            raise InputError(f"{where}, column {name!r}: {file_path} does not exist; paths are "
                             "relative to the manifest's folder, correct the path")
        key = (row.get("chip"), row["junction"], row.get("cooldown"))
        if key in first_row:
            named = ", ".join(f"{k} {v!r}" for k, v in zip(("chip", "junction", "cooldown"), key,
                                                          strict=True) if v is not None)
            raise InputError(f"{where}, columns chip, junction and cooldown: {named} is already "
                             f"listed in row {first_row[key]}; remove one of the two rows or "
                             "tell them apart by chip or cooldown")
        first_row[key] = number
        out.append(ManifestRow(row_number=number, file_path=file_path, **row))
    if not out:
        raise InputError(f"{path}: the manifest lists no junction; add one row per junction "
                         "below the header")
    return out
