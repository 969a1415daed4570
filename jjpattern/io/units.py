"""Units read from column headers and attributes, converted to SI at the edge."""

from __future__ import annotations

import re

from ..errors import InputError
from .limits import clip

#: Factor to tesla. Oersted is taken as mu0*H, for which 1 Oe corresponds to 1e-4 T.
FIELD_UNITS = {
    "t": 1.0, "mt": 1e-3, "ut": 1e-6, "nt": 1e-9,
    "g": 1e-4, "kg": 0.1, "mg": 1e-7, "oe": 1e-4, "koe": 0.1,
}
#: Factor to ampere.
CURRENT_UNITS = {"a": 1.0, "ma": 1e-3, "ua": 1e-6, "na": 1e-9, "pa": 1e-12}

#: Factor to volt.
VOLTAGE_UNITS = {"v": 1.0, "mv": 1e-3, "uv": 1e-6, "nv": 1e-9}
#: Factor to ohm (differential resistance dV/dI).
RESISTANCE_UNITS = {"ohm": 1.0, "\u03c9": 1.0, "kohm": 1e3, "k\u03c9": 1e3, "mohm": 1e-3,
                    "m\u03c9": 1e-3, "v/a": 1.0}

FIELD_UNIT_HELP = "T, mT, uT, nT, G or Oe"
CURRENT_UNIT_HELP = "A, mA, uA, nA or pA"
VOLTAGE_UNIT_HELP = "V, mV, uV or nV"
RESISTANCE_UNIT_HELP = "Ohm, kOhm or mOhm"
#: What each unit option names: the units it takes, their kind, and the list shown.
_OPTION_UNITS = {
    "--field-unit": (FIELD_UNITS, "field", FIELD_UNIT_HELP),
    "--current-unit": (CURRENT_UNITS, "current", CURRENT_UNIT_HELP),
    "--signal-unit": ({**VOLTAGE_UNITS, **RESISTANCE_UNITS}, "voltage or dV/dI",
                      f"{VOLTAGE_UNIT_HELP}, or {RESISTANCE_UNIT_HELP} for dV/dI"),
}

_MICRO = str.maketrans({"\u00b5": "u", "\u03bc": "u"})
_BRACKETED = re.compile(r"^(?P<name>.*?)\s*[\(\[](?P<unit>[^\)\]]*)[\)\]]\s*$")
_SUFFIX = re.compile(r"^(?P<name>.+?)[_ ](?P<unit>[A-Za-z\u00b5\u03bc\u03a9]{1,4})$")
_COIL = re.compile(r"^\s*(?P<value>[-+0-9.eE]+)\s*(?P<field>[A-Za-z\u00b5\u03bc]+)\s*/\s*"
                   r"(?P<current>[A-Za-z\u00b5\u03bc]+)\s*$")


def normalise_unit(text: str) -> str:
    """Lower-case a unit and spell micro as ``u`` (accepts both Unicode micro signs)."""
    return text.strip().translate(_MICRO).lower()


def split_header(header: str, known_units=None) -> tuple[str, str | None]:
    """Split ``'B (mT)'``, ``'B [mT]'`` or ``'B_mT'`` into name and unit.

    The underscore form only counts when the suffix is a known unit, so that a
    name such as ``ic_pos`` keeps its suffix.
    """
    text = header.strip()
    match = _BRACKETED.match(text)
    if match and match.group("name"):
        return match.group("name").strip(), match.group("unit").strip()
    match = _SUFFIX.match(text)
    known = known_units if known_units is not None else {
        **FIELD_UNITS, **CURRENT_UNITS, **VOLTAGE_UNITS, **RESISTANCE_UNITS}
    if match and normalise_unit(match.group("unit")) in known:
        return match.group("name").strip(), match.group("unit")
    return text, None


def factor(unit: str, table: dict, what: str, where: str, help_text: str, option: str) -> float:
    """Conversion factor to SI for ``unit``, or an :class:`InputError` saying what to use."""
    key = normalise_unit(unit)
    if key not in table:
        raise InputError(
            f"{where}: unknown {what} unit {clip(unit)}; use {help_text}, or pass {option}"
        )
    return table[key]


