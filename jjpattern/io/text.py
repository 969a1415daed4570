"""Delimited text sweeps (CSV, TSV, semicolon or whitespace) with a header row."""

from __future__ import annotations

import re

import numpy as np

from ..errors import InputError

_META = re.compile(r"^#\s*(?P<key>[A-Za-z][\w .\-/]*?)\s*[:=]\s*(?P<value>.*?)\s*$")
_MISSING = {"", "nan", "na", "n/a", "none", "null", "-", "--"}


def decode(raw: bytes, source: str) -> str:
    """Text of a file, UTF-8 (with or without BOM) or else Latin-1."""
    if b"\x00" in raw[:4096]:
        raise InputError(f"{source}: looks like a binary file, not delimited text")
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        return raw.decode("latin-1")


def split_whitespace_header(line: str) -> list[str]:
    """Split a whitespace header, keeping ``'B (mT)'`` together as one name."""
    tokens = line.split()
    merged: list[str] = []
    for tok in tokens:
        if merged and tok[:1] in "([":
            merged[-1] = f"{merged[-1]} {tok}"
        else:
            merged.append(tok)
    return merged


def _delimiter(header: str) -> str | None:
    for delim in (",", "\t", ";"):
        if delim in header:
            return delim
    return None


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def parse_table(text: str, source: str) -> tuple[dict, dict[str, np.ndarray], list[int]]:
    """Parse metadata comments, the header and numeric rows.

    Returns
    -------
    metadata : dict
        ``# key: value`` lines before the header.
    columns : dict
        Header name to float array (missing cells are NaN), or to the message
        naming the first cell that is not a number.
    line_numbers : list of int
        The file line of each data row, for messages.
    """
    metadata: dict[str, str] = {}
    lines = text.splitlines()
    header_at = None
    for i, line in enumerate(lines):
        stripped = line.strip()
        if not stripped:
            continue
        if stripped.startswith("#"):
            match = _META.match(stripped)
            if match:
                metadata[match.group("key").strip()] = match.group("value")
            continue
        header_at = i
        break
    if header_at is None:
        raise InputError(f"{source}: the file is empty (no header row and no data)")
    header_line = lines[header_at].strip()
    delim = _delimiter(header_line)
    if delim is None:
        names = split_whitespace_header(header_line)
    else:
        names = [n.strip().strip('"').strip("'") for n in header_line.split(delim)]
    if all(_is_number(n) for n in names if n):
        raise InputError(
            f"{source}: line {header_at + 1} is numbers, not a header; add a header row "
            "such as 'B (mT), Ic (uA)'"
        )
    if len(names) < 2:
        raise InputError(
            f"{source}: only one column ({names[0]!r}); a sweep needs a field column and "
            "at least one critical-current column"
        )
    if len(set(names)) < len(names):
        raise InputError(f"{source}: the header repeats a column name: {header_line!r}")

    rows: list[list[str]] = []
    numbers: list[int] = []
    for i in range(header_at + 1, len(lines)):
        stripped = lines[i].strip()
        if not stripped or stripped.startswith("#"):
            continue
        cells = stripped.split() if delim is None else [c.strip() for c in stripped.split(delim)]
        if delim is not None and len(cells) == len(names) + 1 and cells[-1] == "":
            cells.pop()  # a trailing delimiter
        if len(cells) != len(names):
            raise InputError(
                f"{source}: line {i + 1} has {len(cells)} fields but the header has "
                f"{len(names)}; fix or delete that row"
            )
        rows.append(cells)
        numbers.append(i + 1)
    if not rows:
        raise InputError(f"{source}: the file has a header but no data rows")
    columns = _columns(rows, names, numbers, source)
    if all(isinstance(v, str) for v in columns.values()):
        raise InputError(next(iter(columns.values())))  # prose, not a table of numbers
    return metadata, columns, numbers


def _columns(rows, names, numbers, source) -> dict:
    """Float array per column; a column with a non-number holds the message instead.

    Only the columns a sweep uses must be numeric (a status column may hold words).
    """
    try:
        data = np.array(rows, dtype=float)
        return {n: data[:, k] for k, n in enumerate(names)}
    except ValueError:
        pass
    out = {}
    for c, name in enumerate(names):
        values = np.empty(len(rows))
        for r, cells in enumerate(rows):
            cell = cells[c]
            try:
                values[r] = float(cell)
            except ValueError:
                if cell.strip().strip('"').lower() in _MISSING:
                    values[r] = np.nan
                    continue
                values = (
                    f"{source}: line {numbers[r]}, column {name!r}: {cell!r} is not a number; "
                    "expected a header row followed by rows of numbers"
                )
                break
        out[name] = values
    return out
