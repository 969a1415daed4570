"""A methods paragraph written from the actual run, and the references it cites."""

from __future__ import annotations

from ..physics.models import get_model
from .display import (
    AREA_UNITS,
    CURRENT_UNITS,
    FIELD_UNITS,
    VOLTAGE_UNITS,
    format_measure,
    pick_unit,
    plural,
)
from .summary import branch_words, edge_fraction_text, sweep_words

REFERENCES = {
    "lm": "K. Levenberg, Q. Appl. Math. 2, 164 (1944); D. W. Marquardt, J. Soc. Ind. Appl. "
          "Math. 11, 431 (1963).",
    "minpack": "J. J. More, B. S. Garbow and K. E. Hillstrom, User Guide for MINPACK-1, "
               "Argonne National Laboratory report ANL-80-74 (1980).",
    "scipy": "P. Virtanen et al., SciPy 1.0: Fundamental Algorithms for Scientific Computing "
             "in Python, Nat. Methods 17, 261 (2020).",
    "codata": "E. Tiesinga et al., CODATA Recommended Values of the Fundamental Physical "
              "Constants: 2018, Rev. Mod. Phys. 93, 025010 (2021).",
    "sg": "A. Savitzky and M. J. E. Golay, Anal. Chem. 36, 1627 (1964).",
    "ab": "V. Ambegaokar and A. Baratoff, Phys. Rev. Lett. 10, 486 (1963).",
    "bcs": "J. Bardeen, L. N. Cooper and J. R. Schrieffer, Phys. Rev. 108, 1175 (1957).",
    "df": "R. C. Dynes and T. A. Fulton, Phys. Rev. B 3, 3015 (1971).",
    "fienup": "J. R. Fienup, Appl. Opt. 21, 2758 (1982).",
    "schwarz": "G. Schwarz, Ann. Stat. 6, 461 (1978).",
    "kass": "R. E. Kass and A. E. Raftery, J. Am. Stat. Assoc. 90, 773 (1995).",
    "runs": "A. Wald and J. Wolfowitz, Ann. Math. Stat. 11, 147 (1940).",
}

def _junction(meta: dict) -> str:
    name = meta.get("junction") or meta.get("device") or "the junction"
    context = [f"chip {meta['chip']}" if meta.get("chip") else "",
               f"cooldown {meta['cooldown']}" if meta.get("cooldown") else ""]
    context = ", ".join(c for c in context if c)
    return f"{name} ({context})" if context else name


def _extraction_text(ex: dict, cited) -> str:
    # The criterion's own sentence, written by the extraction registry.
    text = ex["methods_text"]
    cited += list(ex.get("methods_references") or {})
    censored = {}
    for b in ex["branches"]:
        for key in ("above-max", "below-step"):
            censored[key] = censored.get(key, 0) + b["status_counts"].get(key, 0)
    if censored.get("above-max") or censored.get("below-step"):
        text += (f" Field rows in which the junction did not switch within the bias window "
                 f"({censored.get('above-max', 0)}) or was resistive from the first bias step "
                 f"({censored.get('below-step', 0)}) were excluded.")
    ratios = [f"{b['retrapping_over_switching']:.3f} ({b['branch']})" for b in ex["branches"]
              if b["retrapping_over_switching"] is not None]
    if ratios:
        text += (" Switching was read on sweeps away from zero and retrapping on sweeps back; "
                 f"the median retrapping-to-switching ratio was {', '.join(ratios)}, and only "
                 "the switching current was fitted.")
    if ex["rows_skipped"]:
        text += f" {ex['rows_skipped']} field rows holding mostly missing values were skipped."
    return text


def _and(words) -> str:
    """``'a'``, ``'a and b'``, ``'a, b and c'``."""
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " and " + words[-1]


def _field(value_T) -> str:
    return format_measure(value_T, None, FIELD_UNITS, digits=4)


