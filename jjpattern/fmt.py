"""Numbers written for people and for files, in one place.

Every text the tool shows (summary, HTML, methods paragraph, ``extract``) writes a
value with :func:`measure`: the uncertainty to two significant digits and the value
rounded to the same decimal (common practice), in a unit with an SI prefix picked
per quantity. CSV files use :func:`csv_number`.
"""

from __future__ import annotations

import math
import os

FIELD_UNITS = (("T", 1.0), ("mT", 1e-3), ("µT", 1e-6), ("nT", 1e-9))
CURRENT_UNITS = (("A", 1.0), ("mA", 1e-3), ("µA", 1e-6), ("nA", 1e-9), ("pA", 1e-12))
VOLTAGE_UNITS = (("V", 1.0), ("mV", 1e-3), ("µV", 1e-6), ("nV", 1e-9))
AREA_UNITS = (("m²", 1.0), ("mm²", 1e-6), ("µm²", 1e-12), ("nm²", 1e-18))
LENGTH_UNITS = (("m", 1.0), ("mm", 1e-3), ("µm", 1e-6), ("nm", 1e-9))
RESISTANCE_UNITS = (("MΩ", 1e6), ("kΩ", 1e3), ("Ω", 1.0), ("mΩ", 1e-3))
DENSITY_UNITS = (("MA/cm²", 1e10), ("kA/cm²", 1e7), ("A/cm²", 1e4), ("mA/cm²", 10.0))
ENERGY_UNITS = (("meV", 1.602176634e-22), ("µeV", 1.602176634e-25))
PLAIN = (("", 1.0),)

#: Unit of a key, by its SI suffix token (``period_T``, ``ic0_A_positive``).
KEY_UNITS = {"T": FIELD_UNITS, "A": CURRENT_UNITS, "V": VOLTAGE_UNITS, "m2": AREA_UNITS,
             "m": LENGTH_UNITS, "ohm": RESISTANCE_UNITS, "A_m2": DENSITY_UNITS,
             "J": ENERGY_UNITS, "K": (("K", 1.0), ("mK", 1e-3)), "s": (("s", 1.0),
                                                                     ("ms", 1e-3))}


def pick_unit(magnitude: float, units) -> tuple[str, float]:
    """The largest unit in which ``magnitude`` reads at least 0.1 (0.731 mT, not 731 µT)."""
    if not magnitude or not math.isfinite(magnitude):
        # Zero has no scale of its own: the base unit, or the one nearest to 1.
        return min(units, key=lambda u: abs(math.log10(u[1])))
    # Lengths and current densities read best from 1 up (300 nm, 33 A/cm²), fields,
    # currents and voltages from 0.1 up (0.73 mT).
    least = 1.0 if units in (LENGTH_UNITS, DENSITY_UNITS, RESISTANCE_UNITS) else 0.1
    for name, factor in units:
        if magnitude >= least * factor:
            return name, factor
    return units[-1]


def fixed(value: float, decimals: int) -> str:
    """``value`` with ``decimals`` decimals, never ``-0.000``."""
    text = f"{value:.{decimals}f}"
    # -0.000 after rounding is a zero, not a negative number.
    return text[1:] if text.startswith("-") and float(text) == 0 else text


def measure(value, stderr=None, units=PLAIN, unit=None, digits=4) -> str:
    """``'0.73090 ± 0.00035 mT'``: the error to two significant digits, the value to match.

    ``None`` prints as ``'not determined'``; a value without error keeps ``digits``
    significant digits. ``unit`` fixes the unit (so that a table column shares one).
    """
    if value is None:
        return "not determined"
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return str(value)
    if isinstance(value, int) and unit is None and units == PLAIN:
        return str(value)  # a count
    value = float(value)
    if not math.isfinite(value):
        return "not finite"
    name, factor = unit or pick_unit(abs(value), units)
    v = value / factor
    if stderr is None or not math.isfinite(stderr) or stderr <= 0:
        return f"{v:.{digits}g} {name}".strip()
    e = stderr / factor
    decimals = max(0, 1 - int(math.floor(math.log10(e))))
    return f"{fixed(v, decimals)} ± {fixed(e, decimals)} {name}".strip()


