"""Every setting of an analysis, one frozen dataclass per stage, defaults in one place.

All values are in SI (``coil_T_per_A``, ``gap_J``, ``length_m``); the command
line and the batch manifest convert at the edge. ``Settings.to_dict()`` is
exactly the JSON ``settings`` block of a result, ``Settings.from_dict``
reads it back, and :meth:`Settings.hash` is the key under which a result can
be found again ("this input was already analysed with these settings").
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
from dataclasses import dataclass, field, fields

from . import __version__
from .errors import InputError


@dataclass(frozen=True)
class ReadSettings:
    """How the input file is read: columns, units, layout of raw maps, the field window.

    ``decimal`` is ``"."`` or ``","`` (``None``: recognised from the file, refused
    when it is ambiguous). ``field_range_T`` is ``(low, high)`` in tesla, ``None``
    for an open end; rows outside it are left out. ``exclude_T`` holds
    ``(low, high)`` intervals whose rows are left out (glitches).

    ``max_bytes`` bounds the input file (each file of a folder, and their total),
    ``max_points`` the values of any one array read (rows of a column, cells of a
    map), both checked before reading, and ``max_rows`` the rows of an Ic(B) sweep
    (each is fitted: 200,000 rows take about a minute and 2 GB). ``allow_external``
    lets an HDF5 file read data kept in other files (external links, external
    storage, virtual datasets); those files are then hashed with the input.
    """

    field_col: str | None = None
    ic_cols: tuple[str, ...] = ()
    field_unit: str | None = None
    current_unit: str | None = None
    coil_T_per_A: float | None = None
    bias_col: str | None = None
    signal_col: str | None = None
    signal_unit: str | None = None
    transpose: bool = False
    field_from_name: str | None = None
    decimal: str | None = None
    field_range_T: tuple[float | None, ...] = ()
    exclude_T: tuple[tuple[float, float], ...] = ()
    max_bytes: int = 256 << 20
    max_points: int = 20_000_000
    max_rows: int = 200_000
    allow_external: bool = False

    def __post_init__(self):
        for name in ("max_bytes", "max_points", "max_rows"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, int) or value < 1:
                raise InputError(f"settings read.{name}: {value!r} is not a positive whole "
                                 "number")


@dataclass(frozen=True)
class ExtractSettings:
    """How Ic is read from each I-V of a raw map, and what IcRn is compared with.

    ``threshold`` is in the criterion's own unit (V, Ohm, or a fraction of Rn);
    ``None`` lets the criterion choose from the noise and Rn.
    """

    criterion: str = "auto"
    threshold: float | None = None
    gap_J: float | None = None
    tc_K: float | None = None
    temperature_K: float | None = None


@dataclass(frozen=True)
class FitSettings:
    """The pattern model and how it is fitted.

    ``model`` is ``"auto"`` (default: every registered model is fitted and the Bayesian
    information criterion picks one by a margin, at about three times the cost of one
    model, see scripts/bench_fit.py) or the name of one model, which is then fitted alone.
    """

    model: str = "auto"
    node_floor: str = "auto"
    loss: str = "linear"

    def __post_init__(self):
        if not isinstance(self.model, str) or not self.model.strip():
            raise InputError(f"settings fit.model: {self.model!r} is not a model name; use "
                             "auto or a model such as rectangular")
        from .physics.models import model_names

        if self.model != "auto" and self.model not in model_names():
            raise InputError(f"unknown model {self.model!r}: "
                             + unknown_model_message(self.model).split("; ", 1)[1])


def unknown_model_message(name) -> str:
    """``"'fraunhofer' is not a model; use auto or one of rectangular, ... (rectangular is
    the uniform junction's Fraunhofer pattern)"``, with the nearest name when one is close."""
    import difflib

    from .physics.models import model_names

    names = model_names()
    close = difflib.get_close_matches(str(name), names, n=1, cutoff=0.7)
    hint = (f"did you mean {close[0]}?" if close
            else "rectangular is the uniform junction's Fraunhofer pattern")
    return f"{name!r} is not a model; use auto or one of {', '.join(names)} ({hint})"


@dataclass(frozen=True)
class DiagnoseSettings:
    """Current-density reconstruction and shape checks."""

    enabled: bool = True
    seed: int = 0
    resamples: int = 200


@dataclass(frozen=True)
class JunctionSettings:
    """Geometry and materials given by the user; ``None`` falls back to file metadata."""

    length_m: float | None = None
    width_m: float | None = None
    barrier_m: float | None = None
    electrode_m: tuple[float, ...] = ()
    london_m: tuple[float, ...] = ()
    jc_A_m2: float | None = None
    planar: bool = False


@dataclass(frozen=True)
class ReportSettings:
    """What a report folder holds; not part of the analysis hash."""

    figure_formats: tuple[str, ...] = (".png",)
    dpi: int = 200


_SECTIONS = {
    "read": ReadSettings,
    "extract": ExtractSettings,
    "fit": FitSettings,
    "diagnose": DiagnoseSettings,
    "junction": JunctionSettings,
    "report": ReportSettings,
}
#: Sections that change the result document (the hash covers these).
ANALYSIS_SECTIONS = ("read", "extract", "fit", "diagnose", "junction")


