"""Rounded I-V curves (phase diffusion): detection, and the Ambegaokar-Halperin fit.

An overdamped junction with thermal noise has no zero-voltage branch: the phase
slips now and then below Ic, so V(I) bends up smoothly before the nominal
switching point and a voltage threshold reads Ic low. With the noise as a
temperature, the time-averaged voltage is known exactly (V. Ambegaokar and
B. I. Halperin, Phys. Rev. Lett. 22, 1364 (1969); the same Fokker-Planck
result as Yu. M. Ivanchenko and L. A. Zil'berman, Sov. Phys. JETP 28, 1272
(1969)). With i = I/Ic, Gamma = k_B T / E_J and E_J = hbar Ic / (2e):

    V / (Ic R) = 2 pi Gamma (1 - exp(-2 pi i / Gamma)) / S,
    S = int_0^{2 pi} dphi int_phi^{phi + 2 pi} dpsi exp[(U(psi) - U(phi)) / Gamma],
    U(phi) = -i phi - cos(phi).

Detection on the rows at the top of the main lobe: voltage below the
switching point (the mean voltage between 0.6 of the switching current and
the current where a resistively shunted junction would still be at zero
voltage, against the noise), or a knee softer than the RSJ's (the RSJ Ic
extrapolated from the resistive branch lies above the switching current).
Where either shows, each such row's outbound sweep is fitted with
(Ic, Gamma, R); significant Gamma confirms the rounding, and the fit gives the
noise-free Ic and an effective noise temperature T = Gamma E_J / k_B.
"""

from __future__ import annotations

import numpy as np

#: Points per 2 pi of the phase for the double integral (relative error ~1e-4).
PHASE_POINTS = 256
#: Rows at the top of the main lobe: contiguous with the largest Ic, above this fraction.
TOP_FRACTION = 0.9
#: At most this many top rows are tested and fitted (the closest to the largest Ic).
TOP_ROWS = 7
#: The mean voltage below switching must exceed this many standard errors.
FOOT_SIGMAS = 5.0
#: Lower end of the window below switching, as a fraction of the switching current.
FOOT_FROM = 0.6
#: At most this many points of a row go into its fit, up to this many times its
#: switching current.
FIT_POINTS = 80
FIT_TO = 2.0
#: The resistive branch used for the RSJ Ic, in units of the switching current.
KNEE_FROM, KNEE_TO = 1.15, 1.6
#: A knee above the switching current by less than this fraction is not looked into.
KNEE_MIN_SHORTFALL = 0.01


def _log_cell(lo, hi, width):
    """log of the integral over a cell of width ``width`` of exp(linear from lo to hi)."""
    half = 0.5 * np.abs(hi - lo)
    with np.errstate(divide="ignore", invalid="ignore"):
        big = half + np.log1p(-np.exp(-2.0 * half)) - np.log(2.0 * half)
    return np.log(width) + 0.5 * (lo + hi) + np.where(half > 1e-3, big, half**2 / 6.0)


