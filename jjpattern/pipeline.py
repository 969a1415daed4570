"""One function from (input, settings) to a :class:`Result`; the CLI, demo and batch call it.

Data flow one way: source -> reader -> (extraction) -> fit -> diagnostics -> Result.
"""

from __future__ import annotations

import dataclasses
import math
import os
from dataclasses import dataclass

from .errors import InputError
from .io.limits import clip
from .result import FitResult, Result
from .settings import Settings, keyword_settings


@dataclass(frozen=True)
class Analysed:
    """A result together with the data it came from (the raw map draws the map figure)."""

    result: Result
    data: object


def analyze(source, settings: Settings | None = None, *, command=None, **keywords) -> Result:
    """Analyse one input file or folder and return its result document.

    Parameters
    ----------
    source : str, path-like, pandas.DataFrame or xarray.Dataset
        An Ic(B) table (text, HDF5, netCDF, MATLAB .mat, .npz), a raw V(I, B) map, a
        folder of I-V files, or the data themselves.
    settings : Settings, optional
        Every setting; defaults where omitted.
    command : sequence of str, optional
        The command-line arguments, recorded in the provenance.
    **keywords
        Single settings by name, e.g. ``loss="cauchy"``, ``length_m=10e-6``.

    Returns
    -------
    Result
    """
    return analyze_input(source, settings, command=command, **keywords).result


def analyze_input(source, settings: Settings | None = None, *, command=None, progress=None,
                  **keywords) -> Analysed:
    """Like :func:`analyze`, but keep the data read (for the raw-map figure).

    ``progress``, when given, is called with a few words as each stage starts.
    """
    from .io import read, read_object

    settings = keyword_settings(settings, **keywords)
    _say(progress, "reading the input")
    if isinstance(source, (str, bytes, os.PathLike)):
        data = read(os.fspath(source), settings.read)
    else:
        data = read_object(source, settings.read)
    return Analysed(analyze_data(data, settings, command=command, progress=progress), data)


def _say(progress, words: str) -> None:
    if progress is not None:
        progress(words)


def analyze_data(data, settings: Settings | None = None, *, command=None,
                 progress=None) -> Result:
    """Analyse a :class:`~jjpattern.io.Sweep` or a raw :class:`~jjpattern.io.maps.IVMap`.

    ``progress``, when given, is called with a few words as each stage starts.
    """
    from .io.maps import IVMap

    settings = settings or Settings()
    extraction = icrn = None
    floor_A = 0.0
    if isinstance(data, IVMap):
        from .extract.engine import extract

        _say(progress, f"extracting Ic from a {data.shape[0]} x {data.shape[1]} map")
        ex = extract(data, criterion=settings.extract.criterion,
                     threshold=settings.extract.threshold)
        if ex.criterion == "voltage" and ex.rn_ohm:
            # A voltage threshold reads sqrt(Ic^2 + (V_th/Rn)^2) on an RSJ curve: a floor of
            # V_th/Rn in quadrature at the nodes comes from the criterion itself.
            floor_A = ex.threshold["value"] / ex.rn_ohm
        sweep = ex.to_sweep()
        extraction = ex.to_dict()
        extraction_flags = list(ex.flags)
    else:
        sweep, extraction_flags = data, []
    _say(progress, "fitting and diagnosing the pattern")
    labelled, fit_flags, diagnostics = _by_segment(sweep, settings, floor_A)
    fits = [fit for fit, _ in labelled]
    from .diagnose.hysteresis import field_hysteresis

    hysteresis, hysteresis_flags = field_hysteresis(labelled)
    from .diagnose.geometry_check import period_geometry_flags

    geometry_flags = period_geometry_flags(diagnostics.get("geometry"))
    if extraction is not None:
        icrn = icrn_block(fits, extraction["normal_resistance_ohm"], settings,
                          sweep.metadata)
    return Result(
        input=sweep.summary(),
        fits=[_fit_result(f, segment) for f, segment in labelled],
        flags=(fit_flags + extraction_flags + diagnostics.get("flags", []) + geometry_flags
               + hysteresis_flags),
        settings=settings,
        method=fit_method(settings),
        extraction=extraction,
        icrn=icrn,
        current_density=diagnostics.get("current_density") or {},
        geometry=diagnostics.get("geometry"),
        provenance=_provenance(command),
        field_hysteresis=hysteresis,
    )


def _fit_and_diagnose(sweep, settings: Settings, floor_A: float):
    from .fit.engine import fit_pattern

    fs = settings.fit
    fits = [fit_pattern(b.field_T, b.ic_A, geometry=fs.model, node_floor=fs.node_floor,
                        loss=fs.loss, branch=b.name) for b in sweep.branches]
    if fs.model == "auto":
        fits = _one_model_for_all_branches(sweep, fits, fs)
    fit_flags = [flag for fit in fits for flag in fit.flags]
    diagnostics = {}
    if settings.diagnose.enabled:
        from .diagnose.run import diagnose

        diagnostics = diagnose(fits, seed=settings.diagnose.seed,
                               resamples=settings.diagnose.resamples,
                               geometry=junction_inputs(settings, sweep.metadata),
                               criterion_floor_A=floor_A)
    return fits, fit_flags, diagnostics


