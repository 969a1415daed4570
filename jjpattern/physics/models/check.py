"""Numerical self-check of a pattern model: the promises the fit layer relies on.

Run by the tests for every registered model, so a new model file is checked
without writing a test for these; each check names the property it guards.
"""

from __future__ import annotations

from .spec import PatternModelSpec

#: Parameters the checks use: nothing special about them except that none is 1 or 0.
_IC0_A, _PERIOD_T, _OFFSET_T, _FLOOR_A = 2.5, 1.7, 0.4, 0.3
_NODES = 6


def check_model(spec: PatternModelSpec, *, rtol: float = 1e-9) -> list[str]:
    """Departures of ``spec`` from what the fit assumes; an empty list when there are none.

    Checked: peak ``ic0_A`` at the offset (unless the spec says the pattern has no
    central peak) and nowhere higher; even about the
    offset; floor in quadrature; the formula is ``ic0_A * unit_shape(u)`` (so the
    scan template matches what is fitted); vectorised (keeps the shape of
    ``field_T``); ``node_flux`` increasing and positive, the pattern vanishing there
    and not between; a periodic pattern repeats, any other decays; an analytic
    ``gradient`` agrees with central differences of the formula.
    """
    import numpy as np

    f = spec.formula
    kw = {"ic0_A": _IC0_A, "period_T": _PERIOD_T, "field_offset_T": _OFFSET_T}
    b = _OFFSET_T + _PERIOD_T * np.linspace(-7.3, 7.3, 1461)
    problems = []
    try:
        base = np.asarray(f(b, **kw), dtype=float)
    except Exception as exc:  # noqa: BLE001 - reported as a problem, not raised
        return [f"formula fails on an array: {exc!r}"]
    if base.shape != b.shape or not np.all(np.isfinite(base)):
        return ["formula must return finite values with the shape of field_T"]
    if spec.central_peak and not np.isclose(float(f(_OFFSET_T, **kw)), _IC0_A, rtol=rtol,
                                            atol=0):
        problems.append("the pattern must peak at ic0_A at the offset")
    if base.max() > _IC0_A * (1 + rtol):
        problems.append("the pattern exceeds ic0_A away from the offset")
    if not spec.central_peak and base.max() < 0.1 * _IC0_A:
        problems.append("ic0_A must set the scale of the pattern (its maximum is below "
                        "a tenth of ic0_A)")
    if not np.allclose(f(2 * _OFFSET_T - b, **kw), base, rtol=rtol, atol=rtol * _IC0_A):
        problems.append("the pattern must be even about the offset")
    floored = f(b, floor_A=_FLOOR_A, **kw)
    if not np.allclose(floored, np.hypot(base, _FLOOR_A), rtol=rtol, atol=0):
        problems.append("the floor must combine in quadrature, sqrt(Ic^2 + floor^2)")
    u = (b - _OFFSET_T) / _PERIOD_T
    if not np.allclose(base, _IC0_A * np.asarray(spec.unit_shape(u)), rtol=1e-6,
                       atol=1e-6 * _IC0_A):
        problems.append("formula must equal ic0_A * unit_shape(u) at the default extras")
    if np.shape(f(np.zeros((2, 3)), **kw)) != (2, 3):
        problems.append("formula must keep the shape of field_T")
    problems += _node_problems(spec, rtol)
    if spec.gradient is not None:
        problems += _gradient_problems(spec, b + 0.00377 * _PERIOD_T)
    return problems


def _gradient_problems(spec, b):
    """The analytic gradient against central differences (with a floor, so no cusps; the
    fields are shifted off round fluxes, where an interpolated table has its kinks)."""
    import numpy as np

    values = {"ic0_A": _IC0_A, "period_T": _PERIOD_T, "field_offset_T": _OFFSET_T,
              "floor_A": _FLOOR_A}
    values.update({p.name: 0.37 if p.start == 0 else 1.13 * p.start for p in spec.extra})
    try:
        grads = spec.gradient(b, **values)
    except Exception as exc:  # noqa: BLE001 - reported as a problem, not raised
        return [f"gradient fails on an array: {exc!r}"]
    problems = []
    for name, value in values.items():
        step = 1e-6 * max(abs(value), 1.0)
        up, down = dict(values), dict(values)
        up[name], down[name] = value + step, value - step
        numeric = (spec.formula(b, **up) - spec.formula(b, **down)) / (2 * step)
        if name not in grads or not np.allclose(grads[name], numeric, rtol=1e-5,
                                                atol=1e-6 * _IC0_A):
            problems.append(f"gradient by {name} differs from the formula's central "
                            "differences")
    return problems


def _node_problems(spec, rtol):
    import numpy as np

    nodes = np.asarray(spec.node_flux(_NODES), dtype=float)
    if nodes.shape != (_NODES,) or not (np.all(nodes > 0) and np.all(np.diff(nodes) > 0)):
        return [f"node_flux({_NODES}) must return {_NODES} increasing positive values"]
    problems = []
    shape = spec.unit_shape
    if np.max(np.abs(shape(nodes))) > 1e3 * rtol or np.max(np.abs(shape(-nodes))) > 1e3 * rtol:
        problems.append("the pattern must vanish at the nodes of node_flux")
    # No zero the list misses: sampled densely, the pattern stays up between the nodes.
    edges = np.concatenate([[0.0], nodes])
    for lo, hi in zip(edges[:-1], edges[1:], strict=True):
        inner = np.linspace(lo, hi, 203)[1:-1]
        inner = inner[np.abs(inner - lo) > 0.05 * (hi - lo)]
        inner = inner[np.abs(hi - inner) > 0.05 * (hi - lo)]
        if np.min(shape(inner)) < 1e-3:
            problems.append(f"the pattern has a node between {lo:.4g} and {hi:.4g} that "
                            "node_flux does not list")
            break
    u = np.linspace(0.0, 1.0, 101)
    repeats = np.allclose(shape(u + 7.0), shape(u), rtol=1e-9, atol=1e-9)
    if spec.periodic and not repeats:
        problems.append("a periodic pattern must repeat with period 1 in u")
    if not spec.periodic and np.max(shape(u + 10.0)) > 0.5:
        problems.append("a pattern that is not periodic must decay (side lobes at u > 10 "
                        "below half the main lobe)")
    return problems