def _plain(value):
    if isinstance(value, tuple):
        return [_plain(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        return value.item()  # a numpy scalar given from Python code
    return value


def _tuples(value):
    """Lists (from JSON) back to tuples, nested ones included."""
    if isinstance(value, (list, tuple)):
        return tuple(_tuples(v) for v in value)
    return value


def _section_from_dict(cls, data, where: str):
    if data is None:
        return cls()
    if not isinstance(data, dict):
        raise InputError(f"settings {where}: expected a mapping, found {type(data).__name__}")
    known = {f.name: f for f in fields(cls)}
    unknown = sorted(set(data) - set(known))
    if unknown:
        raise InputError(f"settings {where}: unknown key {unknown[0]!r}; known keys are "
                         f"{', '.join(known)}")
    values = {}
    for name, value in data.items():
        default = known[name].default
        if isinstance(default, tuple) and value is not None:
            value = _tuples(value) if isinstance(value, (list, tuple)) else (value,)
        values[name] = value
    return cls(**values)


@dataclass(frozen=True)
class Settings:
    """All settings of one analysis. Build with keywords or from a dict.

    Examples
    --------
    >>> s = Settings(fit=FitSettings(loss="cauchy"))
    >>> Settings.from_dict(s.to_dict()) == s
    True
    """

    read: ReadSettings = field(default_factory=ReadSettings)
    extract: ExtractSettings = field(default_factory=ExtractSettings)
    fit: FitSettings = field(default_factory=FitSettings)
    diagnose: DiagnoseSettings = field(default_factory=DiagnoseSettings)
    junction: JunctionSettings = field(default_factory=JunctionSettings)
    report: ReportSettings = field(default_factory=ReportSettings)

    def to_dict(self) -> dict:
        """Plain JSON-ready dict, one entry per stage (tuples become lists)."""
        return {name: {f.name: _plain(getattr(getattr(self, name), f.name))
                       for f in fields(cls)}
                for name, cls in _SECTIONS.items()}

    @classmethod
    def from_dict(cls, data: dict | None) -> Settings:
        """Inverse of :meth:`to_dict`; missing stages and keys take their defaults."""
        data = data or {}
        unknown = sorted(set(data) - set(_SECTIONS))
        if unknown:
            raise InputError(f"settings: unknown stage {unknown[0]!r}; known stages are "
                             f"{', '.join(_SECTIONS)}")
        return cls(**{name: _section_from_dict(sec, data.get(name), name)
                      for name, sec in _SECTIONS.items()})

    def replace(self, **dotted) -> Settings:
        """A copy with ``stage__key=value`` (or ``{"stage.key": value}``) changed.

        >>> Settings().replace(fit__loss="cauchy").fit.loss
        'cauchy'
        """
        changes: dict[str, dict] = {}
        for key, value in dotted.items():
            stage, _, name = key.replace(".", "__").partition("__")
            if stage not in _SECTIONS or name not in {f.name for f in fields(_SECTIONS[stage])}:
                raise InputError(f"setting {key.replace('__', '.')!r} does not exist; "
                                 f"stages are {', '.join(_SECTIONS)}")
            changes.setdefault(stage, {})[name] = value
        return dataclasses.replace(self, **{
            stage: dataclasses.replace(getattr(self, stage), **values)
            for stage, values in changes.items()})

    def analysis_dict(self) -> dict:
        """The stages that change the result (everything but ``report``)."""
        full = self.to_dict()
        return {name: full[name] for name in ANALYSIS_SECTIONS}

    def hash(self) -> str:
        """SHA-256 of the canonical JSON of the analysis stages and the tool version."""
        text = json.dumps({"tool_version": __version__, "settings": self.analysis_dict()},
                          sort_keys=True, separators=(",", ":"), ensure_ascii=True,
                          allow_nan=False)
        return hashlib.sha256(text.encode("ascii")).hexdigest()


def keyword_settings(base: Settings | None = None, **keywords) -> Settings:
    """Settings from flat keywords (``loss="cauchy"``, ``length_m=1e-5``) for the Python API.

    A keyword names a setting of any stage; a name that two stages share is an
    error (use ``Settings.replace`` with ``stage__key`` then).
    """
    base = base or Settings()
    owners: dict[str, list[str]] = {}
    for stage, cls in _SECTIONS.items():
        for f in fields(cls):
            owners.setdefault(f.name, []).append(stage)
    dotted = {}
    for key, value in keywords.items():
        if "__" in key:
            dotted[key] = value
            continue
        stages = owners.get(key)
        if not stages:
            raise InputError(f"unknown setting {key!r}; see jjpattern.settings for the list")
        if len(stages) > 1:
            raise InputError(f"setting {key!r} belongs to {' and '.join(stages)}; "
                             f"write {stages[0]}__{key}=...")
        dotted[f"{stages[0]}__{key}"] = value
    return base.replace(**dotted) if dotted else base
