"""The result document: everything an analysis found, readable back from its JSON.

A :class:`Result` holds the points that were fitted, every fitted and derived
number, the flags, the current density, the extraction summary (not the raw
map), the settings and where it all came from. ``Result.from_json(r.to_json())``
gives back an equal object, so reports, batch workers on other machines and
the history catalog all work from the document alone.
"""

from __future__ import annotations

import datetime
import json
import math
from dataclasses import dataclass, field, fields

import numpy as np

from . import __version__
from .flags import Flag
from .settings import Settings

#: Keys of one ``fits`` entry in the JSON document, in order (numbers first).
FIT_KEYS = (
    "branch", "segment", "model", "period_T", "period_stderr_T", "field_offset_T",
    "field_offset_stderr_T",
    "ic0_A", "ic0_stderr_A", "effective_area_m2", "effective_area_stderr_m2",
    "node_floor_A", "node_floor_stderr_A", "reduced_chisq", "lobes_observed", "nodes_observed",
    "points_used", "points_downweighted", "residual_rms_A", "noise_A", "ic_max_A",
    "field_min_T", "field_max_T", "loss", "uncertainty", "asymmetry", "asymmetry_stderr",
)
#: The one key whose value changes from run to run.
TIMESTAMP_KEY = "generated_utc"
#: Version of the document layout; readers refuse a newer one. 2: the current density
#: as J over its mean (``j_over_mean``, ...) instead of arbitrary units under ``j``.
SCHEMA_VERSION = 2


def plain(value):
    """JSON-safe copy: numpy scalars and arrays to Python, non-finite floats to ``None``."""
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [plain(v) for v in value.tolist()]
    if isinstance(value, (np.floating, np.integer, np.bool_)):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def stderr_key(key: str) -> str:
    """``magnetic_thickness_m`` -> ``magnetic_thickness_stderr_m`` (the unit stays last)."""
    for unit in ("_A_m2", "_m", "_T"):
        if key.endswith(unit):
            return f"{key[:-len(unit)]}_stderr{unit}"
    return f"{key}_stderr"


@dataclass
class FitResult:
    """One branch's fit as recorded: the numbers, the best parameters and the points fitted.

    Numbers are ``None`` where the data do not determine them. ``best_params``
    (keyword arguments of the model formula) draws the curve even where the
    offset or Ic0 are withheld.
    """

    branch: str
    model: str
    #: The run of the field sweep this fit is of (``"up"``, ``"down"``, ``"up 2"``), or ``""``
    #: for a sweep in one direction; ``branch`` then ends with it (``"positive up"``).
    segment: str = ""
    period_T: float | None = None
    period_stderr_T: float | None = None
    field_offset_T: float | None = None
    field_offset_stderr_T: float | None = None
    ic0_A: float | None = None
    ic0_stderr_A: float | None = None
    effective_area_m2: float | None = None
    effective_area_stderr_m2: float | None = None
    node_floor_A: float | None = None
    node_floor_stderr_A: float | None = None
    reduced_chisq: float | None = None
    lobes_observed: int | None = None
    nodes_observed: int | None = None
    points_used: int = 0
    points_downweighted: int = 0
    residual_rms_A: float | None = None
    noise_A: float | None = None
    ic_max_A: float | None = None
    field_min_T: float | None = None
    field_max_T: float | None = None
    loss: str = "linear"
    uncertainty: str = ""
    asymmetry: float | None = None
    asymmetry_stderr: float | None = None
    best_params: dict = field(default_factory=dict)
    extra_params: dict = field(default_factory=dict)
    extra_stderr: dict = field(default_factory=dict)
    derived: dict = field(default_factory=dict)
    derived_stderr: dict = field(default_factory=dict)
    withheld: dict | None = None
    model_choice: dict | None = None
    field_T: np.ndarray = field(default_factory=lambda: np.zeros(0), repr=False)
    ic_A: np.ndarray = field(default_factory=lambda: np.zeros(0), repr=False)

    @classmethod
    def from_fit(cls, fit) -> FitResult:
        """Copy the recorded parts of a live :class:`jjpattern.fit.result.PatternFit`."""
        numbers = fit.to_dict()
        return cls(**numbers, best_params=plain(dict(fit.best_params)),
                   extra_params=plain(dict(getattr(fit, "extra_params", {}))),
                   extra_stderr=plain(dict(getattr(fit, "extra_stderr", {}))),
                   derived=plain(dict(getattr(fit, "derived", {}))),
                   derived_stderr=plain(dict(getattr(fit, "derived_stderr", {}))),
                   withheld=plain(getattr(fit, "withheld", None)),
                   model_choice=plain(getattr(fit, "model_choice", None)),
                   field_T=np.asarray(fit.field_T, dtype=float).copy(),
                   ic_A=np.asarray(fit.ic_A, dtype=float).copy())

    def numbers(self) -> dict:
        """The fitted numbers only (the ``FIT_KEYS``), as in a summary table row."""
        return {key: getattr(self, key) for key in FIT_KEYS}

    def __repr__(self) -> str:
        from .fmt import CURRENT_UNITS, FIELD_UNITS, measure

        if self.period_T is None:
            numbers = "numbers withheld" if self.withheld else "no period"
        else:
            numbers = (f"period {measure(self.period_T, self.period_stderr_T, FIELD_UNITS)}, "
                       f"Ic0 {measure(self.ic0_A, self.ic0_stderr_A, CURRENT_UNITS)}")
        return (f"FitResult({self.branch!r}, {self.model}, {numbers}, "
                f"points={self.points_used})")

    def to_dict(self) -> dict:
        out = plain(self.numbers())
        out["best_params"] = plain(self.best_params)
        out["extra_params"] = plain(self.extra_params)
        out["extra_stderr"] = plain(self.extra_stderr)
        out["derived"] = plain(self.derived)
        out["derived_stderr"] = plain(self.derived_stderr)
        out["withheld"] = plain(self.withheld)
        out["model_choice"] = plain(self.model_choice)
        out["points"] = {"field_T": plain(self.field_T), "ic_A": plain(self.ic_A)}
        return out

    @classmethod
    def from_dict(cls, data: dict) -> FitResult:
        points = data.get("points") or {}
        numbers = {k: data.get(k) for k in FIT_KEYS if k in data}
        return cls(**numbers, best_params=dict(data.get("best_params") or {}),
                   extra_params=dict(data.get("extra_params") or {}),
                   extra_stderr=dict(data.get("extra_stderr") or {}),
                   derived=dict(data.get("derived") or {}),
                   derived_stderr=dict(data.get("derived_stderr") or {}),
                   withheld=data.get("withheld"), model_choice=data.get("model_choice"),
                   field_T=np.asarray(points.get("field_T", []), dtype=float),
                   ic_A=np.asarray(points.get("ic_A", []), dtype=float))

    def model_A(self, field_T) -> np.ndarray:
        """The best-fit curve at ``field_T``; NaN when nothing was fitted, and for a fit
        withheld because the model misses the data (its trial parameters stay in
        ``best_params``, but a curve would suggest it fits)."""
        if not self.best_params or self.withheld:
            return np.full(np.shape(field_T), np.nan)
        from .physics.patterns import PATTERNS

        return PATTERNS[self.model](np.asarray(field_T, dtype=float), **self.best_params)

    def residual_A(self) -> np.ndarray:
        """Data minus the best-fit curve."""
        return self.ic_A - self.model_A(self.field_T)