def given_unit(given, found, where: str, option: str, coil: bool = False):
    """The unit a column is read in: ``given`` by ``option`` when set, else ``found`` in
    the file (header, units row or attribute); ``None`` when neither is there.

    A unit given by an option that the file contradicts (``--field-unit G`` on ``B (mT)``)
    is refused rather than obeyed: a factor of ten in the period is too quiet a mistake.
    ``coil`` says the field column holds a magnet current (``--coil-constant``).
    """
    if not given:
        return found
    table, what, help_text = _OPTION_UNITS[option]
    if coil and option == "--field-unit":
        table, what, help_text = CURRENT_UNITS, "magnet-current", CURRENT_UNIT_HELP
    key = normalise_unit(given)
    if key not in table:
        raise InputError(f"{option} {clip(given)}: not a {what} unit; use {help_text}")
    had = normalise_unit(found) if found else None
    if had in table and table[had] != table[key]:
        # Both are known units here, short enough to show as they are.
        raise InputError(f"{where} is in {found.strip()} by the file, but {option} says "
                         f"{given.strip()}; leave {option} out to read {found.strip()}, or "
                         f"correct the unit in the file if the values are in {given.strip()}")
    return given


def field_factor(unit: str, where: str) -> float:
    """Factor that converts a field in ``unit`` to tesla."""
    return factor(unit, FIELD_UNITS, "field", where, FIELD_UNIT_HELP, "--field-unit")


def current_factor(unit: str, where: str) -> float:
    """Factor that converts a current in ``unit`` to ampere."""
    return factor(unit, CURRENT_UNITS, "current", where, CURRENT_UNIT_HELP, "--current-unit")


def voltage_factor(unit: str, where: str) -> float:
    """Factor that converts a voltage in ``unit`` to volt."""
    return factor(unit, VOLTAGE_UNITS, "voltage", where, VOLTAGE_UNIT_HELP, "--signal-unit")


def resistance_factor(unit: str, where: str) -> float:
    """Factor that converts a differential resistance in ``unit`` to ohm."""
    return factor(unit, RESISTANCE_UNITS, "resistance", where, RESISTANCE_UNIT_HELP,
                  "--signal-unit")


def coil_constant_T_per_A(text: str) -> float:
    """Parse a magnet coil constant such as ``'2.5mT/A'``, ``'25 G/A'`` or ``'0.1 T/mA'``."""
    match = _COIL.match(text or "")
    where = f"--coil-constant {clip(text)}"
    if not match:
        raise InputError(f"{where}: write it as a number, a field unit, '/' and a current "
                         "unit, e.g. 2.5mT/A")
    try:
        value = float(match.group("value"))
    except ValueError:
        raise InputError(f"{where}: {clip(match.group('value'))} is not a number") from None
    per = field_factor(match.group("field"), where) / current_factor(match.group("current"),
                                                                    where)
    if not value > 0:
        raise InputError(f"{where}: the coil constant must be positive")
    return value * per


_VALUE_UNIT = re.compile(r"^\s*(?P<value>[-+0-9.eE]+)\s*(?P<unit>[A-Za-z\u00b5\u03bc\u03a9]*)\s*$")


def parse_field_interval(text: str, option: str) -> tuple[float | None, float | None]:
    """A field interval ``'LO:HI'`` in tesla: ``'-2:2mT'``, ``'-2mT:2.5mT'``, ``':1G'``.

    A unit written on one end only applies to both; an empty end is open
    (``None``). ``option`` names the command-line option in messages.
    """
    where = f"{option} {clip(text)}"
    parts = str(text).split(":")
    if len(parts) != 2 or not (parts[0].strip() or parts[1].strip()):
        raise InputError(f"{where}: write it as LO:HI with a field unit, e.g. -2:2mT or "
                         "-2mT:0.5mT (leave one end empty for an open interval)")
    ends = []
    for part in parts:
        part = part.strip()
        if not part:
            ends.append((None, ""))
            continue
        match = _VALUE_UNIT.match(part)
        try:
            value = float(match.group("value")) if match else None
        except ValueError:
            value = None
        if value is None:
            raise InputError(f"{where}: {clip(part)} is not a number with a field unit; write "
                             "e.g. -2:2mT")
        ends.append((value, match.group("unit")))
    units = {u for _, u in ends if u}
    if not units:
        raise InputError(f"{where}: give the field unit, e.g. -2:2mT ({FIELD_UNIT_HELP})")
    shared = units.pop() if len(units) == 1 else None  # two units: each end has its own
    lo, hi = (None if value is None else value * field_factor(unit or shared, where)
              for value, unit in ends)
    if lo is not None and hi is not None and not lo < hi:
        raise InputError(f"{where}: the low end must be below the high end")
    return lo, hi
