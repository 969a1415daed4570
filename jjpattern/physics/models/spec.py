"""What a pattern model is: one frozen record, checked for structure when it is made.

This module imports neither numpy nor scipy, so that the command line can list the
models (names and descriptions) without loading them.
"""

from __future__ import annotations

import inspect
import math
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

#: Parameters every formula takes after ``field_T``, in this order, with numeric defaults
#: (the defaults 1, 1, 0, 0 make ``formula(u)`` the unit-height pattern of ``u``).
BASE_PARAMETERS = ("ic0_A", "period_T", "field_offset_T", "floor_A")
#: Names the fit layer adds to every model; an extra parameter may not take them.
RESERVED = frozenset(BASE_PARAMETERS) | {"field_T", "phi0_Wb", "effective_area_m2"}
_NAME = re.compile(r"^[a-z][a-z0-9]*(-[a-z0-9]+)*$")


class Citations(Mapping):
    """Read-only ``key -> citation`` (unlike a mappingproxy, it pickles)."""

    def __init__(self, items=()):
        self._items = dict(items)

    def __getitem__(self, key):
        return self._items[key]

    def __iter__(self):
        return iter(self._items)

    def __len__(self):
        return len(self._items)

    def __repr__(self):
        return f"Citations({self._items!r})"


@dataclass(frozen=True)
class ExtraParameter:
    """A fitted parameter beyond the four every pattern has.

    Attributes
    ----------
    name : str
        Keyword argument of the formula; carries its unit like every name
        (dimensionless numbers such as ``asymmetry`` have none).
    start : float
        Starting value of the local fit.
    min, max : float
        Bounds handed to lmfit. Leave them open where the formula is even in the
        parameter (set ``even``): lmfit's bound transforms cost precision and
        the magnitude is reported anyway.
    even : bool
        The pattern is even in this parameter, so its magnitude is reported.
    description : str
        One line for people: what the parameter means.
    grid : tuple of float
        Values tried when starting the local fit, for a parameter that changes
        the shape of the pattern (the length of a long junction): at each, the
        period found by the scan is rescaled so that the first node stays put.
        Empty: start at ``start`` only.
    limit : float
        Largest magnitude the model describes (a table's end). A fit that runs to
        within 2 % of it is not a fit of this model: the automatic choice leaves
        the model out and a forced fit withholds its numbers.
    """

    name: str
    start: float
    min: float = -math.inf
    max: float = math.inf
    even: bool = False
    description: str = ""
    grid: tuple[float, ...] = ()
    limit: float = math.inf

    def at_limit(self, value) -> bool:
        """``value`` lies at (or beyond) the end of the range the model describes."""
        return abs(float(value)) >= 0.98 * self.limit


@dataclass(frozen=True, eq=False)
class PatternModelSpec:
    """Everything a closed-form pattern model is; one file per model builds one.

    Attributes
    ----------
    name : str
        Lower case with hyphens (``"two-channel"``): the ``--geometry`` choice, the
        ``model`` value in the results and the key of the registry.
    formula : callable
        ``formula(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0,
        <extra>=...)`` -> critical current (A), vectorised over ``field_T`` (T): peak
        ``ic0_A`` at ``field_offset_T``, even about it, the floor combined in
        quadrature, ``sqrt(Ic^2 + floor^2)``. Each extra parameter is a named
        keyword argument with a numeric default, not ``**kwargs`` (lmfit reads the
        signature).
    node_flux : callable
        ``node_flux(count)`` -> the first ``count`` nodes on one side of the centre,
        in units of the flux quantum (reduced flux ``u = (B - B0) / period``). Where
        the nodes move with an extra parameter, ``node_flux`` takes it as a keyword
        argument too (the minima of a long junction's pattern move with its length).
    description : str
        One line for the command-line help.
    methods_text : str
        The noun phrase the methods paragraph uses ("the Fraunhofer pattern of ...,
        Ic(B) = ..."); the paragraph cites every entry of ``references`` after it.
    references : mapping
        Citation key -> full citation text.
    extra : tuple of ExtraParameter
        Parameters beyond ``BASE_PARAMETERS``.
    periodic : bool
        The pattern repeats without decay: no main lobe to locate, the offset is
        only defined modulo a period and no node floor is tried.
    unit_shape : callable, optional
        Unit-height pattern of ``u`` that the global scan slides along the data;
        by default the formula at its defaults, ``formula(u)``.
    central_peak : bool
        The pattern peaks (at ``ic0_A``) at the offset. ``False`` for a pattern with
        a minimum there (a 0-pi junction): ``ic0_A`` is then the scale that
        ``methods_text`` defines and the pattern stays below it.
    derive : callable, optional
        ``derive(params) -> dict``: numbers this model derives from its fitted
        parameters (``params`` holds the formula's keyword arguments), each key
        carrying its unit (``jc_times_area_A``); reported with standard errors.
    ic0_meaning : str
        What ``ic0_A`` is for this model, one line for the reports (empty: the
        critical current at the centre of the pattern).
    gradient : callable, optional
        ``gradient(field_T, <the formula's parameters>) -> dict``: the partial
        derivative of the formula by each parameter, arrays shaped like ``field_T``
        (the fit's analytic Jacobian). Without it the fit differentiates numerically.
    """

    name: str
    formula: Callable
    node_flux: Callable
    description: str
    methods_text: str
    references: Mapping[str, str] = field(default_factory=dict)
    extra: tuple[ExtraParameter, ...] = ()
    periodic: bool = False
    unit_shape: Callable | None = None
    central_peak: bool = True
    derive: Callable | None = None
    ic0_meaning: str = ""
    gradient: Callable | None = None

    def __post_init__(self):
        problems = structure_problems(self)
        if problems:
            raise ValueError(f"pattern model {self.name!r}: {'; '.join(problems)}")
        # Frozen: a copy of the references that nobody can change afterwards.
        object.__setattr__(self, "references", Citations(self.references))
        object.__setattr__(self, "extra", tuple(self.extra))
        if self.unit_shape is None:
            object.__setattr__(self, "unit_shape", self.formula)
        # The keywords node_flux accepts, read once (nodes() is called inside the fits).
        try:
            accepted = frozenset(inspect.signature(self.node_flux).parameters)
        except (TypeError, ValueError):
            accepted = frozenset()
        object.__setattr__(self, "_node_keywords", accepted)

    def parameter_names(self) -> tuple[str, ...]:
        """The fitted parameters: the four of every pattern, then the extras."""
        return BASE_PARAMETERS + tuple(p.name for p in self.extra)

    def nodes(self, count: int, extras: Mapping | None = None):
        """``node_flux(count)``, with the extra parameters it takes (by keyword)."""
        extras = extras or {}
        accepted = self._node_keywords
        return self.node_flux(count, **{k: v for k, v in extras.items() if k in accepted})


