"""Words of the chip summary: the outlier criterion, the reasons, the methods paragraph."""

from __future__ import annotations

#: Why a junction may sit off the chip trend, by quantity and direction (above = True).
OUTCOME_WORDS = {
    ("ic0", True): "above the chip trend Jc x area: a short or pinhole, a junction larger than "
                   "drawn, or a wrong size in the manifest",
    ("ic0", False): "below the chip trend Jc x area: a damaged or partly open barrier, a "
                    "junction smaller than drawn, or a wrong size in the manifest",
    ("period", True): "longer than the chip trend Phi0 / (d_m L): a smaller magnetic area "
                      "(thinner electrodes or a shorter junction) or a wrong length",
    ("period", False): "shorter than the chip trend Phi0 / (d_m L): flux focused by nearby "
                       "films, trapped flux, or a wrong length in the manifest",
    "size": "the drawn size is not larger than the fitted linewidth offset, so the chip trend "
            "gives no value to compare with; check the size in the manifest",
}


def criterion_text(threshold: float, clip_sigma: float, min_junctions: int) -> str:
    """The outlier criterion in words, as the summary states it."""
    return (f"|ln(observed / chip trend)| more than {threshold:g} robust standard deviations "
            "from the median; the robust standard deviation is the largest of 1.4826 x MAD, "
            f"the standard deviation of the residuals within {clip_sigma:g} of that "
            "(corrected for the fitted parameters) and the median relative standard error of "
            f"the junctions; tested with {min_junctions} or more junctions")


def methods_text(summary: dict) -> str:
    """A methods paragraph for one chip, written from what ``chip_summary`` did."""
    offset = summary.get("dimension_offset_m") is not None
    length = "L - delta" if offset else "L"
    why = summary["reasons"]
    parts = [f"Chip {summary['chip'] or '(unnamed)'}: {summary['junctions_analysed']} of "
             f"{summary['junctions_total']} junctions were analysed."]
    if offset:
        parts.append(
            "A linewidth offset delta and Jc were fitted as Ic0 = Jc (L - delta)(W - delta) "
            "to ln Ic0 (the scatter between junctions is multiplicative), ln Jc profiled out "
            "and delta found on a grid over all sizes the junctions allow: first by least "
            "absolute deviations to find the outliers, then by least squares without them, "
            "with errors from the covariance scaled by the residual variance. Jc is that "
            "fit's value.")
    else:
        parts.append("No linewidth offset was fitted (" + why.get(
            "dimension_offset", "no junction sizes were given") + "); Jc is the median of "
            "Ic0 / area over the junctions that are not outliers, its standard error "
            "sqrt(pi/2) sigma / sqrt(n), the median's large-sample error.")
    parts.append("The spread of Jc is the robust coefficient of variation 1.4826 MAD / median "
                 "of Ic0 / area (Rousseeuw and Croux, J. Am. Stat. Assoc. 88, 1273 (1993)).")
    if summary.get("magnetic_thickness_m") is None:
        parts.append(f"No magnetic thickness: {why.get('magnetic_thickness', '')}.")
    else:
        parts.append(
            f"The magnetic thickness d_m is the slope of 1/period against {length} (the length "
            f"across the field) through the origin, 1/period = (d_m / Phi0)({length}), by "
            "weighted least squares with weights from the fitted period errors (Bevington and "
            "Robinson, Data Reduction and Error Analysis for the Physical Sciences, 3rd ed., "
            "2003), outliers left out; its standard error is scaled by the square root of the "
            "reduced chi-square when that exceeds one (Birge, Phys. Rev. 40, 207 (1932))"
            + (" and includes the error of delta" if offset else "") + ". A straight line "
            "with a free intercept against the drawn length tests the 1/L scaling; its "
            "intercept gives the length offset at which the period would diverge.")
    parts.append(f"Outliers: {summary['outlier_criterion']} (a MAD-based modified z-score, "
                 "Iglewicz and Hoaglin, How to Detect and Handle Outliers, 1993). Phi0 = h/2e "
                 "from scipy.constants (CODATA).")
    return " ".join(parts)
