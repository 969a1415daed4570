"""Diagnostic flags: stable codes, what each usually means, and its evidence.

The codes are part of the JSON contract; keep them stable.
"""

from __future__ import annotations

from dataclasses import dataclass, field

#: code -> (severity, message). Severity is ``info``, ``warning`` or ``error``;
#: ``error`` means a headline number is withheld (null).
CATALOGUE = {
    "no-modulation": (
        "error",
        "The critical current shows no field modulation above the noise, so no period is "
        "given. Check that the field reached the junction (magnet connected, range wide "
        "enough) and that the column really is the critical current.",
    ),
    "few-lobes": (
        "error",
        "Fewer than two nodes of the pattern lie inside the measured field window, so the "
        "period cannot be identified. Widen the sweep to reach at least one node on each "
        "side of the main lobe.",
    ),
    "main-lobe-outside": (
        "warning",
        "The main lobe lies outside the measured field window. The period is reliable, but "
        "the field offset and Ic0 rest on the side-lobe heights; widen the window or zero "
        "the remanent field (warm above Tc or demagnetise the magnet) and remeasure.",
    ),
    "main-lobe-ambiguous": (
        "error",
        "The main lobe lies outside the measured window and the side-lobe heights do not "
        "tell which lobe is which, so the field offset and Ic0 are withheld. The period is "
        "still reliable; widen the window towards the main lobe to locate it.",
    ),
    "poor-fit": (
        "warning",
        "The model misses the data by more than the point-to-point noise. The pattern departs "
        "from the ideal shape of this geometry: look at the residuals and the other flags, or "
        "try the other geometry or the node floor.",
    ),
    "lifted-floor": (
        "info",
        "The minima do not reach zero; a node floor combined in quadrature was fitted so that "
        "the period is not biased. A floor well above the noise usually means non-uniform "
        "current, a field not perpendicular to the barrier, or a parallel leakage path.",
    ),
    "censored-rows": (
        "info",
        "Some field rows gave no critical current: either the junction never switched inside "
        "the bias window (Ic above the largest bias) or it was resistive from the first bias "
        "step (Ic below the step). They are left out of the fit; widen or refine the bias "
        "sweep to measure them.",
    ),
    "hysteretic": (
        "info",
        "The junction retraps at a clearly lower current than it switches: it is "
        "underdamped (hysteretic). Only the switching current is fitted as Ic.",
    ),
    "return-sweep-branch": (
        "warning",
        "On this polarity the bias only swept towards zero, which measures the retrapping "
        "current. It equals Ic only for a non-hysteretic junction; it is left out of the "
        "fit when hysteresis is seen on the other polarity. Sweep away from zero on both "
        "polarities to measure switching.",
    ),
    "outliers-downweighted": (
        "info",
        "The robust loss down-weighted points that sit far from the pattern (often premature "
        "switching or glitches, which read low). Look at them in the residual plot.",
    ),
}


@dataclass(frozen=True)
class Flag:
    """One diagnostic: ``{code, severity, branch, message, evidence}`` in the JSON."""

    code: str
    severity: str
    branch: str | None
    message: str
    evidence: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        return {
            "code": self.code, "severity": self.severity, "branch": self.branch,
            "message": self.message, "evidence": dict(self.evidence),
        }


def make_flag(code: str, branch: str | None, **evidence) -> Flag:
    """Build a catalogued flag with its standard severity and message."""
    severity, message = CATALOGUE[code]
    return Flag(code, severity, branch, message, evidence)