def ah_voltage(i, gamma, points=PHASE_POINTS):
    """V / (Ic R) of an overdamped junction at bias ``i = I/Ic`` and ``gamma = kT/E_J``.

    Vectorised over broadcast ``i`` and ``gamma`` (``i >= 0``). The inner
    integral is done cell by cell with the exponent linear in each cell and the
    sums in logarithms, so any ``gamma`` down to 1e-4 is safe; ``gamma -> 0``
    gives sqrt(i^2 - 1) above 1 and 0 below.
    """
    i, g = np.broadcast_arrays(np.asarray(i, dtype=float), np.asarray(gamma, dtype=float))
    shape = i.shape
    i, g = i.reshape(-1, 1), g.reshape(-1, 1)
    phi = np.linspace(0.0, 2.0 * np.pi, points + 1)
    width = phi[1] - phi[0]
    a = (i * phi + np.cos(phi)) / g  # -U / Gamma at the nodes
    cells = _log_cell(-a[:, :-1], -a[:, 1:], width)
    none = np.full((a.shape[0], 1), -np.inf)
    before = np.concatenate([none, np.logaddexp.accumulate(cells, axis=1)], axis=1)
    after = np.concatenate([np.logaddexp.accumulate(cells[:, ::-1], axis=1)[:, ::-1], none],
                           axis=1)
    # int_phi^{phi + 2 pi} = int_phi^{2 pi} + exp(-2 pi i / Gamma) int_0^phi (U(psi + 2 pi)
    # = U(psi) - 2 pi i): no difference of large numbers.
    inner = np.logaddexp(after, -2.0 * np.pi * i / g + before)[:, :-1]
    outer = np.logaddexp.reduce(a[:, :-1] + inner, axis=1) + np.log(width)
    v = 2.0 * np.pi * g[:, 0] * -np.expm1(-2.0 * np.pi * i[:, 0] / g[:, 0]) * np.exp(-outer)
    return v.reshape(shape)


def josephson_energy_J(ic_A):
    """E_J = hbar Ic / (2e)."""
    from scipy import constants

    return constants.hbar * np.asarray(ic_A) / (2.0 * constants.e)


def fit_row(bias_A, volts, ic_guess_A, rn_guess_ohm, noise_V):
    """Fit one outbound sweep (|I| ascending, V >= 0 sense) with (Ic, Gamma, R).

    Returns ``dict(ic_A, gamma, rn_ohm, ic_stderr_A, gamma_stderr, redchi)`` or
    ``None`` when the fit does not converge to a finite answer.
    """
    from scipy import optimize

    scale_i, scale_v = float(ic_guess_A), float(ic_guess_A * rn_guess_ohm)
    x, y = bias_A / scale_i, volts / scale_v
    sigma = max(noise_V / scale_v, 1e-9)

    def residual(p):
        ic, gamma, rn = np.exp(p)
        return (ic * rn * ah_voltage(x / ic, gamma) - y) / sigma

    start = np.log([1.05, 0.02, 1.0])
    try:
        res = optimize.least_squares(residual, start, method="trf", x_scale=1.0,
                                     bounds=(np.log([0.3, 1e-4, 0.2]), np.log([3.0, 2.0, 5.0])))
    except (ValueError, FloatingPointError):
        return None
    if not res.success or not np.all(np.isfinite(res.x)):
        return None
    ic, gamma, rn = np.exp(res.x)
    dof = max(x.size - 3, 1)
    redchi = float(np.sum(res.fun**2) / dof)
    try:
        cov = np.linalg.inv(res.jac.T @ res.jac) * max(redchi, 1.0)
    except np.linalg.LinAlgError:
        return None
    err = np.sqrt(np.clip(np.diag(cov), 0.0, None))  # of the logarithms
    return {"ic_A": ic * scale_i, "gamma": float(gamma), "rn_ohm": rn * rn_guess_ohm,
            "ic_stderr_A": float(ic * scale_i * err[0]), "gamma_stderr": float(gamma * err[1]),
            "redchi": redchi}


def _row(signal, bias_A, r):
    return signal[r], (bias_A[0] if bias_A.strides[0] == 0 else bias_A[r])


def knee_current(mag, volts, i_sw, noise_V):
    """Ic of a resistively shunted junction from the resistive branch, and its error.

    A weighted straight line of V^2 against I^2 through the points between
    1.15 and 1.6 times the switching current, where rounding has faded;
    ``(ic_A, stderr_A)`` or ``None`` (fewer than 4 points, or no zero crossing).
    """
    window = (mag >= KNEE_FROM * i_sw) & (mag <= KNEE_TO * i_sw)
    if window.sum() < 4:
        return None
    x, q = mag[window] ** 2, volts[window] ** 2
    w = 1.0 / (2.0 * np.abs(volts[window]) * noise_V + noise_V**2) ** 2
    xm, qm = np.sum(w * x) / w.sum(), np.sum(w * q) / w.sum()
    sxx = np.sum(w * (x - xm) ** 2)
    slope = np.sum(w * (x - xm) * (q - qm)) / sxx
    if not slope > 0:
        return None
    kink = xm - qm / slope
    if not kink > 0:
        return None
    err_x = np.sqrt(1.0 / w.sum() + (kink - xm) ** 2 / sxx) / slope
    return float(np.sqrt(kink)), float(err_x / (2.0 * np.sqrt(kink)))


