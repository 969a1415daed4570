"""The Python calls a notebook uses: load, extract, analyse arrays, fit arrays.

They are the command line's steps with Python-level advice in their messages
(keywords, not options) and units given by keyword for plain arrays.
"""

from __future__ import annotations

import dataclasses
import hashlib
import re
import warnings

from .errors import InputError

#: Command-line options named in reading messages, and the keyword that does the same here.
_KEYWORDS = {
    "--ic-col": "ic_cols=[...]", "--field-col": "field_col=...",
    "--field-unit": "field_unit=...", "--current-unit": "current_unit=...",
    "--coil-constant": "coil_T_per_A=...", "--bias-col": "ReadSettings(bias_col=...)",
    "--signal-col": "ReadSettings(signal_col=...)",
    "--signal-unit": "ReadSettings(signal_unit=...)", "--decimal": "ReadSettings(decimal=...)",
    "--field-from-name": "ReadSettings(field_from_name=...)",
}
_OPTION = re.compile("|".join(re.escape(k) for k in sorted(_KEYWORDS, key=len, reverse=True)))

#: Largest field (T) and current (A) that plain SI arrays plausibly hold; beyond them the
#: numbers look like mT or µA passed as SI (a 0.5 T field is far past any Fraunhofer
#: pattern of a micron-sized junction, 50 mA far above its critical current).
SI_FIELD_LIMIT_T = 0.5
SI_CURRENT_LIMIT_A = 0.05


def python_advice(message: str) -> str:
    """A reading message with its command-line options replaced by Python keywords."""
    # "--field-unit 'xyz'" reads "field_unit='xyz'" (a keyword with its value).
    text = re.sub(rf"({_OPTION.pattern}) ('[^']*')",
                  lambda m: _KEYWORDS[m.group(1)].removesuffix("...") + m.group(2)
                  if _KEYWORDS[m.group(1)].endswith("=...") else m.group(0), message)
    text = _OPTION.sub(lambda m: _KEYWORDS[m.group(0)], text)
    return text.replace(" pass ", " give ")


def load(path, *, field_col=None, ic_cols=(), field_unit=None, current_unit=None,
         coil_T_per_A=None):
    """Load an Ic(B) sweep (see :func:`jjpattern.io.load`); a raw V(I, B) map is refused
    with the call that reads it (:func:`jjpattern.analyze` or :func:`load_map`)."""
    from . import io

    try:
        return io.load(path, field_col=field_col, ic_cols=ic_cols, field_unit=field_unit,
                       current_unit=current_unit, coil_T_per_A=coil_T_per_A)
    except InputError as exc:
        try:
            is_map = isinstance(io.read(path), io.IVMap)
        except InputError:
            is_map = False
        if is_map:
            raise InputError(f"{path}: a raw V(I, B) map, not an Ic(B) table; read it with "
                             "jjpattern.load_map(path), or analyse it whole with "
                             "jjpattern.analyze(path)") from None
        raise InputError(python_advice(str(exc))) from None


def load_map(path, settings=None):
    """Load a raw V(I, B) map (see :func:`jjpattern.io.load_map`)."""
    from . import io

    try:
        return io.load_map(path, settings)
    except InputError as exc:
        raise InputError(python_advice(str(exc))) from None


def extract(ivmap, *, criterion: str = "auto", threshold: float | None = None):
    """Read Ic+ and Ic- (and retrapping) from every field row of a raw map.

    Parameters
    ----------
    ivmap : IVMap, str or path-like
        A map from :func:`load_map`, or its file.
    criterion : str
        ``"auto"``, ``"voltage"``, ``"resistance"`` or another registered criterion.
    threshold : float, optional
        The level in SI (V or ohm); chosen from the noise when not given.

    Returns
    -------
    Extraction
        ``to_dict()`` gives the JSON block; ``to_sweep()`` the Ic(B) sweep.
    """
    from .extract.engine import extract as _extract

    if not hasattr(ivmap, "signal"):
        ivmap = load_map(ivmap)
    return _extract(ivmap, criterion=criterion, threshold=threshold)


def _si(values, unit: str, kind: str, limit: float, name: str):
    """Values in SI from ``unit``, with a warning when SI values look like another unit."""
    import numpy as np

    from .io.units import current_factor, field_factor

    try:
        factor = (field_factor if kind == "field" else current_factor)(unit, f"{name}_unit")
    except InputError as exc:
        raise InputError(python_advice(str(exc))) from None
    out = np.asarray(values, dtype=float) * factor
    finite = out[np.isfinite(out)]
    if unit in ("T", "A") and finite.size and np.max(np.abs(finite)) > limit:
        smaller = "mT" if kind == "field" else "uA"
        warnings.warn(f"{name} reaches {np.max(np.abs(finite)):.3g} {unit}, which looks like "
                      f"{smaller} given as SI; pass {name}_unit={smaller!r} if so.",
                      UserWarning, stacklevel=3)
    return out


def fit_pattern(field, ic, *, field_unit: str = "T", current_unit: str = "A", **options):
    """Fit one Ic(B) branch given as arrays (see :func:`jjpattern.fit.engine.fit_pattern`).

    ``field_unit`` and ``current_unit`` name the arrays' units (``"mT"``, ``"uA"``);
    SI arrays whose magnitudes look like mT or µA draw a warning.
    """
    from .fit.engine import fit_pattern as _fit

    return _fit(_si(field, field_unit, "field", SI_FIELD_LIMIT_T, "field"),
                _si(ic, current_unit, "current", SI_CURRENT_LIMIT_A, "current"), **options)


def analyze_arrays(field, ic, ic_negative=None, *, field_unit: str = "T",
                   current_unit: str = "A", settings=None, metadata: dict | None = None,
                   **keywords):
    """Analyse an Ic(B) sweep given as arrays, as :func:`jjpattern.analyze` does a file.

    Parameters
    ----------
    field, ic : array_like
        Applied field and critical current in file order; ``ic`` may hold both signs.
    ic_negative : array_like, optional
        A second branch measured at the same fields (its magnitude is used).
    field_unit, current_unit : str
        Units of the arrays (``"T"``, ``"mT"``, ``"A"``, ``"uA"``); SI arrays whose
        magnitudes look like mT or µA draw a warning.
    settings, **keywords
        As for :func:`jjpattern.analyze`.
    metadata : dict, optional
        Junction name, chip, sizes (``length_um``), as a file's header would give.

    Returns
    -------
    Result
    """
    import numpy as np

    from .io.sweep import build_sweep
    from .pipeline import analyze_data
    from .settings import keyword_settings

    settings = keyword_settings(settings, **keywords)
    columns = {"field": _si(field, field_unit, "field", SI_FIELD_LIMIT_T, "field"),
               "Ic": _si(ic, current_unit, "current", SI_CURRENT_LIMIT_A, "current")}
    if ic_negative is not None:
        columns["Ic-"] = _si(ic_negative, current_unit, "current", SI_CURRENT_LIMIT_A,
                             "current")
    digest = hashlib.sha256()
    for name, values in columns.items():
        digest.update(name.encode() + np.ascontiguousarray(values, dtype="<f8").tobytes())
    read = dataclasses.replace(settings.read, field_col="field",
                               ic_cols=tuple(c for c in columns if c != "field"),
                               field_unit="T", current_unit="A")
    sweep = build_sweep(columns, source="arrays", sha256=digest.hexdigest(), settings=read,
                        metadata=dict(metadata or {}))
    return analyze_data(sweep, settings)
