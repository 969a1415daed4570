"""The geometry and materials block as a table for people: names, values, notes."""

from __future__ import annotations

from ..fmt import si_key
from ..result import stderr_key

#: Names for people of the given geometry (the ``inputs`` of the block).
INPUT_NAMES = {
    "length_m": "junction length L (across the field)",
    "width_m": "junction width W",
    "barrier_m": "barrier thickness d",
    "t1_m": "electrode 1 thickness t1",
    "t2_m": "electrode 2 thickness t2",
    "lambda1_m": "London depth λ1",
    "lambda2_m": "London depth λ2",
    "jc_A_m2": "critical current density Jc",
    "planar": "planar (thin-film) junction",
}

#: Names for people of the derived numbers, in the order they are shown.
DERIVED_NAMES = {
    "model": "pattern model",
    "magnetic_thickness_m": "magnetic thickness d' = Φ0 / (L × period)",
    "expected_magnetic_thickness_m": "expected magnetic thickness from d, t and λ",
    "expected_period_T": "expected period Φ0 / (L d')",
    "period_over_expected": "measured period / expected period",
    "london_depth_from_period_m": "London depth λ from the period",
    "london_depth_assumption": "assumption for λ",
    "jc_from_ic0_A_m2": "critical current density Jc = Ic0 / (L W)",
    "jc_from_pattern_A_m2": "critical current density Jc from the pattern",
    "current_thickness_m": "current thickness d_s",
    "josephson_depth_m": "Josephson penetration depth λJ",
    "josephson_depth_from_pattern_m": "Josephson penetration depth λJ from the pattern",
    "length_over_josephson_depth": "L / λJ",
    "applies": "planar junction",
    "planar_expected_period_T": "expected period of a planar junction, 1.84 Φ0 / W²",
    "planar_period_over_expected": "measured period / planar expected period",
    "planar_area_over_thin_film_estimate": "effective area / (W² / 1.84)",
    "focusing_factor": "flux focusing factor A_eff / (W d')",
}


def _name(key: str) -> str:
    return DERIVED_NAMES.get(key) or key.replace("_", " ")


def _thickness_range(inputs: dict):
    """Magnetic thickness of the electrodes given, for any London depth: from d (λ -> 0)
    to d + t1/2 + t2/2 (λ much longer than the films)."""
    d, t1 = inputs.get("barrier_m"), inputs.get("t1_m")
    if d is None or not t1:
        return None
    t2 = inputs.get("t2_m") or t1
    return d, d + 0.5 * t1 + 0.5 * t2


def missing_reason(key: str, block: dict) -> str:
    """Why a derived number could not be given, in words."""
    if key == "london_depth_from_period_m":
        span = _thickness_range(block.get("inputs") or {})
        measured = block.get("magnetic_thickness_m")
        if span and measured:
            lo, hi = span
            side = "more" if measured > hi else "less"
            return (f"no London depth fits: the period implies d' = {si_key('_m', measured)}, "
                    f"{side} than any λ gives with these films ({si_key('_m', lo)} to "
                    f"{si_key('_m', hi)})")
        return "no London depth fits the measured period with the thicknesses given"
    return "cannot be derived from the numbers given"


def geometry_rows(block: dict) -> list[tuple[str, str, str]]:
    """``(name, value, note)`` rows: the geometry given, then what was derived.

    A number that could not be derived shows a dash and the reason in the note.
    """
    rows = []
    for key, value in (block.get("inputs") or {}).items():
        text = "yes" if value is True else si_key(key, value)
        rows.append((INPUT_NAMES.get(key, key.replace("_", " ")), text, "given"))
    where = f"from the {block['branch']} branch" if block.get("branch") else ""
    keys = [k for k in DERIVED_NAMES if k in block]
    keys += [k for k in block if k not in DERIVED_NAMES and k not in ("inputs", "branch")
             and "_stderr" not in k]
    for key in keys:
        value = block[key]
        if value is None:
            rows.append((_name(key), "—", missing_reason(key, block)))
        elif isinstance(value, str):
            rows.append((_name(key), value, ""))
        else:
            rows.append((_name(key), si_key(key, value, block.get(stderr_key(key))), where))
    return rows
