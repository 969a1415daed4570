"""Units read from column headers and attributes, converted to SI at the edge."""

from __future__ import annotations

import re

from ..errors import InputError

#: Factor to tesla. Oersted is taken as mu0*H, for which 1 Oe corresponds to 1e-4 T.
FIELD_UNITS = {
    "t": 1.0, "mt": 1e-3, "ut": 1e-6, "nt": 1e-9,
    "g": 1e-4, "kg": 0.1, "mg": 1e-7, "oe": 1e-4, "koe": 0.1,
}
#: Factor to ampere.
CURRENT_UNITS = {"a": 1.0, "ma": 1e-3, "ua": 1e-6, "na": 1e-9, "pa": 1e-12}

FIELD_UNIT_HELP = "T, mT, uT, nT, G or Oe"
CURRENT_UNIT_HELP = "A, mA, uA, nA or pA"

_MICRO = str.maketrans({"\u00b5": "u", "\u03bc": "u"})
_BRACKETED = re.compile(r"^(?P<name>.*?)\s*[\(\[](?P<unit>[^\)\]]*)[\)\]]\s*$")
_SUFFIX = re.compile(r"^(?P<name>.+?)[_ ](?P<unit>[A-Za-z\u00b5\u03bc]{1,3})$")


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
    known = known_units if known_units is not None else {**FIELD_UNITS, **CURRENT_UNITS}
    if match and normalise_unit(match.group("unit")) in known:
        return match.group("name").strip(), match.group("unit")
    return text, None


def factor(unit: str, table: dict, what: str, where: str, help_text: str, option: str) -> float:
    """Conversion factor to SI for ``unit``, or an :class:`InputError` saying what to use."""
    key = normalise_unit(unit)
    if key not in table:
        raise InputError(
            f"{where}: unknown {what} unit {unit!r}; use {help_text}, or pass {option}"
        )
    return table[key]


def field_factor(unit: str, where: str) -> float:
    """Factor that converts a field in ``unit`` to tesla."""
    return factor(unit, FIELD_UNITS, "field", where, FIELD_UNIT_HELP, "--field-unit")


def current_factor(unit: str, where: str) -> float:
    """Factor that converts a current in ``unit`` to ampere."""
    return factor(unit, CURRENT_UNITS, "current", where, CURRENT_UNIT_HELP, "--current-unit")