def _reading_text(result) -> list[str]:
    """Sentences on the field window, signed columns, sweep directions and duplicates."""
    read = result.settings.read
    layout = result.input.get("layout") or {}
    window = layout.get("field_window") or {}
    out = []
    if read.field_range_T:
        lo, hi = read.field_range_T
        where = (f"between {_field(lo)} and {_field(hi)}" if lo is not None and hi is not None
                 else f"above {_field(lo)}" if lo is not None else f"below {_field(hi)}")
        count = window.get("points_outside_range")
        out.append(f"Only points with the applied field {where} were analysed"
                   + (f" ({plural(count, 'point')} outside left out)." if count is not None
                      else "."))
    if read.exclude_T:
        spans = ", ".join(f"{_field(lo)} to {_field(hi)}" for lo, hi in read.exclude_T)
        count = window.get("points_excluded")
        out.append(f"Points with the field from {spans} were excluded by hand"
                   + (f" ({plural(count, 'point')})." if count is not None else "."))
    for signed in layout.get("signed_columns", []):
        zero = signed["zero_rows_set_aside"]
        text = (f"Positive and negative critical currents recorded in one signed column "
                f"({signed['column']}) were separated by their sign"
                + (f"; {zero} readings of zero were set aside" if zero else ""))
        for side in ("positive", "negative"):
            if signed.get(f"{side}_rows_set_aside"):
                text += (f"; the {signed[f'{side}_rows_set_aside']} {side} readings were too "
                         "few to fit and were set aside")
        out.append(text + ".")
    if layout.get("segments"):
        names = ", ".join(dict.fromkeys(s["segment"] for s in layout["segments"]))
        aside = layout.get("points_in_short_reversals")
        out.append(f"The field was swept in both directions ({names}); each sweep was fitted "
                   "separately"
                   + (f", and {plural(aside, 'point')} recorded while the field briefly turned "
                      f"back {'was' if aside == 1 else 'were'} set aside." if aside else "."))
    for pair in (result.field_hysteresis or {}).get("pairs", []):
        if pair.get("offset_shift_T") is None:
            continue
        text = (f"For the {pair['branch']} branch the field offset of the "
                f"{sweep_words(pair['second'])} differs from that of the "
                f"{sweep_words(pair['first'])} by "
                + format_measure(pair["offset_shift_T"], pair["offset_shift_stderr_T"],
                                 FIELD_UNITS))
        if pair.get("period_ratio") is not None:
            ratio = format_measure(pair["period_ratio"], pair["period_ratio_stderr"],
                                   (("", 1.0),), ("", 1.0)).strip()
            text += f", and the ratio of the periods is {ratio}"
        out.append(text + ".")
    merged = result.input.get("duplicates_merged") or 0
    if merged and result.extraction is None:
        out.append(f"{plural(merged, 'point')} at a field already measured in the same branch "
                   f"and sweep direction {'was' if merged == 1 else 'were'} averaged with it.")
    return out


def _model_choice_text(result, cited) -> str:
    """How the model was chosen, when it was chosen automatically."""
    choices = [(f.branch, f.model_choice) for f in result.fits if f.model_choice]
    if not choices:
        return ""
    cited += ["schwarz", "kass"]
    first = choices[0][1]
    names = ", ".join(sorted(c["model"] for c in first["candidates"]))
    text = (f"The model was chosen automatically: each branch was fitted with every model "
            f"({names}) and they were ranked by the Bayesian information criterion "
            f"BIC = chi^2/sigma^2 + k ln n [schwarz], with sigma the point-to-point noise "
            f"of the data and k the number of fitted parameters; the model with the lowest "
            f"BIC was reported unless a simpler one lay within {first['margin']:g} of it "
            "[kass], in which case the simplest within that margin was reported.")
    from ..fit.choice import DESCRIBES_REDCHI, RUNS_RATIO, RUNS_Z
    from ..fit.outcome import POOR_FIT_REDCHI

    text += (" A model other than the uniform rectangle was reported only where it described "
             "the data: the signs of its residuals in field order showed no significant and "
             f"material lack of runs [runs] (z below -{RUNS_Z:g} with fewer than "
             f"{RUNS_RATIO:g} of the expected runs) and, for a model with a free shape "
             f"parameter, its reduced chi-square was at most {DESCRIBES_REDCHI:g}; where the "
             f"model so chosen missed the data (reduced chi-square above {POOR_FIT_REDCHI:g}) "
             "the rectangle was reported.")
    cited.append("runs")
    if first.get("branches"):
        n = first["branches"]
        choices = [(f"{'both' if n == 2 else n} branches together (BIC summed)", first)]
    else:
        choices = [(f"{branch} branch", c) for branch, c in choices]
    for where, c in choices:
        if c.get("runner_up") is None:
            continue
        for a in c.get("set_aside") or []:
            text += (f" For {where} the {a['model']} model was set aside because "
                     f"{a['reason']}.")
        if c["decision"] == "none fits":
            text += (f" For {where} no model described the data, so the reference "
                     f"{c['chosen']} model was reported.")
        elif c["decision"] == "clear":
            text += (f" For {where} {c['chosen']} had the lowest BIC, with "
                     f"{c['runner_up']} next, higher by {c['criterion_difference']:.1f}.")
        else:
            other = (c["lowest_criterion"] if c["lowest_criterion"] != c["chosen"]
                     else c["runner_up"])
            text += (f" For {where} the choice was a near tie ({other} within "
                     f"{c['margin']:g} of {c['chosen']}), and the simpler {c['chosen']} model "
                     "was reported.")
    return text