def key_unit(key: str):
    """``(name, units)`` of a key with its SI unit in it: ``'ic0_A_positive'`` gives
    ``('ic0 positive', CURRENT_UNITS)``; a key without a unit gives ``PLAIN``."""
    parts = key.split("_")
    for i in range(1, len(parts)):
        for width in (2, 1):  # ``A_m2`` before ``A``
            token = "_".join(parts[i:i + width])
            if token in KEY_UNITS:
                return " ".join(parts[:i] + parts[i + width:]), KEY_UNITS[token]
    return " ".join(parts), PLAIN


def si_key(key: str, value, stderr=None, digits=4) -> str:
    """A number shown by the unit in its key (``_m``, ``_T``, ``_A_m2``), error folded in."""
    if isinstance(value, (list, tuple)):
        return ", ".join(si_key(key, v, None, digits) for v in value)
    _, units = key_unit(key)
    return measure(value, stderr, units, digits=digits)


def evidence_item(key: str, value) -> str:
    """``'ic0 positive = 21.50 µA'``: one piece of a flag's evidence for people."""
    if key.endswith("_sigmas"):
        name = key_unit(key.removesuffix("_sigmas"))[0]
        return f"{name} = {measure(value, digits=3)} standard errors"
    name, units = key_unit(key)
    if isinstance(value, bool):
        return f"{name} = {'yes' if value else 'no'}"
    return f"{name} = {si_key(key, value)}"


def evidence_text(evidence: dict) -> str:
    """Every item of a flag's evidence, ``'; '``-separated."""
    return "; ".join(evidence_item(k, v) for k, v in evidence.items())


def csv_number(value) -> str:
    """A float for a CSV field: the shortest text of the value at 15 significant digits.

    Fifteen digits are far beyond any measurement and drop the noise that unit
    conversions and evenly spaced fields leave in the last binary places
    (``-0.001475``, not ``-0.0014750000000000002``); the value reads back within 5e-15
    of itself (``result.json`` keeps the exact floats). Empty for ``None`` and
    non-finite values.
    """
    if value is None:
        return ""
    value = float(value)
    if not math.isfinite(value):
        return ""
    return repr(float(f"{value:.15g}"))


def plural(count: int, word: str, many: str | None = None) -> str:
    """``'1 lobe'``, ``'2 lobes'``; ``many`` for irregular plurals (``'branches'``)."""
    return f"{count} {word if count == 1 else (many or word + 's')}"


#: Files inside the installed package (the demo data) are shown by their bare name.
PACKAGE_ROOT = os.path.dirname(os.path.abspath(__file__))


def shown_path(path, packaged_root: str | None = PACKAGE_ROOT) -> str:
    """A path as a reader wants it: the bare file name for packaged data (under
    ``packaged_root``), relative to the working directory when it lies under it,
    else absolute."""
    if path is None:
        return ""
    text = os.fspath(path)
    if "://" in text or text.startswith("demo:"):
        return text
    full = os.path.abspath(text)
    if packaged_root and full.startswith(os.path.abspath(packaged_root) + os.sep):
        return os.path.basename(full)
    try:
        rel = os.path.relpath(full)
    except ValueError:  # another drive on Windows
        return text
    return full if rel.startswith("..") else rel


def sweep_words(segment: str) -> str:
    """``'up sweep'``, ``'down sweep'``, ``'up sweep 2'``; ``''`` for a one-way sweep."""
    direction, _, number = (segment or "").partition(" ")
    return f"{direction} sweep" + (f" {number}" if number else "") if direction else ""


def branch_words(branch: str | None, segment: str = "") -> str:
    """``'positive branch'``, or ``'positive branch, up sweep'`` for a fit of one segment."""
    if not branch:
        return "both branches" + (f", {sweep_words(segment)}" if segment else "")
    polarity = branch.removesuffix(f" {segment}") if segment else branch
    return f"{polarity} branch" + (f", {sweep_words(segment)}" if segment else "")


def flag_words(flag, fits) -> str:
    """Where a flag applies, in words: ``'positive branch'``, ``'negative branch, down
    sweep'``, ``'both branches'`` (a flag without a branch covers the whole junction)."""
    segments = {f.branch: f.segment for f in fits}
    segment = segments.get(flag.branch) or flag.evidence.get("segment") or ""
    return branch_words(flag.branch, segment)


def flag_heading(flag, fits) -> str:
    """``'[warning] branch-asymmetry (both branches)'``: a flag's one-line heading."""
    return f"[{flag.severity}] {flag.code} ({flag_words(flag, fits)})"
