"""Ic(H) of a long junction from the static sine-Gordon equation, read from a table.

The table (``data/long_junction.npz``, written by
``scripts/make_long_junction_table.py``) holds ``g(u; ell) = Ic / (Jc W L)`` for
the in-line and the overlap feed against the reduced flux ``u = Phi / Phi0``
(``Phi = B L d'``) and ``ell = L / lambda_J``. Here it is normalised to its value
at zero field, ``s(u; ell) = g(u; ell) / g(0; ell)``, and stored as the
departure from the short junction, ``s - |sinc(u)|``, which vanishes at
``ell = 0`` and beyond the table's last flux (at high field the phase winds
almost linearly and the pattern returns to the sinc). Interpolation is linear in
``u`` (the envelope has cusps where vortex modes cross) and a cubic Hermite in
``ell`` with the rows mirrored about ``ell = 0`` (the pattern is even in ``ell``).

This module is not a model file; ``long_inline.py`` and ``long_overlap.py`` are.
numpy is imported inside the functions so that listing the models does not load it.
"""

from __future__ import annotations

import functools
import pathlib

#: Where the table lives, beside this file.
TABLE = pathlib.Path(__file__).with_name("data") / "long_junction.npz"
#: Fluxes over which the departure from the sinc is tapered to zero at the table's end.
_TAPER = 2.0
#: Largest L / lambda_J in the table (the script's grid ends there).
LENGTH_LIMIT = 12.0
FEEDS = ("inline", "overlap")


@functools.cache
def table(feed: str):
    """``(ell, u, departure, slopes, g0, g0_slopes)`` of one feed, read-only arrays.

    Row 0 is ``ell = 0`` (the sinc, departure 0, ``g0 = 1``); ``slopes`` are the
    derivatives in ``ell`` used by the Hermite interpolation.
    """
    import numpy as np

    if feed not in FEEDS:
        raise ValueError(f"feed must be one of {FEEDS}")
    with np.load(TABLE) as data:
        ell = np.concatenate([[0.0], data["ell"].astype(float)])
        u = data["u"].astype(float)
        g = np.vstack([np.abs(np.sinc(u)), data[feed].astype(float)])
    g0 = g[:, 0].copy()
    departure = g / g0[:, None] - np.abs(np.sinc(u))[None, :]
    departure *= np.clip((u[-1] - u) / _TAPER, 0.0, 1.0)[None, :]
    slopes, g0_slopes = _slopes(ell, departure), _slopes(ell, g0[:, None])[:, 0]
    for a in (ell, u, departure, slopes, g0, g0_slopes):
        a.flags.writeable = False
    return ell, u, departure, slopes, g0, g0_slopes


def _slopes(ell, rows):
    """Centred differences in ``ell``; the mirror row at ``-ell[1]`` makes the first zero."""
    import numpy as np

    ext_l = np.concatenate([[-ell[1]], ell, [2 * ell[-1] - ell[-2]]])
    ext = np.vstack([rows[1], rows, 2 * rows[-1] - rows[-2]])
    return (ext[2:] - ext[:-2]) / (ext_l[2:] - ext_l[:-2])[:, None]


def _hermite(ell_grid, rows, slopes, ell, derivative=False):
    """Cubic Hermite interpolation of ``rows`` at ``|ell|`` (clamped to the table), or its
    derivative in ``ell`` at ``|ell|``."""
    import numpy as np

    q = min(abs(float(ell)), float(ell_grid[-1]))
    i = min(max(int(np.searchsorted(ell_grid, q, side="right")) - 1, 0), ell_grid.size - 2)
    width = float(ell_grid[i + 1] - ell_grid[i])
    t = (q - float(ell_grid[i])) / width
    if derivative:
        # d/d(ell) of the basis below: d/dt over the width.
        h00, h10 = (6 * t**2 - 6 * t) / width, 3 * t**2 - 4 * t + 1
        h01, h11 = (-6 * t**2 + 6 * t) / width, 3 * t**2 - 2 * t
    else:
        h00, h10 = 2 * t**3 - 3 * t**2 + 1, (t**3 - 2 * t**2 + t) * width
        h01, h11 = -2 * t**3 + 3 * t**2, (t**3 - t**2) * width
    return h00 * rows[i] + h10 * slopes[i] + h01 * rows[i + 1] + h11 * slopes[i + 1]


@functools.lru_cache(maxsize=16)
def _row(feed: str, ell: float):
    """The departure from the sinc at one ``ell`` over the table's fluxes (read-only).

    Cached: a least-squares step varies the other parameters at a fixed ``ell``.
    """
    grid_ell, _, departure, slopes, _, _ = table(feed)
    row = _hermite(grid_ell, departure, slopes, ell)
    row.flags.writeable = False
    return row


