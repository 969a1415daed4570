"""What the readers accept: sizes checked before reading, numbers checked at the edge.

Every reader states a container's failure in one sentence through :func:`damaged`;
sizes are checked from the file's own declarations (:func:`check_points`) before any
array is read; the numbers of a sweep or a map are checked once converted to SI
(:func:`check_magnitudes`). User strings reach messages through :func:`clip`.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np

from ..errors import InputError
from ..settings import ReadSettings

#: Largest input file (a folder: each file, and all of them together) read by default.
MAX_BYTES = ReadSettings.max_bytes
#: Most values in one array read by default: rows of a column, cells of a map.
MAX_POINTS = ReadSettings.max_points
#: Most rows of an Ic(B) sweep by default (every row is fitted).
MAX_ROWS = ReadSettings.max_rows
#: Largest field magnitude believed, in tesla (no laboratory magnet comes near it).
MAX_FIELD_T = 1e3
#: Largest current magnitude believed, in ampere (bias or critical current).
MAX_CURRENT_A = 1e3
#: Smallest largest-current believed, in ampere: below it the column is zero or denormal.
MIN_CURRENT_A = 1e-18
#: Smallest field span believed, in tesla: a pattern over it needs an area above 2e-3 m^2
#: (Phi0 / area), no junction; below about 2e-14 T the fit itself fails.
MIN_FIELD_SPAN_T = 1e-12
#: Largest voltage (V) and differential resistance (ohm) believed in a raw map.
MAX_SIGNAL = {"voltage": 1e3, "dvdi": 1e12}
#: User strings in messages are cut to this many characters.
CLIP = 80


def clip(text, limit: int = CLIP) -> str:
    """``repr`` of a user string, cut to about ``limit`` characters."""
    text = str(text)
    if len(text) <= limit:
        return repr(text)
    return repr(text[:limit]) + f"... ({len(text)} characters)"


def names_list(names, limit: int = 12) -> str:
    """``'B (mT)', 'Ic (uA)'`` and how many more, each name clipped."""
    names = list(names)
    more = f" and {len(names) - limit} more" if len(names) > limit else ""
    return ", ".join(clip(n) for n in names[:limit]) + more


def max_bytes(settings) -> int:
    value = getattr(settings, "max_bytes", None)
    return MAX_BYTES if value is None else int(value)


def max_points(settings) -> int:
    value = getattr(settings, "max_points", None)
    return MAX_POINTS if value is None else int(value)


def check_rows(path: str, rows: int, settings) -> None:
    """Refuse a sweep of more rows than ``max_rows``."""
    limit = getattr(settings, "max_rows", None) or MAX_ROWS
    if rows > limit:
        raise InputError(f"{path}: the sweep has {rows:,} rows, above the limit of {limit:,}; "
                         "thin it, or raise --read-limit rows=N (read setting max_rows) "
                         "if it is meant")


def check_file_size(path: str, size: int, settings, what: str = "the file holds") -> None:
    """Refuse a file larger than ``max_bytes`` before reading it."""
    limit = max_bytes(settings)
    if size > limit:
        raise InputError(f"{path}: {what} {size:,} bytes, above the limit of "
                         f"{limit:,}; raise --read-limit bytes=N (read setting max_bytes) "
                         "if it is meant")


def check_points(path: str, name, shape, settings) -> None:
    """Refuse an array declared larger than ``max_points`` values, before reading it
    (``name`` may be a function giving it, called only for the message)."""
    try:
        count = math.prod(int(s) for s in shape)
    except (TypeError, ValueError):
        count = 0
    limit = max_points(settings)
    if count > limit:
        name = name() if callable(name) else name
        raise InputError(f"{path}: {clip(name)} declares {count:,} values, above the limit of "
                         f"{limit:,}; raise --read-limit values=N (read setting "
                         "max_points) if it is meant")


def damaged(path: str, what: str, exc: BaseException) -> InputError:
    """The sentence for a container that its library cannot read."""
    detail = clip(f"{exc.__class__.__name__}: {exc}", 120)
    return InputError(f"{path}: not a readable {what} (damaged or cut short: {detail}); "
                      "export it again from the acquisition program")


def real(values, path: str, label: str) -> np.ndarray:
    """A real array, or a refusal of complex numbers (never a silently dropped imaginary part).

    ``label`` names the array in words, user strings already clipped
    (``"column 'V (uV)'"``).
    """
    values = np.asarray(values)
    if np.iscomplexobj(values):
        raise InputError(f"{path}: {label} holds complex numbers; give its real part (or "
                         "magnitude) as a real array")
    return values


#: Values checked at a time (1 MiB of float64): a block stays in cache between the passes
#: over it, and the checks of a large map cost about a megabyte, not a copy of it.
BLOCK = 1 << 17


def _blocks(values):
    """``(offset, block)`` over the values in C order; views, when the array allows."""
    flat = values.reshape(-1) if values.flags.c_contiguous else np.ravel(values)
    for start in range(0, flat.size, BLOCK):
        yield start, flat[start:start + BLOCK]


def scaled(raw, factor: float, path: str, label: str) -> np.ndarray:
    """``raw * factor`` without warnings (signalling NaNs from damaged binary files stay
    NaN); a finite value that overflows is refused, not dropped as missing."""
    raw = np.asarray(raw, dtype=float)
    with np.errstate(invalid="ignore", over="ignore"):
        out = raw * factor
    lost = np.flatnonzero(np.isfinite(raw) & ~np.isfinite(out))
    if lost.size:
        raise InputError(f"{path}: {label} holds {float(raw[lost[0]]):.4g} (value "
                         f"{lost[0] + 1}), beyond any field or current once converted to SI; "
                         "check the column and its unit")
    return out


def check_magnitudes(path: str, label: str, values, *, limit: float, unit: str,
                     what: str) -> None:
    """Refuse finite values beyond ``limit`` (in SI), naming the array and the first one."""
    for start, block in _blocks(np.asarray(values)):
        with np.errstate(invalid="ignore"):
            big = np.flatnonzero(np.isfinite(block) & (np.abs(block) > limit))
        if big.size:
            row = int(big[0])
            raise InputError(f"{path}: {label} holds {what} of {float(block[row]):.4g} {unit} "
                             f"(value {start + row + 1}), beyond {limit:g} {unit}; check the "
                             "column and its unit")


def check_field(path: str, label: str, field_T, span: bool = True) -> None:
    """A field column: no absurd magnitude, and (``span``) a span not zero or denormal."""
    field_T = np.asarray(field_T)
    check_magnitudes(path, label, field_T, limit=MAX_FIELD_T, unit="T", what="a field")
    if not span:
        return
    finite = field_T[np.isfinite(field_T)]
    if finite.size > 1 and float(np.ptp(finite)) < MIN_FIELD_SPAN_T:
        raise InputError(f"{path}: the field in {label} spans {float(np.ptp(finite)):.3g} T, "
                         f"below {MIN_FIELD_SPAN_T:g} T: nothing a pattern can be fitted over; "
                         "check the column and its unit")


def check_current(path: str, label: str, current_A) -> None:
    """A current column: no absurd magnitude, and not zero or denormal throughout."""
    current_A = np.asarray(current_A)
    check_magnitudes(path, label, current_A, limit=MAX_CURRENT_A, unit="A", what="a current")
    finite = np.abs(current_A[np.isfinite(current_A)])
    if finite.size and 0 < float(finite.max()) < MIN_CURRENT_A:
        raise InputError(f"{path}: the currents in {label} are at most "
                         f"{float(finite.max()):.3g} A, below {MIN_CURRENT_A:g} A; check the "
                         "column and its unit")


def within(values: np.ndarray, limit: float, scale: float = 1.0) -> bool:
    """True when no value is beyond ``limit`` in magnitude (NaN is passed over, infinity is
    beyond), once ``values`` are multiplied by ``scale`` in place, block by block."""
    if scale != 1.0 and not (values.flags.c_contiguous and values.flags.writeable):
        raise ValueError("scaling in place needs a C-contiguous, writable array")
    inside = True
    for _, block in _blocks(values):
        inside = screen(block, limit, scale) and inside
    return inside


def screen(block: np.ndarray, limit: float, scale: float = 1.0) -> bool:
    """``block`` (1-D or C-contiguous) times ``scale`` in place; True when no value is beyond
    ``limit`` in magnitude (NaN passed over, infinity beyond)."""
    with np.errstate(invalid="ignore", over="ignore"):
        if scale != 1.0:
            block *= scale
        flat = block.reshape(-1)
        # fmax / fmin skip NaN; an all-NaN block gives NaN, which compares False.
        return not (np.fmax.reduce(flat) > limit or np.fmin.reduce(flat) < -limit)


def check_signal(path: str, label: str, signal, kind: str, scale: float = 1.0) -> None:
    """A map's voltage or dV/dI: no infinities, no absurd magnitudes (NaN marks a gap).

    With ``scale`` the signal (C-contiguous, writable) is first multiplied by it in place,
    each block screened while in cache: one pass over the map when all is well; the
    sentence naming the first bad value comes from a second look, only when one is found.
    """
    signal = np.asarray(signal)
    if within(signal, MAX_SIGNAL[kind], scale):
        return
    if any(np.isinf(block).any() for _, block in _blocks(signal)):
        raise InputError(f"{path}: {label} holds infinite values; leave missing points "
                         "empty or NaN")
    unit = "V" if kind == "voltage" else "Ohm"
    check_magnitudes(path, label, signal, limit=MAX_SIGNAL[kind], unit=unit,
                     what="a voltage" if kind == "voltage" else "a dV/dI")


class LazyColumns(Mapping):
    """Named arrays whose sizes are known from the file and whose values are read on use.

    A sweep reads only its field and current columns: other arrays of the file are
    never read (and never cost memory). ``load(name)`` reads one array.
    """

    def __init__(self, shapes: dict, load):
        self.shapes = dict(shapes)
        self._load = load
        self._read: dict = {}

    def __getitem__(self, name):
        if name not in self.shapes:
            raise KeyError(name)
        if name not in self._read:
            self._read[name] = self._load(name)
        return self._read[name]

    def __iter__(self):
        return iter(self.shapes)

    def __len__(self):
        return len(self.shapes)


#: Names of the limits on the command line (``--read-limit NAME=N``) and their settings.
LIMIT_NAMES = {"bytes": "max_bytes", "values": "max_points", "rows": "max_rows"}


def parse_read_limits(texts) -> dict:
    """``["rows=500000", "bytes=1e9"]`` -> ``{"max_rows": 500000, "max_bytes": 10**9}``."""
    out = {}
    for text in texts or ():
        name, _, value = text.partition("=")
        key = LIMIT_NAMES.get(name.strip().lower())
        try:
            number = float(value)
        except ValueError:
            number = float("nan")
        if key is None or not (number >= 1 and number == int(number)):
            raise InputError(f"--read-limit {clip(text)}: give NAME=N with NAME one of "
                             f"{', '.join(LIMIT_NAMES)} and N a positive whole number, "
                             "e.g. rows=500000")
        out[key] = int(number)
    return out
