"""Delimited text (CSV, TSV, semicolon or whitespace) with a header row, read by pandas.

Layout: optional ``# key: value`` metadata lines, one header row naming the
columns with their units (``B (mT)``, ``Ic_uA``), or with a row of units under
it (``mT;uA``), then rows of numbers, with a decimal point or (with ``;``, tab
or whitespace between the columns) a decimal comma (:mod:`jjpattern.io.regional`).
Blank lines and lines starting with ``#`` are skipped anywhere; a delimiter at
the end of a row is allowed. The same reader serves Ic(B) tables and long-table
raw maps (one row per field and bias point). A small table of plain numbers is
parsed here (importing pandas would cost more than the whole analysis start-up
allows); pandas parses any other rows, with the same numbers. The file and line
of any problem are found afterwards, only when there is one.
"""

from __future__ import annotations

import re

import numpy as np

from ..errors import InputError
from ..fmt import plural
from . import regional
from .limits import check_points, check_rows, clip
from .maps import choose_kind, from_long_table, looks_like_map
from .sweep import build_sweep

NAME = "text"

_META = re.compile(r"^#\s*(?P<key>[A-Za-z][\w .\-/]*?)\s*[:=]\s*(?P<value>.*?)\s*$")
_MISSING = {"", "nan", "na", "n/a", "none", "null", "-", "--"}
# pandas matches missing-value markers exactly; other spellings take the slow path.
_NA_TOKENS = sorted({v for m in _MISSING for v in (m, m.upper(), m.title())} | {"NaN"})
_NA_SET = frozenset(_NA_TOKENS)
_COMMENT_LINE = re.compile(r"^[ \t]*#.*$", re.MULTILINE)
#: Rows up to this many characters may be parsed without pandas: about 12 000 rows of three
#: numbers, parsed in about 30 ms, against 0.14-0.25 s for importing pandas.
PLAIN_MAX_CHARS = 1 << 18
# A decimal number with at least one (ASCII) digit, as both Python's float and pandas read it.
_PLAIN_NUMBER = {mark: re.compile(rf"[+-]?(?=\{mark}?[0-9])[0-9]*(?:\{mark}[0-9]*)?"
                                  r"(?:[eE][+-]?[0-9]+)?") for mark in ".,"}


def sniff(source) -> bool:
    """Any file is tried as text (the binary formats are sniffed first)."""
    return not source.is_folder


def read(source, settings, kind: str = "auto"):
    """A Sweep from an Ic(B) table, or an IVMap from a long table of bias and voltage."""
    def bound(names, lines):
        # Lines bound the rows: a table longer than allowed is refused before it is parsed.
        if choose_kind(kind, settings, looks_like_map(names)) == "sweep":
            check_rows(source.path, lines, settings)
        else:
            check_points(source.path, "the table's lines", (lines,), settings)

    metadata, columns, layout = read_table(decode(source.raw, source.path), source.path,
                                           settings.decimal, bound)
    if choose_kind(kind, settings, looks_like_map(columns)) == "map":
        return from_long_table(columns, source=source.path, sha256=source.digest,
                               metadata=metadata, settings=settings)
    return build_sweep(columns, source=source.path, sha256=source.digest, settings=settings,
                       metadata=metadata, layout=layout)


def decode(raw: bytes, source: str) -> str:
    """Text of a file: UTF-16 with its BOM, UTF-8 (with or without BOM) or else Latin-1."""
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):  # spreadsheets' "Unicode text"
        try:
            return raw.decode("utf-16")
        except UnicodeDecodeError:
            raise InputError(f"{source}: starts as UTF-16 text but is not; save it as UTF-8 "
                             "text") from None
    if b"\x00" in raw[:4096]:
        from .registry import not_read_message

        raise InputError(not_read_message(source, raw))
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        return raw.decode("latin-1")


def split_whitespace_header(line: str) -> list[str]:
    """Split a whitespace header, keeping ``'B (mT)'`` together as one name."""
    merged: list[str] = []
    for tok in line.split():
        if merged and tok[:1] in "([":
            merged[-1] = f"{merged[-1]} {tok}"
        else:
            merged.append(tok)
    return merged


def is_number(text: str) -> bool:
    """Whether ``text`` reads as a number (a header of numbers is no header)."""
    try:
        float(text)
    except ValueError:
        return False
    return True


def _next_line(text: str, pos: int) -> tuple[str | None, int]:
    """The next line that is neither blank nor a comment, and where the one after starts."""
    while pos < len(text):
        end = text.find("\n", pos)
        end = len(text) if end < 0 else end
        stripped = text[pos:end].strip()
        if stripped and not stripped.startswith("#"):
            return text[pos:end], end + 1
        pos = end + 1
    return None, pos


def _head(text: str, source: str) -> tuple[dict, int, str, int]:
    """Metadata, the header's line number and text, and where the rows start."""
    metadata: dict[str, str] = {}
    pos, number = 0, 0
    while pos <= len(text):
        end = text.find("\n", pos)
        end = len(text) if end < 0 else end
        number += 1
        stripped = text[pos:end].strip()
        if stripped.startswith("#"):
            match = _META.match(stripped)
            if match:
                metadata[match.group("key").strip()] = match.group("value")
        elif stripped:
            return metadata, number, stripped, end + 1
        pos = end + 1
    raise InputError(f"{source}: the file is empty (no header row and no data)")


