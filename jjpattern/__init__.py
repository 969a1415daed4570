"""jjpattern: fit and diagnose critical-current versus field patterns of Josephson junctions.

The two entry points are :func:`load` (a sweep file to arrays in SI) and
:func:`fit_pattern` (arrays to a fit with uncertainties and flags). Heavy
modules load on first use so that the command line starts fast.
"""

__version__ = "0.1.0"

__all__ = ["fit_pattern", "load", "analyze_sweep", "__version__"]


def __getattr__(name):
    if name == "fit_pattern":
        from .fit.engine import fit_pattern

        return fit_pattern
    if name == "load":
        from .io import load

        return load
    if name == "analyze_sweep":
        from .analysis import analyze_sweep

        return analyze_sweep
    raise AttributeError(f"module 'jjpattern' has no attribute {name!r}")
