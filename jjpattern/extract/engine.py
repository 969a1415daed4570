"""Critical currents Ic+ and Ic- from a raw map, with a stated criterion.

Switching is read on sweeps moving away from zero bias, retrapping on
sweeps moving back; only switching is fitted as Ic. Rows that never switch
inside the bias window, or are resistive from the first bias step, are
censored rather than given a number.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..flags import make_flag
from ..io.maps import IVMap
from ..io.sweep import MIN_POINTS, Branch, Sweep
from ..sampling import tidy
from . import criteria as cr

CRITERIA = ("voltage", "dvdi-peak", "dvdi-threshold", "resistance")
#: Default voltage threshold in units of the zero-voltage-branch noise.
VOLTAGE_SIGMAS = 5.0
#: Default dV/dI threshold as a fraction of Rn.
DVDI_FRACTION = 0.5
#: Default V/I threshold as a fraction of Rn.
RESISTANCE_FRACTION = 0.05
#: A row with less than this fraction of finite points is skipped.
MIN_FINITE_FRACTION = 0.5
#: Retrapping over switching below this means a hysteretic (underdamped) junction.
HYSTERESIS_RATIO = 0.95


@dataclass
class BranchExtraction:
    """One bias polarity: Ic per field row, its status, and the retrapping current."""

    name: str
    ic_A: np.ndarray
    status: np.ndarray
    retrap_A: np.ndarray
    source: str  # "switching" or "return-sweep"
    retrapping_ratio: float | None = None

    def counts(self) -> dict:
        values, counts = np.unique(self.status, return_counts=True)
        return {str(v): int(c) for v, c in zip(values, counts, strict=True)}


@dataclass
class Extraction:
    """Both branches of a map and every setting that produced them."""

    ivmap: IVMap
    field_T: np.ndarray
    branches: list
    criterion: str
    threshold: dict
    offset_V: float | None
    noise: float | None  # volt; None for dV/dI maps
    rn_ohm: float | None
    rows_skipped: int
    flags: list = field(default_factory=list)

    def settings(self) -> dict:
        """The ``extraction`` block of the JSON document."""
        return {
            "criterion": self.criterion,
            "threshold": dict(self.threshold),
            "signal": self.ivmap.kind,
            "layout": self.ivmap.layout,
            "map_shape": list(self.ivmap.shape),
            "amplifier_offset_V": self.offset_V,
            "zero_branch_noise_V": self.noise,
            "normal_resistance_ohm": self.rn_ohm,
            "rows_skipped": self.rows_skipped,
            "branches": [
                {"branch": b.name, "source": b.source, "status_counts": b.counts(),
                 "retrapping_over_switching": b.retrapping_ratio}
                for b in self.branches
            ],
        }

    def to_sweep(self) -> Sweep:
        """The extracted Ic(B) as a sweep; censored rows are left out and counted."""
        out = []
        for b in self.branches:
            ok = b.status == "ok"
            if b.source == "return-sweep" and _hysteretic(self.branches):
                continue
            clean = tidy(self.field_T[ok], b.ic_A[ok])
            if clean.x.size >= MIN_POINTS:
                out.append(Branch(b.name, f"{self.criterion} extraction", clean.x, clean.y,
                                  int((~ok).sum()), clean.merged))
        if not out:
            raise InputError(f"{self.ivmap.path}: fewer than {MIN_POINTS} field rows gave a "
                             "critical current; check the bias window and the criterion")
        return Sweep(self.ivmap.path, self.ivmap.sha256, tuple(out), dict(self.ivmap.metadata),
                     "field", int(self.field_T.size))

    def table_csv(self) -> str:
        """The extracted table, SI units in the header, censored values left empty."""
        cols = ["field_T"]
        data = [self.field_T]
        for b in self.branches:
            short = "pos" if b.name == "positive" else "neg"
            cols += [f"ic_{short}_A", f"status_{short}", f"iretrap_{short}_A"]
            data += [b.ic_A, b.status, b.retrap_A]
        lines = [",".join(cols)]
        for i in range(self.field_T.size):
            cells = []
            for column in data:
                v = column[i]
                if isinstance(v, str):
                    cells.append(v)
                else:
                    cells.append("" if not np.isfinite(v) else repr(float(v)))
            lines.append(",".join(cells))
        return "\n".join(lines) + "\n"


def _hysteretic(branches) -> bool:
    ratios = [b.retrapping_ratio for b in branches if b.retrapping_ratio is not None]
    return bool(ratios) and min(ratios) < HYSTERESIS_RATIO


def extract(ivmap: IVMap, *, criterion: str = "auto", threshold: float | None = None
            ) -> Extraction:
    """Extract Ic+ and Ic- from every field row of ``ivmap``; see :func:`_extract`.

    Rows that are all missing or empty slices are expected here and end as
    censored rows or NaN, so numpy's warnings about them are silenced.
    """
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        with np.errstate(all="ignore"):
            return _extract(ivmap, criterion=criterion, threshold=threshold)


def _extract(ivmap: IVMap, *, criterion: str = "auto", threshold: float | None = None
             ) -> Extraction:
    """Extract Ic+ and Ic- from every field row of ``ivmap``.

    Parameters
    ----------
    criterion : {'auto', 'voltage', 'dvdi-peak', 'dvdi-threshold', 'resistance'}
        ``auto`` is ``voltage`` for voltage maps and ``dvdi-peak`` for dV/dI maps.
    threshold : float, optional
        In SI: volt for ``voltage``, ohm for ``dvdi-threshold``, a fraction of
        Rn for ``resistance``. By default 5 sigma of the zero-voltage-branch
        noise, 0.5 Rn and 0.05 Rn.
    """
    if criterion == "auto":
        criterion = "voltage" if ivmap.kind == "voltage" else "dvdi-peak"
    if criterion not in CRITERIA:
        raise InputError(f"unknown criterion {criterion!r}; use {', '.join(CRITERIA)}")
    if ivmap.kind == "dvdi" and criterion in ("voltage", "resistance"):
        raise InputError(f"{ivmap.path}: the map holds dV/dI, so the {criterion} criterion "
                         "cannot be used; choose dvdi-peak or dvdi-threshold")
    bias, sig = ivmap.bias_A, ivmap.signal
    finite = np.isfinite(sig) & (np.isfinite(bias[:1]) if cr.shared(bias) else np.isfinite(bias))
    dense = bool(finite.all())
    keep = (np.ones(sig.shape[0], dtype=bool) if dense else
            np.count_nonzero(finite, axis=1) >= MIN_FINITE_FRACTION * sig.shape[1])
    if keep.sum() < MIN_POINTS:
        raise InputError(f"{ivmap.path}: only {int(keep.sum())} field rows hold data; "
                         f"at least {MIN_POINTS} are needed")
    if not keep.all():
        sig = sig[keep]
        bias = (np.broadcast_to(bias[0], sig.shape) if cr.shared(bias) else bias[keep])
    field_T = ivmap.field_T[keep]

    offset = noise = None
    offsets = np.zeros(sig.shape[0])
    if ivmap.kind == "voltage":
        offsets = cr.row_offset(sig, bias)
        offsets = np.where(np.isfinite(offsets), offsets, np.nanmedian(offsets))
        offset = float(np.nanmedian(offsets))
        # Second differences and the slope of V(I) do not see the offset: no need to
        # subtract it from the whole map first.
        noise = cr.zero_branch_noise(sig, bias)
    rn_rows = cr.normal_resistance(sig, bias, ivmap.kind)
    rn = float(np.nanmedian(rn_rows)) if np.isfinite(rn_rows).any() else None

    quantity, level, info = _quantity(criterion, threshold, ivmap, sig, offsets, bias, noise,
                                      rn)
    # A dV/dI computed here is NaN near the turns of the sweep, even on a dense map.
    dense = dense and not (criterion.startswith("dvdi") and ivmap.kind == "voltage")
    branches = []
    for name, sign in (("positive", 1.0), ("negative", -1.0)):
        def part(b, sign=sign, out=True):
            moving = cr.directions(b)[0 if out else 1]
            return moving & (sign * b > 0)

        branches.append(_branch(
            name, criterion, quantity, level, bias, cr.select(bias, part, dense),
            cr.select(bias, lambda b, p=part: p(b, out=False), dense)))
    result = Extraction(ivmap, field_T, branches, criterion, info, offset, noise, rn,
                        int((~keep).sum()))
    result.flags = _flags(result)
    return result


def _quantity(criterion, threshold, ivmap, sig, offsets, bias, noise, rn):
    """The quantity compared with the level, the level, and how the level was chosen."""
    if criterion == "voltage":
        if threshold is None:
            if not noise or not np.isfinite(noise):
                raise InputError(f"{ivmap.path}: the zero-voltage noise could not be "
                                 "estimated; give the threshold with --threshold")
            level, how = VOLTAGE_SIGMAS * noise, f"{VOLTAGE_SIGMAS:g} x zero-branch noise"
        else:
            level, how = float(threshold), "given"
        return cr.Deviation(sig, offsets), level, {"value": level, "unit": "V", "chosen": how}
    if rn is None and (threshold is None or criterion == "resistance"):
        raise InputError(f"{ivmap.path}: Rn could not be fitted from the high-bias part; "
                         "give --threshold")
    if criterion == "resistance":
        frac = RESISTANCE_FRACTION if threshold is None else float(threshold)
        # V/I is pure noise near zero bias: only voltages above the noise count.
        floor = VOLTAGE_SIGMAS * noise
        ratio = np.subtract(sig, offsets[:, None])  # the one full copy of the map
        quiet = (ratio <= floor) & (ratio >= -floor)
        with np.errstate(all="ignore"):
            np.divide(ratio, bias, out=ratio)
        ratio[quiet] = 0.0
        return ratio, frac * rn, {"value": frac * rn, "unit": "ohm", "fraction_of_rn": frac,
                                  "voltage_floor_V": floor,
                                  "chosen": "given" if threshold is not None else "default"}
    # A derivative does not see the offset; it is the one new map-sized array.
    dvdi = sig if ivmap.kind == "dvdi" else cr.differential(sig, bias)
    dvdi_noise = cr.zero_branch_noise(dvdi, bias)
    if criterion == "dvdi-peak":
        return dvdi, None, {"value": None, "unit": "ohm", "chosen": "largest dV/dI",
                            "derivative": "measured" if ivmap.kind == "dvdi"
                            else "Savitzky-Golay, quadratic, 7 points"}
    if threshold is not None:
        return dvdi, float(threshold), {"value": float(threshold), "unit": "ohm",
                                        "chosen": "given"}
    # Half of Rn, but never inside the noise of dV/dI on the supercurrent branch.
    level = max(DVDI_FRACTION * rn, VOLTAGE_SIGMAS * dvdi_noise)
    return dvdi, level, {"value": level, "unit": "ohm", "dvdi_noise_ohm": dvdi_noise,
                         "chosen": f"larger of {DVDI_FRACTION:g} x Rn and "
                                   f"{VOLTAGE_SIGMAS:g} x dV/dI noise"}


def _branch(name, criterion, q, level, bias, out_seg, in_seg) -> BranchExtraction:
    q_out, out = out_seg.take(q)
    q_in, inb = in_seg.take(q)
    b_out, b_in = out_seg.bias(bias), in_seg.bias(bias)
    has_out = np.count_nonzero(out, axis=1) >= 3
    if criterion == "dvdi-peak":
        ic, found, first = _peak_status(q_out, b_out, out)
        ret, r_found, _ = _peak_status(q_in, b_in, inb)
    else:
        ic, found, first = cr.crossing(level, q_out, b_out, out, upward=True)
        ret, r_found, _ = cr.crossing(level, q_in, b_in, inb, upward=False)
    status = np.where(found & ~first, "ok", np.where(found, "below-step", "above-max"))
    status = np.where(has_out, status, "no-data")
    source = "switching"
    if has_out.mean() < 0.5:
        # Only sweeps towards zero on this side: their transition is the retrapping current.
        source, ic = "return-sweep", ret
        status = np.where(r_found, "ok", np.where(inb.any(axis=1), "above-max", "no-data"))
    ic = np.where(status == "ok", ic, np.nan)
    ratio = None
    both = (status == "ok") & r_found & (source == "switching")
    if both.sum() >= 3:
        ratio = float(np.median(ret[both] / ic[both]))
    return BranchExtraction(name, ic, status.astype(object), np.where(r_found, ret, np.nan),
                            source, ratio)


def _peak_status(q, bias, candidates):
    current, found, edge = cr.peak(q, bias, candidates)
    if cr.shared(bias) and candidates.strides == (0, 0):
        top = np.full(q.shape[0], np.max(np.abs(bias[0]), initial=-1.0))
    else:
        top = np.max(np.where(candidates, np.abs(bias), -1.0), axis=1, initial=-1.0)
    at_top = edge & np.isclose(current, top)
    # A peak on the largest |I| never came inside the window: censored above, not "ok".
    return current, found & ~at_top, edge & ~at_top


def _flags(result: Extraction) -> list:
    flags = []
    for b in result.branches:
        counts = b.counts()
        censored = {k: v for k, v in counts.items() if k in ("above-max", "below-step")}
        if censored:
            flags.append(make_flag("censored-rows", b.name, **censored,
                                   rows=int(result.field_T.size)))
        if b.retrapping_ratio is not None and b.retrapping_ratio < HYSTERESIS_RATIO:
            flags.append(make_flag("hysteretic", b.name,
                                   retrapping_over_switching=round(b.retrapping_ratio, 4),
                                   threshold=HYSTERESIS_RATIO))
        if b.source == "return-sweep":
            flags.append(make_flag("return-sweep-branch", b.name,
                                   fitted=not _hysteretic(result.branches)))
    return flags