def _flag_from_dict(data: dict) -> Flag:
    return Flag(data["code"], data["severity"], data.get("branch"), data["message"],
                dict(data.get("evidence") or {}))


@dataclass(eq=False)
class Result:
    """The analysis of one input: the JSON contract of ``analyze --json`` and ``result.json``.

    Attributes
    ----------
    input : dict
        Path, SHA-256, counts of points read, dropped and merged, metadata.
    fits : list of FitResult
        One per current branch, with the points fitted.
    flags : list of Flag
        Fit, extraction and diagnostic flags, each with its evidence.
    settings : Settings
        Every setting in force; ``settings.hash()`` keys the result.
    method : dict
        The fit method and its fixed thresholds.
    extraction, icrn, current_density, geometry : dict or None
        Present when the stage ran and had something to say.
    field_hysteresis : dict or None
        Up against down sweeps of the field (offset shift, period and Ic0
        ratios), when the sweep went both ways.
    provenance : dict
        Library versions and the command that reproduces the run.
    """

    input: dict
    fits: list
    flags: list
    settings: Settings
    method: dict = field(default_factory=dict)
    extraction: dict | None = None
    icrn: dict | None = None
    current_density: dict = field(default_factory=dict)
    geometry: dict | None = None
    provenance: dict = field(default_factory=dict)
    field_hysteresis: dict | None = None
    tool: dict = field(default_factory=lambda: {"name": "jjpattern", "version": __version__})
    generated_utc: str = field(default_factory=lambda: datetime.datetime.now(
        datetime.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"))
    #: The settings hash as computed when the analysis ran (a later tool version would
    #: compute another one for the same settings, since the version is part of it).
    settings_sha256: str = ""

    def __post_init__(self):
        if not self.settings_sha256:
            self.settings_sha256 = self.settings.hash()

    @property
    def metadata(self) -> dict:
        return self.input.get("metadata") or {}

    @property
    def title(self) -> str:
        """The junction's name from the metadata, else the input file name."""
        import os

        return str(self.metadata.get("junction")
                   or os.path.basename(str(self.input.get("path") or "")) or "junction")

    def fit(self, branch: str) -> FitResult:
        for f in self.fits:
            if f.branch == branch:
                return f
        raise KeyError(branch)

    def plot(self, title: str | None = None):
        """The pattern figure: data and fit of every branch above, residuals below.

        Returns a matplotlib ``Figure`` (save it with ``fig.savefig(path)``).
        """
        from .notebook import pattern_figure

        return pattern_figure(self.fits, self.title if title is None else title)

    def _repr_html_(self) -> str:
        """Jupyter's rich display: headline table, flags and the pattern figure inline."""
        from .notebook import result_html

        return result_html(self)

    def __repr__(self) -> str:
        fits = ", ".join(f"{f.branch}: {f.model}" for f in self.fits)
        return (f"Result({self.title!r}, fits=[{fits}], flags={len(self.flags)}, "
                f"settings_sha256={self.settings_sha256[:12]!r}...)")

    def to_dict(self) -> dict:
        """The JSON document as plain Python (keys in a fixed, readable order)."""
        doc = {
            "schema_version": SCHEMA_VERSION,
            "input": self.input,
            "fits": [f.to_dict() for f in self.fits],
            "flags": [f.to_dict() for f in self.flags],
            "tool": self.tool,
            "settings": self.settings.to_dict(),
            "settings_sha256": self.settings_sha256,
            "method": self.method,
            TIMESTAMP_KEY: self.generated_utc,
        }
        for key in ("extraction", "icrn", "current_density", "geometry", "field_hysteresis"):
            value = getattr(self, key)
            if value:
                doc[key] = value
        doc["provenance"] = self.provenance
        return plain(doc)

    def __eq__(self, other) -> bool:
        """Equal when the JSON documents are (the document is the contract; the fitted
        points and the reported fit's object ride along but are not compared)."""
        if not isinstance(other, Result):
            return NotImplemented
        return self.to_dict() == other.to_dict()

    __hash__ = None

    def to_json(self) -> str:
        """Readable, stable JSON text; floats are written so they read back exactly."""
        return json.dumps(self.to_dict(), indent=2, ensure_ascii=False, allow_nan=False)

    @classmethod
    def from_dict(cls, doc: dict) -> Result:
        from .errors import InputError

        version = doc.get("schema_version")
        if not isinstance(version, int) or "fits" not in doc or "input" not in doc:
            raise InputError("not a jjpattern result document (no schema_version, input or "
                             "fits); give the result.json written by jjpattern")
        if version > SCHEMA_VERSION:
            raise InputError(f"the result document has layout version {version}, newer than "
                             f"this jjpattern reads ({SCHEMA_VERSION}); upgrade jjpattern")
        known = {f.name for f in fields(cls)}
        return cls(
            input=doc["input"],
            fits=[FitResult.from_dict(f) for f in doc["fits"]],
            flags=[_flag_from_dict(f) for f in doc.get("flags", [])],
            settings=Settings.from_dict(doc.get("settings")),
            **{k: doc[k] for k in ("method", "extraction", "icrn", "geometry", "provenance",
                                   "tool", TIMESTAMP_KEY, "settings_sha256",
                                   "field_hysteresis")
               if k in doc and k in known},
            current_density={branch: _density_keys(d) for branch, d in
                             (doc.get("current_density") or {}).items()},
        )

    @classmethod
    def from_json(cls, text: str) -> Result:
        """Read a document written by :meth:`to_json`."""
        return cls.from_dict(json.loads(text))

    @classmethod
    def read(cls, path) -> Result:
        """Read ``result.json`` from a file, with a clear message when it is not one."""
        from .errors import InputError

        try:
            with open(path, encoding="utf-8") as handle:
                doc = json.load(handle)
        except OSError as exc:
            raise InputError(f"{path}: cannot be read ({exc.strerror})") from None
        except (UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise InputError(f"{path}: not valid JSON ({exc}); give a result.json written by "
                             "jjpattern") from None
        if not isinstance(doc, dict):
            raise InputError(f"{path}: not a jjpattern result document")
        try:
            return cls.from_dict(doc)
        except InputError as exc:
            raise InputError(f"{path}: {exc}") from None


#: Keys of the current density before they said they are over the mean (layout 1).
_OLD_DENSITY_KEYS = {"j": "j_over_mean", "j_low": "j_low_over_mean",
                     "j_high": "j_high_over_mean", "j_uniform": "j_uniform_over_mean"}


def _density_keys(d: dict) -> dict:
    """A current-density block with today's keys; an older document held J(x) in
    arbitrary units under ``j``, ``j_low``, ``j_high`` and ``j_uniform``."""
    if "j" not in d:
        return d
    import numpy as np

    x = np.asarray(d["x_over_length"], dtype=float)
    inside = np.abs(x) <= 0.5 + 1e-9

    def mean(j):
        value = float(np.trapezoid(np.asarray(j, dtype=float)[inside], x[inside]))
        return value if value > 0 else 1.0

    out = {k: v for k, v in d.items() if k not in _OLD_DENSITY_KEYS}
    for old, new in _OLD_DENSITY_KEYS.items():
        if d.get(old) is not None:
            scale = mean(d["j_uniform"] if old == "j_uniform" else d["j"])
            out[new] = [v / scale for v in d[old]]
    return out
