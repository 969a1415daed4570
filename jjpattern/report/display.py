"""Numbers for people: SI values shown in the unit a physicist would pick, with uncertainty."""

from __future__ import annotations

import math

FIELD_UNITS = (("T", 1.0), ("mT", 1e-3), ("µT", 1e-6), ("nT", 1e-9))
CURRENT_UNITS = (("A", 1.0), ("mA", 1e-3), ("µA", 1e-6), ("nA", 1e-9), ("pA", 1e-12))
VOLTAGE_UNITS = (("V", 1.0), ("mV", 1e-3), ("µV", 1e-6), ("nV", 1e-9))
AREA_UNITS = (("m²", 1.0), ("mm²", 1e-6), ("µm²", 1e-12), ("nm²", 1e-18))


def pick_unit(magnitude: float, units) -> tuple[str, float]:
    """The largest unit in which ``magnitude`` reads at least 0.1 (0.731 mT, not 731 µT)."""
    for name, factor in units:
        if magnitude >= 0.1 * factor:
            return name, factor
    return units[-1]


def format_measure(value, stderr, units, unit=None, digits=4) -> str:
    """``'0.73090 ± 0.00035 mT'``: the error to two significant digits, the value to match.

    ``None`` prints as ``'not determined'``; a value without error keeps
    ``digits`` significant digits.
    """
    if value is None:
        return "not determined"
    name, factor = unit or pick_unit(abs(value), units)
    v = value / factor
    if stderr is None or not math.isfinite(stderr) or stderr <= 0:
        return f"{v:.{digits}g} {name}"
    e = stderr / factor
    decimals = max(0, 1 - int(math.floor(math.log10(e))))
    return f"{v:.{decimals}f} ± {e:.{decimals}f} {name}"


LENGTH_UNITS = (("m", 1.0), ("mm", 1e-3), ("µm", 1e-6), ("nm", 1e-9))


def format_si_key(key: str, value, stderr=None) -> str:
    """A derived number shown by the unit in its key (``_m``, ``_T``, ``_A_m2``)."""
    if not isinstance(value, (int, float)) or isinstance(value, bool):
        return str(value)
    if key.endswith("_A_m2"):
        units = (("kA/cm²", 1e7),)
    elif key.endswith("_m"):
        units = (next(((n, f) for n, f in LENGTH_UNITS if abs(value) >= f), LENGTH_UNITS[-1]),)
    elif key.endswith("_T"):
        units = (pick_unit(abs(value), FIELD_UNITS),)
    else:
        units = (("", 1.0),)
    return format_measure(value, stderr, units, units[0]).strip()


def derived_rows(block: dict) -> list:
    """``(name, text)`` for every derived number of a geometry block, errors folded in."""
    from ..result import stderr_key

    rows = []
    for key, value in block.items():
        if key in ("inputs", "branch") or "_stderr" in key:
            continue
        name = key.removesuffix("_A_m2").removesuffix("_m").removesuffix("_T")
        rows.append((name.replace("_", " "), format_si_key(key, value,
                                                           block.get(stderr_key(key)))))
    return rows