def shape(u, ell, feed):
    """``s(u; ell)``: the normalised pattern, 1 at ``u = 0``, vectorised over ``u``."""
    import numpy as np

    grid_u = table(feed)[1]
    u = np.asarray(u, dtype=float)
    row = _row(feed, min(abs(float(ell)), float(table(feed)[0][-1])))
    return np.abs(np.sinc(u)) + np.interp(np.abs(u), grid_u, row, right=0.0)


@functools.lru_cache(maxsize=16)
def _segments(feed: str, ell: float):
    """Slopes in the flux of each segment of :func:`_row` (read-only, cached alike)."""
    import numpy as np

    seg = np.diff(_row(feed, ell)) / np.diff(table(feed)[1])
    seg.flags.writeable = False
    return seg


def gradient(field_T, ic0_A, period_T, field_offset_T, floor_A, ell, feed):
    """Partial derivatives of :func:`pattern` by each parameter (the fit's Jacobian).

    In the flux the table is piecewise linear, so its slope is the slope of the segment
    (each point's segment found once, for the value and both slopes); in ``ell`` the
    derivative of the cubic Hermite.
    """
    import numpy as np

    from .rectangular import shape_and_slope

    grid_ell, grid_u, departure, slopes, _, _ = table(feed)
    top = float(grid_ell[-1])
    u = (np.asarray(field_T, dtype=float) - field_offset_T) / period_T
    a = np.abs(u)
    sinc, d_sinc = shape_and_slope(u)
    q = min(abs(float(ell)), top)
    row, seg = _row(feed, q), _segments(feed, q)
    i = np.clip(np.searchsorted(grid_u, a, side="right") - 1, 0, grid_u.size - 2)
    inside = a < grid_u[-1]
    along_u = a - grid_u[i]
    # np.interp's sum (segment slope times the distance, plus the left value), beyond the
    # table's end zero (where the departure is tapered to zero anyway).
    s = np.abs(sinc) + np.where(inside, seg[i] * along_u + row[i], 0.0)
    d_s = np.sign(sinc) * d_sinc + np.where(inside, seg[i], 0.0) * np.sign(u)
    # The sinc part does not depend on ell: the derivative of the table row alone (even in
    # ell, and constant beyond the table's end).
    if abs(float(ell)) >= top:
        d_ell = np.zeros_like(a)
    else:
        d_row = _hermite(grid_ell, departure, slopes, ell, derivative=True)
        d_seg = np.diff(d_row) / np.diff(grid_u)
        d_ell = np.sign(float(ell)) * np.where(inside, d_seg[i] * along_u + d_row[i], 0.0)
    if floor_A == 0.0:
        along, d_floor = np.sign(ic0_A * s), np.zeros_like(a)
    else:
        total = np.hypot(ic0_A * s, floor_A)
        inv = np.divide(1.0, total, out=np.zeros_like(total), where=total > 0)
        along, d_floor = ic0_A * s * inv, floor_A * inv
    d_u = along * ic0_A * d_s
    return {"ic0_A": along * s, "period_T": -d_u * u / period_T,
            "field_offset_T": -d_u / period_T, "floor_A": d_floor,
            "length_over_josephson_depth": along * ic0_A * d_ell}


def zero_field_ratio(ell, feed):
    """``g(0; ell) = Ic(0) / (Jc W L)``: 1 for a short junction, 4 / ell for a long
    in-line one, 1 at any length for the overlap feed."""
    grid_ell, _, _, _, g0, g0_slopes = table(feed)
    return float(_hermite(grid_ell, g0, g0_slopes, ell))


@functools.lru_cache(maxsize=64)
def _minima(count, ell, feed):
    """:func:`minima` for hashable arguments, cached (read-only): the starts of a fit ask
    for the same grid values again and again."""
    found = minima(count, ell, feed)
    found.flags.writeable = False
    return found