def lobe_peak(field_T, ic_A) -> float:
    """Largest Ic of the main lobe: the vertex of a parabola through its top rows.

    The rows above :data:`TOP_FRACTION` of the largest Ic; the largest value
    itself (biased up by the noise) only where the parabola does not apply.
    """
    from .hysteresis import main_lobe_rows

    rows = main_lobe_rows(field_T, ic_A, TOP_FRACTION)
    x, y = np.asarray(field_T)[rows], np.asarray(ic_A)[rows]
    largest = float(np.nanmax(ic_A))
    if x.size < 4 or np.ptp(x) == 0:
        return largest
    centre, half = 0.5 * (x.max() + x.min()), 0.5 * np.ptp(x)
    a, b, c = np.polyfit((x - centre) / half, y, 2)
    vertex = -b / (2 * a) if a < 0 else np.inf
    if abs(vertex) > 1:
        return largest
    return float(c - b * b / (4 * a))


def rounding_summary(field_T, signal, bias_A, offsets_V, noise_V, rn_ohm, level_V, ic_A,
                     sign) -> dict | None:
    """Rounding tests at the top of the main lobe and, where they fire, the AH fits.

    Two tests per row, medians over the top rows: ``foot_sigmas``, the mean
    voltage between 0.6 of the switching current and the current where a
    resistively shunted junction would still read zero, in standard errors;
    ``knee_sigmas``, how far above the switching current the RSJ Ic
    extrapolated from the resistive branch (:func:`knee_current`) lies, in its
    standard errors (``knee_shortfall_fraction`` is 1 - I_sw / that Ic). Where
    either exceeds :data:`FOOT_SIGMAS` (and the knee by over 1 %) the rows are
    fitted (:func:`fit_row`); the curves are ``rounded`` when the fitted Gamma
    is that many of its standard errors above zero. ``level_V`` is the voltage
    criterion's level (the engine runs this for that criterion only), ``ic_A``
    the extracted switching current per row, ``sign`` the polarity. ``None``
    when no row could be tested.
    """
    from . import criteria as cr
    from .hysteresis import main_lobe_rows

    if not noise_V or not np.isfinite(noise_V):
        return None
    top = np.flatnonzero(main_lobe_rows(field_T, ic_A, TOP_FRACTION))
    top = top[np.argsort(-ic_A[top])][:TOP_ROWS]
    floor = level_V / rn_ohm if level_V and rn_ohm else 0.0
    rows, feet, knees, curves = [], [], [], []
    one_row = bias_A.strides[0] == 0
    sweep = None  # the sweep part in order of |I|, once for a bias row shared by all rows
    for r in top:
        v, b = _row(signal, bias_A, r)
        if sweep is None or not one_row:
            idx = np.flatnonzero(cr.directions(b[None, :])[0][0] & (sign * b > 0))
            idx = idx[np.argsort(sign * b[idx], kind="stable")]
            sweep = idx, (float(np.median(np.diff(sign * b[idx]))) if idx.size > 1 else 0.0)
        idx, step = sweep
        finite = np.isfinite(v[idx])
        if not finite.all():
            idx = idx[finite]
            step = float(np.median(np.diff(sign * b[idx]))) if idx.size > 1 else 0.0
        mag, volts = sign * b[idx], sign * (v[idx] - offsets_V[r])
        if mag.size < 10:
            continue
        i_sw = float(ic_A[r])
        knee = knee_current(mag, volts, i_sw, noise_V)
        # Below the current where a resistively shunted junction would still read zero:
        # the reading less the criterion's own floor, and the RSJ Ic of the resistive
        # branch where that is lower (a criterion that reads above Ic).
        zero_until = np.sqrt(max(i_sw**2 - floor**2, 0.0))
        if knee is not None:
            zero_until = min(zero_until, knee[0] - 3.0 * knee[1])
        window = (mag >= FOOT_FROM * i_sw) & (mag < zero_until - step)
        if window.sum() < 3:
            continue
        rows.append(r)
        feet.append(float(volts[window].sum() / (noise_V * np.sqrt(window.sum()))))
        knees.append((np.nan, np.nan) if knee is None else
                     ((knee[0] - i_sw) / knee[1], 1.0 - i_sw / knee[0]))
        curves.append((mag, volts))
    if not rows:
        return None
    # Medians of the finite values per column (np.nanmedian is slow on a few values).
    knee_sigmas, knee_short = (float(np.median(c[np.isfinite(c)])) if np.isfinite(c).any()
                               else np.nan for c in np.array(knees).T)
    out = {"rows_tested": len(rows), "foot_sigmas": round(float(np.median(feet)), 2),
           "knee_sigmas": None if np.isnan(knee_sigmas) else round(float(knee_sigmas), 2),
           "knee_shortfall_fraction": None if np.isnan(knee_short) else float(knee_short),
           "threshold_sigmas": FOOT_SIGMAS, "rounded": False}
    suspect = (out["foot_sigmas"] > FOOT_SIGMAS
               or (knee_sigmas > FOOT_SIGMAS and knee_short > KNEE_MIN_SHORTFALL))
    if not suspect or not rn_ohm:
        return out
    from scipy import constants

    found = []
    for r, (mag, volts) in zip(rows, curves, strict=True):
        keep = mag <= FIT_TO * ic_A[r]
        stride = max(1, int(np.ceil(keep.sum() / FIT_POINTS)))
        got = fit_row(mag[keep][::stride], volts[keep][::stride], ic_A[r], rn_ohm, noise_V)
        if got is not None:
            got["temperature_K"] = float(got["gamma"] * josephson_energy_J(got["ic_A"])
                                         / constants.k)
            found.append((r, got))
    out["rows_fitted"] = len(found)
    if not found:
        return out
    gammas = np.array([g["gamma"] / max(g["gamma_stderr"], 1e-300) for _, g in found])
    out["rounded"] = bool(np.median(gammas) > FOOT_SIGMAS)
    first = max(found, key=lambda item: ic_A[item[0]])[1]
    temps = np.array([g["temperature_K"] for _, g in found])
    # Noise-free over extracted Ic per row: within a tenth of the largest Ic the rows
    # share nearly one Gamma, so the median factor carries over to the fitted Ic0.
    factor = np.array([g["ic_A"] / ic_A[r] for r, g in found])
    spread = float(np.std(factor, ddof=1) / np.sqrt(factor.size)) if factor.size > 1 else None
    peak = lobe_peak(field_T, ic_A)
    out.update({
        "shortfall_fraction": float(1.0 - 1.0 / np.median(factor)),
        "ic_noise_free_over_extracted": float(np.median(factor)),
        "ic_noise_free_over_extracted_stderr": spread,
        "ic_peak_extracted_A": peak,
        "ic_peak_noise_free_A": peak * float(np.median(factor)),
        "gamma_at_top": first["gamma"],
        "gamma_sigmas": round(float(np.median(gammas)), 2),
        "noise_temperature_K": float(np.median(temps)),
        "noise_temperature_spread_K": float(np.std(temps, ddof=1)) if temps.size > 1 else None,
        "model": "Ambegaokar-Halperin, overdamped junction with thermal noise",
    })
    return out