def _derived_text(fit) -> str:
    from .summary import derived_items

    parts = [f"{name} {text}" for name, text in derived_items(fit)]
    return "; the model also gives " + ", ".join(parts) if parts else ""


def _fit_numbers(fit) -> str:
    funit = pick_unit(fit.period_T, FIELD_UNITS)
    cunit = pick_unit(fit.ic_max_A, CURRENT_UNITS)

    def field(v, e):
        return format_measure(v, e, FIELD_UNITS, funit)

    def current(v, e):
        return format_measure(v, e, CURRENT_UNITS, cunit)

    area = format_measure(fit.effective_area_m2, fit.effective_area_stderr_m2, AREA_UNITS)
    parts = [f"a field period of {field(fit.period_T, fit.period_stderr_T)}",
             f"an effective magnetic area A_eff = Phi0/period = {area}"]
    if fit.field_offset_T is not None:
        parts.append(f"a field offset B0 = {field(fit.field_offset_T, fit.field_offset_stderr_T)}")
        parts.append(f"Ic0 = {current(fit.ic0_A, fit.ic0_stderr_A)}")
    if fit.node_floor_A is not None:
        parts.append(f"a node floor of {current(fit.node_floor_A, fit.node_floor_stderr_A)}")
    return ", ".join(parts[:-1]) + " and " + parts[-1]


