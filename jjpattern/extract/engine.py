"""Critical currents Ic+ and Ic- from a raw map, with a stated criterion.

Switching is read on sweeps moving away from zero bias, retrapping on
sweeps moving back; only switching is fitted as Ic. Rows that never switch
inside the bias window, or are resistive from the first bias step, are
censored rather than given a number. What is compared with what (the
criterion) comes from :mod:`.registry`; this module only walks the sweeps.
"""

from __future__ import annotations

import warnings
from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..flags import make_flag
from ..fmt import csv_number
from ..io.digest import held
from ..io.maps import IVMap
from ..io.sweep import MIN_POINTS, Branch, Sweep
from ..sampling import tidy
from . import criteria as cr
from .hysteresis import retrapping_summary
from .registry import (  # noqa: F401 (the defaults are part of this module's interface)
    DVDI_FRACTION,
    RESISTANCE_FRACTION,
    VOLTAGE_SIGMAS,
    MapData,
    check_threshold,
    criterion_names,
    get_criterion,
    resolve,
)
from .rounding import rounding_summary

#: The registered criteria (``auto`` aside), as the command line lists them.
CRITERIA = criterion_names(auto=False)
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
    #: Per row: the bias step / sqrt(12) where the step is not resolved, else the
    #: noise propagated through the onset (see :mod:`.onset`); NaN where censored.
    ic_uncertainty_A: np.ndarray | None = None
    #: Retrapping at the main lobe and the beta_c estimate (:mod:`.hysteresis`).
    retrapping: dict | None = None
    #: Voltage below switching and the Ambegaokar-Halperin fit (:mod:`.rounding`).
    phase_diffusion: dict | None = None

    def counts(self) -> dict:
        # A Counter over the labels: np.unique sorts the object array in Python.
        return {str(v): int(c) for v, c in sorted(Counter(self.status.tolist()).items())}


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
        return Sweep(self.ivmap.path, held(self.ivmap), tuple(out), dict(self.ivmap.metadata),
                     "field", int(self.field_T.size))

    def methods_text(self) -> tuple[str, dict]:
        """The criterion's sentence for a methods section, and the references it cites."""
        crit = get_criterion(self.criterion)
        n_f, n_b = self.ivmap.shape
        what = f"a {n_f} x {n_b} {'voltage' if self.ivmap.kind == 'voltage' else 'dV/dI'} map"
        note, refs = crit.note(self.ivmap.kind)
        text = f"Critical currents were extracted from {what} as {crit.rule(self.threshold)}."
        return text + note, refs

    def to_dict(self) -> dict:
        """A JSON-ready summary without the raw map: the settings, Ic per row, methods text.

        NaN becomes ``None``. A report can render it alone, and
        :func:`extraction_table_csv` makes the table from it.
        """
        s = self.settings()
        text, refs = self.methods_text()
        out = {key: s[key] for key in ("criterion", "threshold", "signal", "layout",
                                       "map_shape", "amplifier_offset_V",
                                       "zero_branch_noise_V", "normal_resistance_ohm",
                                       "rows_skipped")}
        out["field_T"] = self.field_T
        out["branches"] = [
            {**summary, "ic_A": b.ic_A, "status": [str(v) for v in b.status],
             "retrap_A": b.retrap_A, "ic_uncertainty_A": b.ic_uncertainty_A,
             **(b.retrapping or {}), "phase_diffusion": b.phase_diffusion}
            for summary, b in zip(s["branches"], self.branches, strict=True)]
        out["methods_text"] = text
        out["methods_references"] = refs
        return _plain(out)

    def table_csv(self) -> str:
        """The extracted table, SI units in the header, censored values left empty."""
        return extraction_table_csv(self.to_dict())


def _plain(value):
    """Python lists, floats and dicts for JSON, NaN and infinities as ``None``."""
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, np.ndarray)):
        return [_plain(v) for v in (value.tolist() if isinstance(value, np.ndarray) else value)]
    if isinstance(value, (float, np.floating)):
        return float(value) if np.isfinite(value) else None
    if isinstance(value, np.integer):
        return int(value)
    return value