def parse_table(text: str, source: str, decimal: str | None = None) -> tuple[dict, dict]:
    """Parse metadata comments, the header and the numeric rows.

    Returns
    -------
    metadata : dict
        ``# key: value`` lines before the header.
    columns : dict
        Header name to a float array in file order (missing cells are NaN; may be
        read-only, a view of the parsed table), or
        to the message naming the first cell that is not a number: only the
        columns a sweep uses must be numeric (a status column may hold words).
    """
    metadata, columns, _ = read_table(text, source, decimal)
    return metadata, columns


def read_table(text: str, source: str, decimal: str | None = None,
               bound=None) -> tuple[dict, dict, dict]:
    """:func:`parse_table`, and what was found about the layout (decimal comma, units row).

    ``bound(names, lines)``, when given, may refuse the table from its header and its
    number of lines before the rows are parsed.
    """
    if "\r" in text:
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    metadata, header_no, header, start = _head(text, source)
    delim = regional.choose_delimiter(header, _next_line(text, start)[0])
    if delim is None:
        names = split_whitespace_header(header)
    else:
        names = [n.strip().strip('"').strip("'") for n in header.split(delim)]
    if all(is_number(n) for n in names if n):
        raise InputError(f"{source}: line {header_no} is numbers, not a header; add a header "
                         "row such as 'B (mT), Ic (uA)'")
    if len(names) < 2:
        raise InputError(f"{source}: only one column ({clip(names[0])}); a sweep needs a field "
                         "column and at least one critical-current column")
    if bound is not None:
        bound(names, text.count("\n", start) + (not text.endswith("\n")))
    layout = {}
    line, after = _next_line(text, start)
    units = None if line is None else regional.units_row(line, delim, len(names))
    if units is not None:
        names = regional.join_units(names, units)
        layout["units_row_line"] = header_no + text.count("\n", start, after - 1) + 1
        # The units row is blanked in place, so line numbers still count.
        text = text[:start] + "\n" * text.count("\n", start, after) + text[after:]
    if len(set(names)) < len(names):
        raise InputError(f"{source}: the header repeats a column name: {clip(header)}")
    body = text[start:]
    if "#" in body:
        body = _COMMENT_LINE.sub("", body)  # blanked, so line numbers still count
    mark = regional.decimal_mark(body, delim, decimal, source, header_no + 1)
    if mark == ",":
        layout["decimal"] = ","
    if mark == "," and delim == ",":  # rewritten as ';' between columns, '.' in numbers
        body, delim = regional.pair_comma_decimals(body, len(names), source, header_no + 1), ";"
        mark = "."
    columns = _Rows(body, delim, names, source, header_no + 1, mark).columns()
    if all(isinstance(v, str) for v in columns.values()):
        raise InputError(next(iter(columns.values())))  # prose, not a table of numbers
    return metadata, columns, layout


