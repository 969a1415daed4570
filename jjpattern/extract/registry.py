"""Extraction criteria: one small class each, one line each in :data:`REGISTRY`.

A criterion says which maps it reads (voltage, dV/dI), what its threshold is
and how a user writes it, how it picks a level when none is given, what it
compares with the level over the map, how it locates the transition in a
row, and how the methods paragraph describes it.

The command-line parser reads the names here, so numpy, the unit tables (the
``io`` package loads numpy) and the map pieces (:mod:`.criteria`) are
imported inside the methods that use them.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import cached_property

from ..errors import InputError

#: Default voltage threshold in units of the zero-voltage-branch noise.
VOLTAGE_SIGMAS = 5.0
#: Default dV/dI threshold as a fraction of Rn.
DVDI_FRACTION = 0.5
#: Default V/I threshold as a fraction of Rn.
RESISTANCE_FRACTION = 0.05
#: The derivative the dV/dI criteria take of a voltage map (see criteria.differential).
DERIVATIVE = "Savitzky-Golay, quadratic, 7 points"

_SG = ("sg", "A. Savitzky and M. J. E. Golay, Anal. Chem. 36, 1627 (1964).")
_RSJ = ("rsj", "W. C. Stewart, Appl. Phys. Lett. 12, 277 (1968); D. E. McCumber, J. Appl. "
               "Phys. 39, 3113 (1968).")
_VOLT_NAMES = (("V", 1.0), ("mV", 1e-3), ("\u00b5V", 1e-6), ("nV", 1e-9))
_VALUE_UNIT = re.compile(r"^\s*(?P<value>[-+0-9.eE]+)\s*(?P<unit>[A-Za-z\u00b5\u03bc\u03a9]*)\s*$")


def _volts(value: float) -> str:
    """``'0.25 µV'``: three significant digits in the largest unit reading at least 0.1."""
    name, f = next(((n, f) for n, f in _VOLT_NAMES if abs(value) >= 0.1 * f), _VOLT_NAMES[-1])
    return f"{value / f:.3g} {name}"


@dataclass
class MapData:
    """What a criterion may use: the kept rows of a map and the engine's row statistics."""

    path: object
    kind: str  # "voltage" or "dvdi"
    signal: object  # (n_field, n_bias), bias in acquisition order
    bias_A: object
    offsets_V: object  # per row; zeros for dV/dI maps
    noise_V: float | None  # None for dV/dI maps
    rn_ohm: float | None
    #: True when the signal is known to hold no NaN (saves a pass over the map).
    dense: bool = False

    @cached_property
    def dvdi(self):
        """dV/dI over the map: measured, or differentiated here (the one new map-sized array)."""
        from . import criteria as cr

        return (self.signal if self.kind == "dvdi"
                else cr.differential(self.signal, self.bias_A, dense=self.dense))

    @cached_property
    def dvdi_where_read(self):
        """:attr:`dvdi` with the same numbers, differentiated only where it is read.

        For a dense voltage map with one bias row (:class:`.derivative.Derivative`):
        a search that stops at the transition then never differentiates the rest,
        and no map-sized array is written. A search that reads every point (the
        peak) is faster on :attr:`dvdi`, one convolution of the whole map.
        """
        from . import criteria as cr

        if (self.kind == "voltage" and self.dense and cr.shared(self.bias_A)
                and self.signal.shape[1] >= 7 and "dvdi" not in self.__dict__):
            from .derivative import Derivative

            return Derivative(self.signal, self.bias_A[0])
        return self.dvdi

    @cached_property
    def dvdi_noise_ohm(self) -> float:
        from . import criteria as cr

        return cr.zero_branch_noise(self.dvdi_where_read, self.bias_A)

    def need_rn(self, why: str) -> float:
        """Rn, or an :class:`InputError` ending with ``why`` when it could not be fitted."""
        if self.rn_ohm is None:
            raise InputError(f"{self.path}: Rn could not be fitted from the high-bias part; "
                             f"{why}")
        return self.rn_ohm


