"""jjpattern: fit and diagnose critical-current versus field patterns of Josephson junctions.

Entry points: :func:`analyze` (an input file or folder to a :class:`Result`),
:func:`analyze_arrays` (arrays to a :class:`Result`), :func:`load` and
:func:`load_map` (a file to a sweep or a raw map in SI), :func:`extract` (a raw map
to Ic+ and Ic-) and :func:`fit_pattern` (arrays to one fit). A :class:`Result` shows
itself in Jupyter, draws itself with ``result.plot()`` and reads back from its JSON
with ``Result.read(path)``. Heavy modules load on first use so that the command line
starts fast.
"""

__version__ = "0.1.0"

#: Public name -> (module, attribute), imported on first use.
_LAZY = {
    "analyze": ("pipeline", "analyze"),
    "analyze_arrays": ("api", "analyze_arrays"),
    "Result": ("result", "Result"),
    "Settings": ("settings", "Settings"),
    "fit_pattern": ("api", "fit_pattern"),
    "load": ("api", "load"),
    "load_map": ("api", "load_map"),
    "extract": ("api", "extract"),
    "InputError": ("errors", "InputError"),
}

__all__ = sorted(_LAZY) + ["__version__"]


def __getattr__(name):
    if name in _LAZY:
        import importlib

        module, attr = _LAZY[name]
        return getattr(importlib.import_module(f".{module}", __name__), attr)
    raise AttributeError(f"module 'jjpattern' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_LAZY))