def _one_line(text) -> bool:
    return isinstance(text, str) and bool(text.strip()) and "\n" not in text


def _signature_problems(formula, extra) -> list[str]:
    try:
        params = inspect.signature(formula).parameters
    except (TypeError, ValueError):
        return ["formula has no readable signature"]
    problems = []
    if any(p.kind in (p.VAR_POSITIONAL, p.VAR_KEYWORD) for p in params.values()):
        return ["formula may not take *args or **kwargs (lmfit reads the signature): name "
                "each extra parameter as a keyword argument"]
    names = list(params)
    if not names or names[0] != "field_T":
        problems.append("formula's first argument must be field_T")
    if names[1:5] != list(BASE_PARAMETERS):
        problems.append(f"formula must take {', '.join(BASE_PARAMETERS)} after field_T")
    for p in extra:
        if p.name not in params:
            problems.append(f"formula has no keyword argument {p.name!r} for the extra "
                            "parameter (lmfit reads the signature, not **kwargs)")
    declared = set(BASE_PARAMETERS) | {p.name for p in extra}
    for name in names[1:]:
        if name not in declared:
            problems.append(f"formula argument {name!r} is not a declared extra parameter")
        default = params[name].default
        if not isinstance(default, (int, float)) or isinstance(default, bool):
            problems.append(f"formula argument {name!r} needs a numeric default")
    return problems


def structure_problems(spec: PatternModelSpec) -> list[str]:
    """What is wrong with a spec's structure (no numerics; see ``check.check_model``)."""
    problems = []
    if not (isinstance(spec.name, str) and _NAME.match(spec.name)):
        problems.append("name must be lower case letters, digits and single hyphens")
    for key in ("formula", "node_flux"):
        if not callable(getattr(spec, key)):
            problems.append(f"{key} must be callable")
    if spec.unit_shape is not None and not callable(spec.unit_shape):
        problems.append("unit_shape must be callable or None")
    if spec.derive is not None and not callable(spec.derive):
        problems.append("derive must be callable or None")
    if spec.gradient is not None and not callable(spec.gradient):
        problems.append("gradient must be callable or None")
    if not isinstance(spec.ic0_meaning, str) or "\n" in spec.ic0_meaning:
        problems.append("ic0_meaning must be one line")
    for key in ("description", "methods_text"):
        if not _one_line(getattr(spec, key)):
            problems.append(f"{key} must be one non-empty line")
    if not isinstance(spec.references, Mapping) or not all(
            isinstance(k, str) and _one_line(v) for k, v in spec.references.items()):
        problems.append("references must map keys to one-line citations")
    names = [p.name for p in spec.extra if isinstance(p, ExtraParameter)]
    if len(names) != len(tuple(spec.extra)):
        problems.append("extra must hold ExtraParameter records")
    elif len(set(names)) != len(names) or RESERVED & set(names) or not all(
            n.isidentifier() for n in names):
        problems.append(f"extra parameter names must be distinct identifiers outside "
                        f"{', '.join(sorted(RESERVED))}")
    elif callable(spec.formula):
        problems += _signature_problems(spec.formula, spec.extra)
    return problems