def minima(count, ell, feed):
    """Reduced flux of the first ``count`` minima of ``s(u; ell)`` for ``u > 0``.

    At ``ell = 0`` these are the sinc's nodes ``1, 2, ...``; beyond the table the
    nodes continue at the integers.
    """
    import numpy as np

    if abs(ell) < 1e-12:
        return np.arange(1, count + 1, dtype=float)
    grid_u = table(feed)[1]
    s = shape(grid_u, ell, feed)
    k = np.flatnonzero((s[1:-1] <= s[:-2]) & (s[1:-1] < s[2:])) + 1
    # Vertex of the parabola through each grid minimum and its neighbours.
    den = s[k - 1] - 2 * s[k] + s[k + 1]
    shift = np.where(den > 0, 0.5 * (s[k - 1] - s[k + 1]) / np.where(den > 0, den, 1.0), 0.0)
    found = grid_u[k] + np.clip(shift, -0.5, 0.5) * (grid_u[1] - grid_u[0])
    found = found[found < grid_u[-1] - _TAPER]
    more = np.arange(np.floor(grid_u[-1]), np.floor(grid_u[-1]) + count + 1)
    return np.concatenate([found, more])[:count]


def pattern(field_T, ic0_A, period_T, field_offset_T, floor_A, ell, feed):
    """``sqrt((Ic0 s(u; ell))^2 + floor^2)`` with ``u = (B - B0) / period``."""
    import numpy as np

    u = (np.asarray(field_T, dtype=float) - field_offset_T) / period_T
    return np.hypot(ic0_A * shape(u, ell, feed), floor_A)


def derived(params, feed):
    """Numbers a long-junction fit gives without any geometry.

    ``jc_times_area_A``: Jc W L = Ic0 / g(0; ell), the zero-field current of a
    short junction with the same barrier; ``lower_critical_field_T``: the field at
    which a fluxon first lowers the energy of a long junction,
    ``mu0 Hc1 = 2 Phi0 / (pi^2 d' lambda_J) = 2 period ell / pi^2`` (Owen and
    Scalapino 1967; the coefficient quoted from memory).
    """
    import numpy as np

    ell = abs(float(params["length_over_josephson_depth"]))
    ratio = zero_field_ratio(ell, feed)
    return {"length_over_josephson_depth": ell,
            "jc_times_area_A": abs(params["ic0_A"]) / ratio,
            "lower_critical_field_T": 2.0 * abs(params["period_T"]) * ell / np.pi**2}


REFERENCES = {
    "owen": "C. S. Owen and D. J. Scalapino, Phys. Rev. 164, 538 (1967).",
    "barone": "A. Barone and G. Paterno, Physics and Applications of the Josephson "
              "Effect (Wiley, New York, 1982).",
}


def make_model(feed: str, *, name: str, description: str, feed_words: str):
    """The registry entry of a long junction with the feed ``feed`` (``inline``, ``overlap``).

    ``feed_words`` says in the methods text how the bias current enters.
    """
    from .rectangular import unit_shape
    from .spec import ExtraParameter, PatternModelSpec

    def formula(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0,
                length_over_josephson_depth=0.0):
        """``sqrt((Ic0 s(u; L/lambda_J))^2 + floor^2)`` from the sine-Gordon table."""
        return pattern(field_T, ic0_A, period_T, field_offset_T, floor_A,
                       length_over_josephson_depth, feed)

    def node_flux(count, length_over_josephson_depth=0.0):
        """Minima of the pattern (lifted above zero once the vortex modes overlap)."""
        return _minima(int(count), abs(float(length_over_josephson_depth)), feed).copy()

    def model_gradient(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0,
                       length_over_josephson_depth=0.0):
        """Partial derivatives of ``formula`` by each parameter (the fit's Jacobian)."""
        return gradient(field_T, ic0_A, period_T, field_offset_T, floor_A,
                        length_over_josephson_depth, feed)

    def derive(params):
        """L / lambda_J, Jc W L and the lower critical field (see :func:`derived`)."""
        return derived(params, feed)

    return PatternModelSpec(
        name=name,
        formula=formula,
        node_flux=node_flux,
        description=description,
        methods_text=(f"the critical current of a long junction with {feed_words}, the "
                      "upper envelope over the static solutions of the sine-Gordon "
                      "equation, interpolated in a table against Phi/Phi0 and L/lambda_J, "
                      "with L/lambda_J a fitted parameter and Phi = B L d'"),
        references=REFERENCES,
        extra=(ExtraParameter("length_over_josephson_depth", start=1.0, even=True,
                              description="junction length over the Josephson penetration "
                                          "depth",
                              grid=(0.5, 1.5, 2.5, 3.5, 5.0, 6.5, 8.0, 10.0),
                              limit=LENGTH_LIMIT),),
        # The scan slides the pattern at L/lambda_J = 0, the sinc: the same function as the
        # rectangular model's, so that an automatic choice scans once for both.
        unit_shape=unit_shape,
        derive=derive,
        gradient=model_gradient,
        ic0_meaning="Ic at the centre of the pattern; Jc W L = Ic0 / g(0; L/lambda_J) is "
                    "derived",
    )