class Criterion:
    """One way to read Ic from an I-V curve: a quantity crossing a level.

    Subclasses set the class attributes and override what differs; the
    defaults describe a threshold crossing.
    """

    name = ""
    #: Map kinds it can read.
    signals = ("voltage", "dvdi")
    #: Map kinds for which ``auto`` means this criterion.
    auto_for = ()
    #: Unit of the threshold a user gives (``None``: the criterion takes none).
    threshold_unit = None
    #: An example of a threshold as written on the command line.
    threshold_example = ""
    #: Name of the onset shape in :data:`.onset.SHAPES` the crossing is read on
    #: (``None``: linear interpolation across the step).
    onset = None

    def parse_threshold(self, value: float, unit: str, where: str) -> float:
        """The threshold in SI from a number and the unit written after it."""
        raise InputError(f"{where}: the {self.name} criterion takes no threshold")

    def level(self, data: MapData, threshold: float | None) -> tuple[float | None, dict]:
        """The level and the JSON ``threshold`` block saying how it was chosen."""
        raise NotImplementedError

    def quantity(self, data: MapData):
        """The map-shaped quantity compared with the level."""
        raise NotImplementedError

    def quantity_noise(self, data: MapData) -> float | None:
        """Noise of one value of the quantity near the transition (``None``: not known)."""
        return None

    def locate(self, quantity, level, bias_A, candidates, upward: bool, noise=None):
        """``(current_A, found, unbracketed, uncertainty_A)`` per row among ``candidates``.

        ``noise`` is :meth:`quantity_noise`. An override may return the first three
        only; the engine then gives each row the local bias step / sqrt(12).
        """
        from . import search

        return search.crossing(level, quantity, bias_A, candidates, upward=upward,
                               shape=self.onset, noise=noise)

    def gaps_near_turns(self, kind: str) -> bool:
        """True when the quantity is NaN near the turns of the sweep even on a dense map."""
        return False

    def rule(self, threshold: dict) -> str:
        """The clause after "Critical currents were extracted from ... as"."""
        raise NotImplementedError

    def note(self, kind: str) -> tuple[str, dict]:
        """A further sentence for the methods paragraph and the references it cites."""
        return "", {}


class Voltage(Criterion):
    """|V - V0| above a voltage (by default 5 sigma of the zero-branch noise)."""

    name = "voltage"
    signals = ("voltage",)
    auto_for = ("voltage",)
    threshold_unit = "V"
    threshold_example = "2uV"
    onset = "rsj-voltage"

    def parse_threshold(self, value, unit, where):
        from ..io.units import VOLTAGE_UNIT_HELP, VOLTAGE_UNITS, normalise_unit

        if not unit:
            raise InputError(f"{where}: give the unit, e.g. {self.threshold_example}")
        if normalise_unit(unit) not in VOLTAGE_UNITS:
            raise InputError(f"{where}: the voltage criterion takes a voltage "
                             f"({VOLTAGE_UNIT_HELP}); for a dV/dI level choose "
                             "--criterion dvdi-threshold")
        return value * VOLTAGE_UNITS[normalise_unit(unit)]

    def level(self, data, threshold):
        if threshold is not None:
            level, how = float(threshold), "given"
        elif data.noise_V and math.isfinite(data.noise_V):
            level, how = VOLTAGE_SIGMAS * data.noise_V, f"{VOLTAGE_SIGMAS:g} x zero-branch noise"
        else:
            raise InputError(f"{data.path}: the zero-voltage noise could not be estimated; "
                             "give the threshold with --threshold")
        return level, {"value": level, "unit": "V", "chosen": how}

    def quantity(self, data):
        from . import criteria as cr

        return cr.Deviation(data.signal, data.offsets_V)

    def quantity_noise(self, data):
        return data.noise_V

    def rule(self, threshold):
        return (f"the first bias current, on sweeps away from zero bias, at which |V - V0| "
                f"exceeded {_volts(threshold['value'])} ({threshold['chosen']}), read on the "
                "square-root onset of the resistively shunted junction (V^2 linear in I^2 "
                "through the first three points above the level), or the middle of the "
                "bias step where the voltage jumps; the amplifier offset V0 was estimated "
                "in each field row as the median voltage near zero bias and removed")

    def note(self, kind):
        return (" Each critical current carries the bias step / sqrt(12) where the "
                "step is not resolved, and otherwise the voltage noise propagated through "
                "that line [rsj].", dict([_RSJ]))