def _label(name, segment):
    return f"{name} {segment}" if segment and name else name


def _by_segment(sweep, settings: Settings, floor_A: float):
    """:func:`_fit_and_diagnose` for each run of the field sweep (up, down ...) on its own.

    Returns ``([(fit, segment)], fit flags, diagnostics)``; flags, densities and the
    geometry block name the branch with its segment (``"positive up"``) so that every
    key stays unique in the document. A sweep in one direction is one run, labelled ``""``.
    """
    segments = list(dict.fromkeys(b.segment for b in sweep.branches))
    if segments == [""]:
        fits, fit_flags, diagnostics = _fit_and_diagnose(sweep, settings, floor_A)
        return [(f, "") for f in fits], fit_flags, diagnostics
    labelled, fit_flags, merged = [], [], {"flags": [], "current_density": {}, "geometry": None}

    def relabel(flag, segment):
        return dataclasses.replace(flag, branch=_label(flag.branch, segment),
                                   evidence={**flag.evidence, "segment": segment})

    for segment in segments:
        part = dataclasses.replace(sweep, branches=tuple(b for b in sweep.branches
                                                         if b.segment == segment))
        fits, flags, diagnostics = _fit_and_diagnose(part, settings, floor_A)
        labelled += [(f, segment) for f in fits]
        fit_flags += [relabel(f, segment) for f in flags]
        merged["flags"] += [relabel(f, segment) for f in diagnostics.get("flags", [])]
        merged["current_density"].update({_label(k, segment): v for k, v in
                                          (diagnostics.get("current_density") or {}).items()})
        geometry = diagnostics.get("geometry")
        if geometry and merged["geometry"] is None:
            merged["geometry"] = {**geometry, "branch": _label(geometry["branch"], segment)}
    order = {(b.name, b.segment): k for k, b in enumerate(sweep.branches)}
    labelled.sort(key=lambda pair: order[(pair[0].branch, pair[1])])  # as in the input block
    return labelled, fit_flags, merged


def _fit_result(fit, segment: str) -> FitResult:
    """The recorded fit, named by branch and segment (``"positive up"``)."""
    out = FitResult.from_fit(fit)
    out.branch, out.segment = _label(out.branch, segment), segment
    return out


def _one_model_for_all_branches(sweep, fits, fs):
    """Both branches of one junction get one model: the per-branch BICs summed per model.

    A branch whose own choice differs is fitted again with the joint choice; every
    branch's ``model_choice`` is then the joint evidence (summed over the branches),
    with the branch's own under ``this_branch``.
    """
    from .fit.choice import joint_choice
    from .fit.engine import fit_pattern

    joint = joint_choice([f.model_choice for f in fits])
    if joint is None:
        return fits
    out = []
    for branch, fit in zip(sweep.branches, fits, strict=True):
        own = fit.model_choice
        if fit.model != joint["chosen"]:
            fit = fit_pattern(branch.field_T, branch.ic_A, geometry=joint["chosen"],
                              node_floor=fs.node_floor, loss=fs.loss, branch=branch.name)
        fit.model_choice = dict(joint, this_branch=own)
        out.append(fit)
    return out


def fit_method(settings: Settings) -> dict:
    """The fit method in words and its fixed thresholds (the JSON ``method`` block)."""
    from .fit import choice, engine

    loss = settings.fit.loss
    model = settings.fit.model
    return {
        "fit": "scan of period and offset (FFT correlation), then scipy "
               + ("leastsq (MINPACK Levenberg-Marquardt)" if loss == "linear"
                  else f"least_squares (trust region, {loss} loss) finished by weighted "
                       "leastsq (MINPACK Levenberg-Marquardt)"),
        "model": (f"every registered model fitted, the one with the lowest {choice.CRITERION} "
                  "(chi-square over the model-free noise plus k ln n) reported when no "
                  f"simpler model is within {choice.MARGIN:g} of it, else the simplest within "
                  "that margin; a model other than the rectangle only where it describes the "
                  "data (residual runs test; reduced chi-square at most "
                  f"{choice.DESCRIBES_REDCHI:g} for a shape parameter), the rectangle where "
                  "none does" if model == "auto" else f"{model}, chosen by the user"),
        "thresholds": {
            "modulation_chisq_drop": engine.MODULATION_DCHI2,
            "min_nodes": engine.MIN_NODES,
            "floor_chisq_gain": engine.FLOOR_DCHI2,
            "offset_chisq_margin": engine.OFFSET_DCHI2,
            "poor_fit_reduced_chisq": engine.POOR_FIT_REDCHI,
            "robust_scale_over_noise": engine.ROBUST_SCALE,
            "model_choice_margin": choice.MARGIN,
            "model_describes_reduced_chisq": choice.DESCRIBES_REDCHI,
            "model_runs_z": choice.RUNS_Z,
            "model_runs_ratio": choice.RUNS_RATIO,
        },
    }


