"""jjpattern: fit and diagnose critical-current versus field patterns of Josephson junctions.

Entry points: :func:`analyze` (an input file and settings to a :class:`Result`),
:class:`Result` (the result document, readable back from its JSON),
:func:`load` (a sweep file to arrays in SI) and :func:`fit_pattern` (arrays to
a fit). Heavy modules load on first use so that the command line starts fast.
"""

__version__ = "0.1.0"

__all__ = ["analyze", "Result", "Settings", "fit_pattern", "load", "__version__"]

_LAZY = {
    "analyze": ("pipeline", "analyze"),
    "Result": ("result", "Result"),
    "Settings": ("settings", "Settings"),
    "fit_pattern": ("fit.engine", "fit_pattern"),
    "load": ("io", "load"),
}


def __getattr__(name):
    if name in _LAZY:
        import importlib

        module, attr = _LAZY[name]
        return getattr(importlib.import_module(f".{module}", __name__), attr)
    raise AttributeError(f"module 'jjpattern' has no attribute {name!r}")