class Resistance(Criterion):
    """V/I above a fraction of Rn (by default 0.05), voltages inside the noise ignored."""

    name = "resistance"
    signals = ("voltage",)
    threshold_unit = "fraction of Rn"
    threshold_example = "0.05"
    onset = "rsj-resistance"

    def parse_threshold(self, value, unit, where):
        if unit:
            raise InputError(f"{where}: for the resistance criterion give a fraction of Rn "
                             "without a unit, e.g. 0.05")
        return value

    def level(self, data, threshold):
        rn = data.need_rn("give --threshold")
        frac = RESISTANCE_FRACTION if threshold is None else float(threshold)
        return frac * rn, {"value": frac * rn, "unit": "ohm", "fraction_of_rn": frac,
                           "voltage_floor_V": self._floor(data),
                           "chosen": "given" if threshold is not None else "default"}

    @staticmethod
    def _floor(data):
        # V/I is pure noise near zero bias: only voltages above the noise count.
        return VOLTAGE_SIGMAS * data.noise_V

    def quantity(self, data):
        import numpy as np

        floor = self._floor(data)
        ratio = np.subtract(data.signal, data.offsets_V[:, None])  # the one full copy
        quiet = (ratio <= floor) & (ratio >= -floor)
        with np.errstate(all="ignore"):
            np.divide(ratio, data.bias_A, out=ratio)
        ratio[quiet] = 0.0
        return ratio

    def rule(self, threshold):
        return (f"the first bias current at which V/I exceeded {threshold['fraction_of_rn']:g} "
                "Rn, with Rn from a linear fit of the high-bias part of each I-V curve, read "
                "on the onset of the resistively shunted junction ((V/I)^2 linear in 1/I^2 "
                "through the first three points above the level)")


class _Derivative(Criterion):
    """Reads dV/dI, measured or taken here from a voltage map."""

    def quantity(self, data):
        return data.dvdi

    def gaps_near_turns(self, kind):
        return kind == "voltage"

    def note(self, kind):
        if kind != "voltage":
            return "", {}
        return (" dV/dI was computed with a 7-point quadratic Savitzky-Golay derivative "
                f"[{_SG[0]}].", dict([_SG]))


class DvdiThreshold(_Derivative):
    """dV/dI above a level (by default the larger of Rn/2 and 5 sigma of its noise)."""

    name = "dvdi-threshold"
    threshold_unit = "ohm"
    threshold_example = "5Ohm"

    def quantity(self, data):
        # The search stops at the first point above the level: differentiate only there.
        return data.dvdi_where_read

    def parse_threshold(self, value, unit, where):
        from ..io.units import resistance_factor

        if not unit:
            raise InputError(f"{where}: give the unit, e.g. {self.threshold_example}")
        return value * resistance_factor(unit, where)

    def level(self, data, threshold):
        if threshold is not None:
            return float(threshold), {"value": float(threshold), "unit": "ohm",
                                      "chosen": "given"}
        rn = data.need_rn("give --threshold")
        noise = data.dvdi_noise_ohm
        # Half of Rn, but never inside the noise of dV/dI on the supercurrent branch.
        level = max(DVDI_FRACTION * rn, VOLTAGE_SIGMAS * noise)
        return level, {"value": level, "unit": "ohm", "dvdi_noise_ohm": noise,
                       "chosen": f"larger of {DVDI_FRACTION:g} x Rn and "
                                 f"{VOLTAGE_SIGMAS:g} x dV/dI noise"}

    def rule(self, threshold):
        return f"the first bias current at which dV/dI exceeded {threshold['value']:.3g} ohm"