def methods_paragraph(result, field_calibration: str) -> str:
    """Plain prose for a methods section, numbers as in the JSON, references at the end."""
    versions = result.provenance.get("versions") or {}
    loss = result.settings.fit.loss
    cited = ["lm", "minpack", "scipy", "codata"]
    out = [f"The critical current of {_junction(result.metadata)} was analysed with jjpattern "
           f"{result.tool['version']}."]
    if result.extraction is not None:
        out.append(_extraction_text(result.extraction, cited))
    fits = result.fits
    choice = _model_choice_text(result, cited)
    if choice:
        out.append(choice)
    specs = []
    for f in fits:
        if get_model(f.model) not in specs:
            specs.append(get_model(f.model))
    model = " or ".join(s.methods_text + "".join(f" [{key}]" for key in s.references)
                        for s in specs)
    for s_ in specs:
        cited += list(s_.references)
    segments = list(dict.fromkeys(f.segment for f in fits if f.segment))
    polarities = list(dict.fromkeys(branch_words(f.branch, f.segment).split()[0]
                                    for f in fits))
    branches = " and ".join(polarities)
    if segments:
        branches += (f" branch{'es' if len(polarities) > 1 else ''} of each sweep of the field "
                     f"({', '.join(s for s in segments)})")
    else:
        branches += f" branch{'es' if len(fits) > 1 else ''}"
    floor = any(f.node_floor_A is not None for f in fits)
    out.append(
        f"The {branches} {'were each' if len(fits) > 1 else 'was'} fitted with "
        f"{model}, where "
        "Phi = (B - B0) A_eff"
        + (", combined in quadrature with a constant node floor" if floor else "")
        + ", by non-linear least squares"
        + (" (Levenberg-Marquardt [lm], MINPACK [minpack] in SciPy "
           f"{versions['scipy']} [scipy]) with equal weights" if loss == "linear"
           else f" with a robust {loss} loss (SciPy {versions['scipy']} [scipy] least_squares, "
                "scale twice the point-to-point noise), finished by weighted "
                "Levenberg-Marquardt least squares [lm] (MINPACK [minpack]) at the robust "
                "weights")
        + ", starting from a global search over period and offset that needs no "
          "starting values. Standard errors are from the covariance matrix scaled by the "
          "reduced chi-square, i.e. the noise was estimated from the fit residuals. The "
          "flux quantum is the exact SI value Phi0 = h/2e [codata]."
    )
    if field_calibration:
        out.append(field_calibration)
    for fit in fits:
        if fit.withheld:
            out.append(f"For the {fit.branch} branch ({plural(fit.points_used, 'point')}) no "
                       f"period, field offset or Ic0 is given: {fit.withheld['text']}, and no fit "
                       "curve is shown.")
            continue
        if fit.period_T is None:
            codes = ", ".join(f.code for f in result.flags if f.branch == fit.branch
                              and f.severity == "error")
            out.append(f"For the {branch_words(fit.branch, fit.segment)} no period could be "
                       f"identified ({codes}).")
            continue
        sentence = (f"For the {branch_words(fit.branch, fit.segment)} "
                    f"({plural(fit.points_used, 'point')}, {plural(fit.lobes_observed, 'lobe')} "
                    f"in the window) we obtain {_fit_numbers(fit)}")
        if fit.field_offset_T is None:
            sentence += ("; the field offset and Ic0 are not given because the main lobe lies "
                         "outside the measured window and the side lobes do not locate it")
        sentence += _derived_text(fit)
        meaning = get_model(fit.model).ic0_meaning
        if meaning and fit.ic0_A is not None:
            sentence += f" (Ic0 is {meaning})"
        out.append(sentence + ".")
    dropped = result.input["points_dropped"]
    outliers = sum(f.points_downweighted for f in fits)
    if dropped and result.extraction is None:
        out.append(f"{plural(dropped, 'point')} with missing values "
                   f"{'was' if dropped == 1 else 'were'} excluded.")
    out += _reading_text(result)
    if outliers:
        out.append(f"{plural(outliers, 'point')} lay more than four noise units from the fit "
                   f"and {'was' if outliers == 1 else 'were'} "
                   "down-weighted by the robust loss.")
    seed = result.settings.diagnose.seed
    by_method = {}
    for branch, d in result.current_density.items():
        by_method.setdefault(d["method"], []).append((branch, d))
    for method, items in by_method.items():
        if method == "symmetric":
            how = ("assuming a symmetric profile, flipping the sign of the pattern at each "
                   "node and inverting the Fourier transform [df]")
        else:
            how = ("by iterative phase retrieval with J(x) >= 0 confined to the junction "
                   "(error reduction [fienup]), starting from the symmetric estimate [df]; "
                   "J(x) and J(-x) cannot be told apart")
            cited.append("fienup")
        cited.append("df")
        names = _and([b for b, _ in items])
        first = items[0][1]
        edges = ", ".join(f"{edge_fraction_text(d)} ({b})" for b, d in items)
        many = len(items) > 1
        out.append(f"The current density of the {names} branch{'es' if many else ''} "
                   f"was reconstructed {how}, with a Tukey window "
                   f"(alpha 0.4) and a 68 % band from {first['resamples']} resamplings of "
                   f"the noise (seed {seed}); the "
                   f"resolution is {first['resolution_over_length']:.3f} of the junction "
                   f"length and the outer 10 % on each side carry {edges} of the current "
                   f"({_uniform_edges(first)}).")
    if result.icrn and "ambegaokar_baratoff_V" in result.icrn:
        icrn = result.icrn
        out.append(f"The IcRn product is {format_measure(icrn['icrn_V'], None, VOLTAGE_UNITS)}"
                   f", {icrn['icrn_over_ab']:.3f} of the Ambegaokar-Baratoff value [ab] "
                   f"{format_measure(icrn['ambegaokar_baratoff_V'], None, VOLTAGE_UNITS)}"
                   + (" for a weak-coupling BCS gap [bcs]" if "BCS" in icrn.get("gap_from", "")
                      else "") + ".")
        cited += ["ab"] + (["bcs"] if "BCS" in icrn.get("gap_from", "") else [])
    text = " ".join(out)
    # Numbered in the order the text first cites them.
    order = sorted(set(cited), key=lambda key: text.find(f"[{key}]"))
    numbered = {key: i + 1 for i, key in enumerate(k for k in order if f"[{k}]" in text)}
    for key, n in numbered.items():
        text = text.replace(f"[{key}]", f"[{n}]")
    known = {**REFERENCES, **((result.extraction or {}).get("methods_references") or {})}
    for s_ in specs:
        known.update(s_.references)
    refs = "\n".join(f"[{n}] {known[key]}" for key, n in numbered.items())
    return f"{text}\n\nReferences\n{refs}\n"


def _uniform_edges(d: dict) -> str:
    """What a uniform junction gives through the same reconstruction (geometry, window
    and resolution as used), or the exact share where no reference was computed."""
    ref = d.get("uniform_reference")
    if ref:
        return (f"{format_measure(ref['edge_fraction'], None, digits=3)} for a uniform "
                "junction through the same reconstruction")
    return "0.2 for exactly uniform current"