def extraction_table_csv(block: dict) -> str:
    """The extracted table from an :meth:`Extraction.to_dict` block.

    SI units in the header, one line per kept field row, censored values
    (``None``) left empty.
    """
    cols = ["field_T"]
    data = [block["field_T"]]
    for b in block["branches"]:
        short = "pos" if b["branch"] == "positive" else "neg"
        cols += [f"ic_{short}_A", f"status_{short}", f"iretrap_{short}_A"]
        data += [b["ic_A"], b["status"], b["retrap_A"]]
    lines = [",".join(cols)]
    for row in zip(*data, strict=True):
        lines.append(",".join(v if isinstance(v, str) else csv_number(v) for v in row))
    return "\n".join(lines) + "\n"


def _ratio(b) -> float | None:
    """Retrapping over switching at the main lobe, else over every row."""
    lobe = (b.retrapping or {}).get("retrapping_over_switching_main_lobe")
    return lobe if lobe is not None else b.retrapping_ratio


def _hysteretic(branches) -> bool:
    ratios = [_ratio(b) for b in branches if _ratio(b) is not None]
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
    criterion : str
        One of :func:`.registry.criterion_names`: ``auto`` (``voltage`` for
        voltage maps, ``dvdi-peak`` for dV/dI maps), ``voltage``, ``dvdi-peak``,
        ``dvdi-threshold``, ``resistance``.
    threshold : float, optional
        Positive, in SI: volt for ``voltage``, ohm for ``dvdi-threshold``, a
        fraction of Rn for ``resistance``; ``dvdi-peak`` takes none. By default
        5 sigma of the zero-voltage-branch noise, 0.5 Rn and 0.05 Rn.
    """
    crit = resolve(criterion, ivmap.kind, ivmap.path)
    check_threshold(crit, threshold)
    bias, sig = ivmap.bias_A, ivmap.signal
    dense = cr.all_finite(sig) and cr.all_finite(bias[:1] if cr.shared(bias) else bias)
    if dense:
        keep = np.ones(sig.shape[0], dtype=bool)
    else:
        finite = np.isfinite(sig) & (np.isfinite(bias[:1]) if cr.shared(bias)
                                     else np.isfinite(bias))
        keep = np.count_nonzero(finite, axis=1) >= MIN_FINITE_FRACTION * sig.shape[1]
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
        # Second differences and the slope of V(I) do not see the offset: no need to
        # subtract it from the whole map first.
        noise = cr.zero_branch_noise(sig, bias)
        offsets = cr.row_offset(sig, bias, noise, dense)
        offsets = np.where(np.isfinite(offsets), offsets, np.nanmedian(offsets))
        offset = float(np.nanmedian(offsets))
    rn_rows = cr.normal_resistance(sig, bias, ivmap.kind)
    rn = float(np.nanmedian(rn_rows)) if np.isfinite(rn_rows).any() else None

    data = MapData(ivmap.path, ivmap.kind, sig, bias, offsets, noise, rn, dense)
    level, info = crit.level(data, threshold)
    quantity = crit.quantity(data)
    # A derivative is NaN near the turns of a dense map: those points are left out of the
    # parts of the sweep, so the rest stays on the dense path (no finite-value masks).
    gaps = crit.gaps_near_turns(ivmap.kind)
    branches = []
    for name, sign in (("positive", 1.0), ("negative", -1.0)):
        def part(b, sign=sign, out=True):
            moving = cr.directions(b)[0 if out else 1] & (sign * b > 0)
            return moving & ~cr.near_turns(b) if gaps else moving

        branches.append(_branch(
            name, crit, quantity, level, bias, cr.select(bias, part, dense),
            cr.select(bias, lambda b, p=part: p(b, out=False), dense),
            crit.quantity_noise(data)))
    for b, sign in zip(branches, (1.0, -1.0), strict=True):
        if b.source == "switching":
            b.retrapping = retrapping_summary(field_T, b.ic_A, b.retrap_A)
            if crit.name == "voltage":
                # The derivative and V/I criteria read Ic off by their own shapes
                # (smoothing, the fraction of Rn): the tests below assume the threshold.
                b.phase_diffusion = rounding_summary(field_T, sig, bias, offsets, noise, rn,
                                                     level, b.ic_A, sign)
    result = Extraction(ivmap, field_T, branches, crit.name, info, offset, noise, rn,
                        int((~keep).sum()))
    result.flags = _flags(result)
    return result


def _located(crit, q, level, b, candidates, upward, noise):
    """``crit.locate`` with the uncertainty filled in when an override gives none."""
    got = crit.locate(q, level, b, candidates, upward=upward, noise=noise)
    if len(got) > 3:
        return got
    rows = np.arange(b.shape[0])
    ab = np.abs(b)
    usual = cr.nanmedian_rows(np.abs(np.diff(ab, axis=1))) if b.shape[1] > 1 else rows * 0.0
    return (*got, np.where(got[1], usual / np.sqrt(12.0), np.nan))


def _count(valid):
    """Valid points per row; a broadcast mask (no gaps) is counted without reading it."""
    if valid.strides == (0, 0):
        return np.full(valid.shape[0], valid.shape[1] if valid.size and valid.flat[0] else 0)
    return np.count_nonzero(valid, axis=1)


def _branch(name, crit, q, level, bias, out_seg, in_seg, noise=None) -> BranchExtraction:
    q_out, out = out_seg.take(q)
    q_in, inb = in_seg.take(q)
    b_out, b_in = out_seg.bias(bias), in_seg.bias(bias)
    has_out = _count(out) >= 3
    ic, found, first, spread = _located(crit, q_out, level, b_out, out, True, noise)
    ret, r_found, _, r_spread = _located(crit, q_in, level, b_in, inb, False, noise)
    status = np.where(found & ~first, "ok", np.where(found, "below-step", "above-max"))
    status = np.where(has_out, status, "no-data")
    source = "switching"
    if has_out.mean() < 0.5:
        # Only sweeps towards zero on this side: their transition is the retrapping current.
        source, ic, spread = "return-sweep", ret, r_spread
        status = np.where(r_found, "ok", np.where(_count(inb) > 0, "above-max", "no-data"))
    ic = np.where(status == "ok", ic, np.nan)
    spread = np.where(status == "ok", spread, np.nan)
    ratio = None
    both = (status == "ok") & r_found & (source == "switching")
    if both.sum() >= 3:
        ratio = float(np.median(ret[both] / ic[both]))
    return BranchExtraction(name, ic, status.astype(object), np.where(r_found, ret, np.nan),
                            source, ratio, spread)


def _flags(result: Extraction) -> list:
    flags = []
    for b in result.branches:
        counts = b.counts()
        censored = {k: v for k, v in counts.items() if k in ("above-max", "below-step")}
        if censored:
            flags.append(make_flag("censored-rows", b.name, **censored,
                                   rows=int(result.field_T.size)))
        if _ratio(b) is not None and _ratio(b) < HYSTERESIS_RATIO:
            lobe = {k: (round(v, 4) if isinstance(v, float) else v)
                    for k, v in (b.retrapping or {}).items() if k != "beta_c_method"}
            flags.append(make_flag("hysteretic", b.name, threshold=HYSTERESIS_RATIO,
                                   retrapping_over_switching=(
                                       None if b.retrapping_ratio is None
                                       else round(b.retrapping_ratio, 4)), **lobe))
        pd = b.phase_diffusion
        if pd and pd["rounded"]:
            flags.append(make_flag("rounded-iv", b.name, **{
                k: v for k, v in pd.items() if k not in ("rounded", "model")}))
        if b.source == "return-sweep":
            flags.append(make_flag("return-sweep-branch", b.name,
                                   fitted=not _hysteretic(result.branches)))
    return flags