class DvdiPeak(_Derivative):
    """The largest dV/dI, refined by a parabola through 3 points; no threshold."""

    name = "dvdi-peak"
    auto_for = ("dvdi",)

    def level(self, data, threshold):
        return None, {"value": None, "unit": "ohm", "chosen": "largest dV/dI",
                      "derivative": "measured" if data.kind == "dvdi" else DERIVATIVE}

    def locate(self, quantity, level, bias_A, candidates, upward, noise=None):
        import numpy as np

        from . import criteria as cr
        from . import search

        current, found, edge, spread = search.peak(quantity, bias_A, candidates)
        if cr.shared(bias_A) and candidates.strides == (0, 0):
            top = np.full(quantity.shape[0], np.max(np.abs(bias_A[0]), initial=-1.0))
        else:
            top = np.max(np.where(candidates, np.abs(bias_A), -1.0), axis=1, initial=-1.0)
        at_top = edge & np.isclose(current, top)
        # A peak on the largest |I| never came inside the window: censored above, not "ok".
        return current, found & ~at_top, edge & ~at_top, spread

    def rule(self, threshold):
        return "the bias current of the largest dV/dI, refined by a parabola through 3 points"


#: Every criterion by name, in the order the command line lists them.
REGISTRY = {
    "voltage": Voltage,
    "dvdi-peak": DvdiPeak,
    "dvdi-threshold": DvdiThreshold,
    "resistance": Resistance,
}


def criterion_names(auto: bool = True) -> tuple[str, ...]:
    """The names a user may give (``auto`` first unless ``auto=False``)."""
    return (("auto",) if auto else ()) + tuple(REGISTRY)


def get_criterion(name: str) -> Criterion:
    """The criterion called ``name``; an unknown name is an :class:`InputError`."""
    if name not in REGISTRY:
        raise InputError(f"unknown criterion {name!r}; use one of "
                         f"{', '.join(criterion_names())}")
    return REGISTRY[name]()


def resolve(name: str, kind: str, path=None) -> Criterion:
    """The criterion for a map of ``kind``: ``auto`` picked, and checked that it applies."""
    if name == "auto":
        name = next((n for n, c in REGISTRY.items() if kind in c.auto_for), None)
        if name is None:
            raise InputError(f"{path}: no criterion reads a {kind!r} map")
    crit = get_criterion(name)
    if kind not in crit.signals:
        usable = [n for n, c in REGISTRY.items() if kind in c.signals]
        what = "dV/dI" if kind == "dvdi" else kind
        raise InputError(f"{path}: the map holds {what}, so the {name} criterion cannot be "
                         f"used; choose {' or '.join(usable)}")
    return crit


def check_threshold(crit: Criterion, threshold: float | None) -> None:
    """A given threshold must be a positive number and the criterion must take one."""
    if threshold is None:
        return
    if crit.threshold_unit is None:
        raise InputError(f"the {crit.name} criterion takes no threshold; leave it out")
    try:
        value = float(threshold)
    except (TypeError, ValueError):
        value = math.nan
    if not (math.isfinite(value) and value > 0):
        raise InputError(f"threshold {threshold!r}: give a positive {crit.threshold_unit}, "
                         f"e.g. {crit.threshold_example}")


def parse_threshold(text: str | None, criterion: str) -> float | None:
    """A user's ``--threshold`` in SI for ``criterion``: ``'2uV'``, ``'5Ohm'``, ``'0.05'``.

    ``auto`` reads it as the voltage criterion does (``auto`` on a dV/dI map
    is the peak, which takes none).
    """
    if text is None:
        return None
    crit = get_criterion("voltage" if criterion == "auto" else criterion)
    where = f"--threshold {text!r}"
    match = _VALUE_UNIT.match(text)
    if not match:
        raise InputError(f"{where}: write a number with its unit, e.g. 2uV or 5Ohm")
    try:
        value = float(match.group("value"))
    except ValueError:
        raise InputError(f"{where}: {match.group('value')!r} is not a number") from None
    value = crit.parse_threshold(value, match.group("unit"), where)
    if not (math.isfinite(value) and value > 0):
        raise InputError(f"{where}: the threshold must be a positive number")
    return value