#: Metadata keys that may stand in for junction settings, with their scale to SI.
_JUNCTION_METADATA = {
    "length_m": ("length_um", 1e-6), "width_m": ("width_um", 1e-6),
    "barrier_m": ("barrier_nm", 1e-9), "electrode_m": ("electrode_nm", 1e-9),
    "london_m": ("london_nm", 1e-9), "jc_A_m2": ("jc_kA_cm2", 1e7),
}


def _check_positive(values, where: str) -> None:
    """Lengths, depths and Jc are finite and positive: anything else is a typing slip."""
    if not all(math.isfinite(v) and v > 0 for v in values):
        raise InputError(f"{where}: lengths, London depths and Jc must be finite positive "
                         "numbers; correct or remove it")


def junction_inputs(settings: Settings, metadata: dict):
    """Geometry in SI from the settings, each missing value from the file's metadata."""
    from .diagnose.run import GeometryInputs

    js = settings.junction
    values = {}
    for name, (key, scale) in _JUNCTION_METADATA.items():
        given = getattr(js, name)
        if isinstance(given, tuple) and given:
            values[name] = [float(v) for v in given]
            _check_positive(values[name], f"setting junction.{name} = {values[name]}")
            continue
        if given is not None and not isinstance(given, tuple):
            values[name] = [float(given)]
            _check_positive(values[name], f"setting junction.{name} = {values[name][0]}")
            continue
        raw = metadata.get(key)
        if raw is None or str(raw).strip() == "":
            continue
        try:
            values[name] = [float(v) * scale for v in str(raw).split(",")]
        except ValueError:
            raise InputError(f"metadata {key} = {clip(raw)}: not a number; write it as a plain "
                             "number (or two separated by a comma)") from None
        _check_positive(values[name], f"metadata {key} = {clip(raw)}")
    planar = js.planar or str(metadata.get("planar", "")).lower() in ("1", "yes", "true")

    def first(name, index=0):
        v = values.get(name) or []
        return v[index] if len(v) > index else None

    return GeometryInputs(
        length_m=first("length_m"), width_m=first("width_m"), barrier_m=first("barrier_m"),
        t1_m=first("electrode_m"), t2_m=first("electrode_m", 1),
        lambda1_m=first("london_m"), lambda2_m=first("london_m", 1),
        jc_A_m2=first("jc_A_m2"), planar=planar)


def icrn_block(fits, rn_ohm, settings: Settings, metadata: dict):
    """IcRn from the fitted Ic0 (positive branch first) and the extracted Rn.

    With a gap, or a Tc (weak-coupling BCS gap), the Ambegaokar-Baratoff value
    and the ratio are added; the ratio is reported, never flagged.
    """
    from .physics.junction import ambegaokar_baratoff_V, bcs_gap_J

    # The junction's own critical current: for a long junction Jc W L (the model derives
    # it), not the self-field-limited Ic at zero field.
    ic0 = next((f.derived.get("jc_times_area_A", f.ic0_A) for f in fits
                if f.ic0_A is not None), None)
    if ic0 is None or rn_ohm is None:
        return None
    es = settings.extract
    temperature_K = es.temperature_K
    if temperature_K is None:
        try:
            temperature_K = float(metadata.get("temperature_K", ""))
        except ValueError:
            temperature_K = None
    gap_J, tc_K = es.gap_J, es.tc_K
    block = {"ic0_A": ic0, "rn_ohm": rn_ohm, "icrn_V": ic0 * rn_ohm}
    t = temperature_K or 0.0
    if gap_J is None and tc_K is not None:
        gap_J = bcs_gap_J(tc_K, t)
        block["gap_from"] = "weak-coupling BCS gap equation, Delta(0) = 1.764 k_B Tc"
    elif gap_J is not None:
        block["gap_from"] = "given"
    if gap_J is not None:
        ab = ambegaokar_baratoff_V(gap_J, t)
        block.update(gap_J=gap_J, tc_K=tc_K, temperature_K=temperature_K,
                     ambegaokar_baratoff_V=ab, icrn_over_ab=ic0 * rn_ohm / ab)
    return block


def _provenance(command) -> dict:
    from .provenance import command_line, versions

    out = {"versions": versions()}
    if command is not None:
        out["command"] = command_line(command)
    return out
