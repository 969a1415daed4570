"""Tables as spreadsheets and acquisition programs write them in other regions and styles.

The separator is chosen from the header and the first row together; a decimal
comma is recognised when the cells write it (with ``;``, tab or whitespace
between columns); a row of units under the names (``mT``, ``uA``) is joined to
them. What cannot be told apart is refused with the line and the option that
settles it (``--decimal``), never guessed.
"""

from __future__ import annotations

import re

from ..errors import InputError
from .limits import clip
from .units import CURRENT_UNITS, FIELD_UNITS, RESISTANCE_UNITS, VOLTAGE_UNITS, normalise_unit

#: Units that mark a row as the units row (besides those the readers convert).
_OTHER_UNITS = {"k", "mk", "s", "ms", "us", "min", "h", "hz", "khz", "%", "deg", "\u00b0",
                "\u00b0c", "c", "a.u.", "au", "arb", "arb.u.", "a.u", "w", "mw", "uw", "dbm",
                "db", "v/a", "\u03c9", "ohm"}
_KNOWN_UNITS = ({normalise_unit(u) for u in FIELD_UNITS} | {normalise_unit(u) for u in
                CURRENT_UNITS} | set(VOLTAGE_UNITS) | set(RESISTANCE_UNITS) | _OTHER_UNITS)
_NUMBER = re.compile(r"^[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?$")
_INT = re.compile(r"^[+-]?\d+$")
_FRACTION = re.compile(r"^\d+(?:[eE][+-]?\d+)?$")

DECIMAL_HELP = "pass --decimal , (decimal comma) or --decimal . (decimal point)"


def choose_delimiter(header: str, first_row: str | None) -> str | None:
    """``','``, ``'\\t'``, ``';'`` or ``None`` (whitespace) for this header and first row.

    With one kind of separator in the header that one is used. With several
    (``'B, mT;Ic, uA'``) the one that splits the first row into as many cells
    as the header is used, tab before semicolon before comma.
    """
    present = [d for d in (",", "\t", ";") if d in header]
    if len(present) <= 1 or first_row is None:
        return present[0] if present else None
    for delim in ("\t", ";", ","):
        if delim in present and header.count(delim) == first_row.count(delim):
            return delim
    return present[0]


def _cell(text: str) -> str:
    return text.strip().strip('"').strip("'").strip()


def units_row(line: str, delim: str | None, width: int) -> list[str | None] | None:
    """The units of a row of units under the header (``'mT;uA'``), or ``None``.

    A units row has no number in it and at least one cell that is a unit.
    """
    cells = line.split() if delim is None else line.strip(" ").split(delim)
    if len(cells) == width + 1 and not cells[-1].strip():
        cells.pop()
    if len(cells) != width:
        return None
    units: list[str | None] = []
    for raw in cells:
        cell = _cell(raw)
        if cell[:1] in "([" and cell[-1:] in ")]":
            cell = cell[1:-1].strip()
        if _NUMBER.match(cell):
            return None
        units.append(cell or None)
    if not any(normalise_unit(u) in _KNOWN_UNITS for u in units if u):
        return None
    return units


def join_units(names: list[str], units: list[str | None]) -> list[str]:
    """``'Field'`` and ``'mT'`` become ``'Field (mT)'``; a name with its own unit keeps it."""
    from .units import split_header

    out = []
    for name, unit in zip(names, units, strict=True):
        if unit and split_header(name)[1] is None:
            out.append(f"{name} ({unit})")
        else:
            out.append(name)
    return out


def _cell_pattern(delim: str | None, kind: str) -> re.Pattern:
    sep = r"\s" if delim is None else re.escape(delim)
    body = r"(?:\d+,\d*|,\d+)" if kind == "," else r"(?:\d+\.\d*|\.\d+)"
    return re.compile(rf"(?:^|(?<={sep}))[ \t]*[+-]?{body}(?:[eE][+-]?\d+)?[ \t]*"
                      rf"(?={sep}|$)", re.MULTILINE)


def _line_of(text: str, pos: int, first_line: int) -> int:
    return first_line + text.count("\n", 0, pos)


def decimal_mark(body: str, delim: str | None, given: str | None, source: str,
                 first_line: int) -> str:
    """The decimal mark of the rows: as given, else read from the cells.

    A file writing some numbers with a decimal comma and others with a decimal
    point is ambiguous (a thousands separator?) and is refused.
    """
    if given not in (None, ".", ","):
        raise InputError(f"--decimal {clip(given)}: the decimal mark is '.' or ','")
    if given is not None or delim == ",":
        return given or "."
    # str.find first: the cell patterns take ~0.1 s per MB to rule a mark out.
    comma = _cell_pattern(delim, ",").search(body) if "," in body else None
    if comma is None:
        return "."
    point = _cell_pattern(delim, ".").search(body) if "." in body else None
    if point is None:
        return ","
    raise InputError(
        f"{source}: line {_line_of(body, comma.start(), first_line)} writes "
        f"{clip(comma.group().strip())} with a decimal comma but line "
        f"{_line_of(body, point.start(), first_line)} writes {clip(point.group().strip())} with a "
        f"decimal point; {DECIMAL_HELP} to say which the file uses")


def looks_like_comma_decimals(cells: list[str], width: int) -> bool:
    """A row of ``2 * width`` comma-separated parts that pair up as ``int,fraction``."""
    if len(cells) != 2 * width:
        return False
    ints, fractions = cells[0::2], cells[1::2]
    return (all(_INT.match(c.strip()) for c in ints)
            and all(_FRACTION.match(c.strip()) for c in fractions))


def ambiguous_comma_message(source: str, number: int, parts: int, width: int) -> str:
    return (f"{source}: line {number} has {parts} comma-separated fields for {width} columns: "
            "the comma seems to be both the separator and the decimal mark; pass --decimal , "
            "if it is the decimal mark (every number then needs its decimals), or re-export "
            "with ';' between the columns")


def pair_comma_decimals(body: str, width: int, source: str, first_line: int) -> str:
    """Rows where a comma both separates columns and marks decimals, as ``;`` rows.

    Every number must be written with its decimals (two parts each); other rows
    are refused with their line number.
    """
    out = []
    for k, line in enumerate(body.split("\n")):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            out.append("")
            continue
        cells = stripped.split(",")
        if len(cells) == 2 * width + 1 and not cells[-1].strip():
            cells.pop()
        if len(cells) != 2 * width:
            raise InputError(
                f"{source}: line {first_line + k} has {len(cells)} comma-separated parts; "
                f"with --decimal , and commas between the {width} columns every number needs "
                "its decimals (two parts each); re-export with ';' between the columns")
        out.append(";".join(f"{a.strip()}.{b.strip()}" for a, b in zip(cells[0::2],
                                                                       cells[1::2],
                                                                       strict=True)))
    return "\n".join(out)