class _Rows:
    """The rows after the header: parsed by pandas, checked against the file's lines."""

    def __init__(self, body, delim, names, source, first_line, decimal="."):
        self.body, self.delim, self.names, self.source = body, delim, names, source
        self.decimal = decimal
        # Spaces around cells do not count; in a tab-separated file a tab is a cell boundary
        # even at the start of a line (an empty first cell), as pandas reads it.
        self.blank = " " if delim == "\t" else " \t"
        self.first_line = first_line  # file line number of body line 0
        self._lines = None
        self._rows = 0

    def _read(self, as_text, width):
        import csv
        import io

        import pandas as pd

        options = dict(sep=r"\s+" if self.delim is None else self.delim, header=None,
                       engine="c", quoting=csv.QUOTE_NONE, skip_blank_lines=True,
                       skipinitialspace=True, keep_default_na=False)
        if self.decimal == ",":
            options.update(decimal=",")
        if width:  # safe only once every row is known to have at most this many cells
            options.update(names=list(range(width)), index_col=False)
        if as_text:
            options.update(dtype=object, na_filter=False)
        else:
            options.update(dtype=np.float64, na_values=_NA_TOKENS)
        # Bytes, not StringIO: StringIO holds four bytes per character.
        return pd.read_csv(io.BytesIO(self.body.encode("utf-8")), encoding="utf-8",
                           **options)

    def _frame(self, width=None):
        """(frame, numeric) or (None, _) when pandas finds rows of different lengths."""
        import pandas as pd

        try:
            return self._read(False, width), True
        except pd.errors.EmptyDataError:
            raise InputError(f"{self.source}: the file has a header but no data rows") from None
        except pd.errors.ParserError:
            return None, True
        except ValueError:
            pass  # a cell that is not a number: read as text, find it below
        try:
            return self._read(True, width), False
        except pd.errors.ParserError:
            return None, False

    def _plain(self):
        """The rows as an (n columns, rows) float array when they are plain, else None.

        Plain: every non-empty line has exactly one cell per name, each a decimal number
        (spaces before it allowed) or a missing-value marker. pandas reads such rows to
        the same correctly rounded floats (Python's float); anything else is left to it.
        """
        if len(self.body) > PLAIN_MAX_CHARS:
            return None
        n, delim, number = len(self.names), self.delim, _PLAIN_NUMBER[self.decimal]
        na = _NA_SET
        cells = []
        for line in self.body.split("\n"):
            if not line:
                continue
            row = ([c for c in line.replace("\t", " ").split(" ") if c] if delim is None
                   else [c.lstrip(" ") for c in line.split(delim)])
            if len(row) != n:
                return None  # a blank-looking, short, long or trailing-delimiter line
            for cell in row:
                if cell not in na and not number.fullmatch(cell):
                    return None
            cells += row
        if not cells:
            return None
        if self.decimal == ",":
            cells = [c.replace(",", ".") for c in cells]
        values = [np.nan if c in na else float(c) for c in cells]
        return np.ascontiguousarray(np.array(values, dtype=float).reshape(-1, n).T)

    def _plain_columns(self, block) -> dict:
        """:meth:`columns` of plain rows: a row ending in a missing cell is checked as pandas'."""
        self._rows = block.shape[1]
        short = np.flatnonzero(np.isnan(block[-1]))
        if short.size:
            lines = self._data_lines()
            self._check_lengths([lines[i] for i in short])
        return dict(zip(self.names, block, strict=True))

    def columns(self) -> dict:
        n = len(self.names)
        block = self._plain()
        if block is not None:
            return self._plain_columns(block)
        frame, numeric = self._frame()
        if frame is None:
            self._check_lengths(self._data_lines())
            # Every row has n cells or n + 1 with the last empty: some end with a delimiter.
            frame, numeric = self._frame(width=n + 1)
            if frame is None:
                raise self._unreadable()
        if len(frame) == 0:
            raise InputError(f"{self.source}: the file has a header but no data rows")
        self._rows = len(frame)
        if frame.shape[1] != n:
            extra = frame.iloc[:, n:]
            empty = extra.isna() if numeric else extra.isna() | (extra == "")
            if frame.shape[1] != n + 1 or not empty.to_numpy().all():
                self._check_lengths(self._data_lines())
                raise self._unreadable()
            frame = frame.iloc[:, :n]
        last = frame.iloc[:, -1]
        short = np.flatnonzero((last.isna() if numeric else last.isna() | (last == ""))
                               .to_numpy())
        if short.size:
            lines = self._data_lines()
            self._check_lengths([lines[i] for i in short] if len(lines) == len(frame)
                                else lines)
        if numeric:
            return {name: frame.iloc[:, k].to_numpy(dtype=float)
                    for k, name in enumerate(self.names)}
        return {name: self._numbers(frame.iloc[:, k], name) for k, name in enumerate(self.names)}

    def _unreadable(self) -> InputError:
        return InputError(f"{self.source}: the rows cannot be read as a table of "
                          f"{len(self.names)} columns; check the delimiters")

    def _data_lines(self) -> list[tuple[int, str]]:
        """(file line number, text) of each row pandas reads, in order."""
        if self._lines is None:
            self._lines = [(self.first_line + i, line) for i, line
                           in enumerate(self.body.split("\n")) if line.strip(self.blank)]
        return self._lines

    def _where(self, row: int) -> str:
        lines = self._data_lines()
        if len(lines) == self._rows:
            return f"line {lines[row][0]}"
        return f"data row {row + 1}"  # pandas split the lines differently: no line number

    def _check_lengths(self, lines) -> None:
        n = len(self.names)
        for number, line in lines:
            if self.delim is None:
                cells = line.split()
            else:
                cells = line.strip(self.blank).split(self.delim)
                if len(cells) == n + 1 and not cells[-1].strip():
                    cells.pop()  # a trailing delimiter
            if self.delim == "," and regional.looks_like_comma_decimals(cells, n):
                raise InputError(regional.ambiguous_comma_message(self.source, number,
                                                                  len(cells), n))
            if len(cells) != n:
                raise InputError(f"{self.source}: line {number} has "
                                 f"{plural(len(cells), 'field')} but the header has {n}; "
                                 "fix or delete that row")

    def _numbers(self, cells, name):
        """Floats of a column read as text, or the message about its first non-number."""
        import pandas as pd

        text = cells.astype(str).str.strip()
        numbers = text
        if self.decimal == ",":  # a decimal point is then not a number of this file
            numbers = text.where(~text.str.contains(".", regex=False), "?").str.replace(
                ",", ".", regex=False)
        values = pd.to_numeric(numbers, errors="coerce").to_numpy(dtype=float)
        missing = text.str.strip('"').str.lower().isin(_MISSING).to_numpy()
        bad = np.flatnonzero(np.isnan(values) & ~missing)
        if bad.size == 0:
            return values
        cell = text.iloc[bad[0]]
        return (f"{self.source}: {self._where(bad[0])}, column {clip(name)}: {clip(cell)} is not a "
                "number; expected a header row followed by rows of numbers")
