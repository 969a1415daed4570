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
    "undersampled": (
        "error",
        "The fitted period spans fewer field steps than it takes to tell a period from its "
        "aliases, so the period, offset and Ic0 are withheld. Measure with a finer field "
        "step (at least four points per period, ten or more for good numbers).",
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
        "still reliable; widen the window towards the main lobe to locate it. Lobes that do "
        "not decay at all point to a SQUID-like pattern of two parallel channels instead "
        "(--model two-channel; the automatic choice tries it).",
    ),
    "poor-fit": (
        "error",
        "The best model misses the data by more than the point-to-point noise, so its period, "
        "field offset, Ic0, node floor and everything derived from them are withheld rather "
        "than given with error bars that would not mean anything. Usual causes: a non-uniform "
        "current density (see the other flags), flux trapped in or near the junction, a field "
        "axis that is not linear, or a junction none of the models describes (the automatic "
        "choice, the default, tries them all; --model NAME tries only that one). Points far "
        "below the pattern (premature switching, glitches) also raise it: --loss cauchy "
        "down-weights them.",
    ),
    "nodes-lifted": (
        "warning",
        "The minima stay well above zero (a node floor many standard errors above what the "
        "extraction criterion alone gives). Causes: an asymmetric current distribution or an "
        "inhomogeneous barrier; the self-field of the bias current; a junction longer than "
        "the Josephson penetration depth (its minima are lifted by screening: the long-inline "
        "and long-overlap models describe that); a field not perpendicular to the junction; "
        "a parallel leakage path. Check the field alignment, then the current-density "
        "profile.",
    ),
    "edge-current": (
        "warning",
        "The side lobes decay more slowly than for uniform current: the supercurrent is "
        "crowded at the edges of the junction, by edge or step conduction, or the junction "
        "is a SQUID-like pair of parallel channels whose lobes barely decay (--model "
        "two-channel fits that pattern; the automatic choice tries it).",
    ),
    "center-current": (
        "warning",
        "The supercurrent is concentrated in the middle of the junction (side lobes are "
        "suppressed faster than for uniform current). Common with a barrier thinner in the "
        "middle or with current injected through a narrow lead.",
    ),
    "central-minimum": (
        "warning",
        "Ic has a minimum at the centre of the pattern instead of a maximum. This points to a "
        "flux quantum trapped in or near the junction, a pi-shifted segment (a 0-pi junction, "
        "which --model zero-pi fits and the automatic choice tries), or a field offset set "
        "wrongly. Warm above Tc and cool in zero field to tell them apart.",
    ),
    "field-asymmetry": (
        "warning",
        "Ic(B0 + b) differs from Ic(B0 - b) beyond the noise. Self-field effects of the bias "
        "current, trapped vortices, or a field that is not uniform over the junction are the "
        "usual causes; compare the two current branches.",
    ),
    "branch-asymmetry": (
        "warning",
        "Ic+ and |Ic-| differ beyond their errors, in height or in field offset. Self-field "
        "effects, a superconducting diode effect, or flux trapped in a loop of the leads can "
        "do this.",
    ),
    "period-drift": (
        "warning",
        "The period differs between the low-field and high-field halves of the sweep. Check "
        "the field calibration for non-linearity, magnet hysteresis, and flux entering the "
        "electrodes at higher fields.",
    ),
    "field-hysteresis": (
        "warning",
        "The pattern swept one way along the field is shifted (or stretched) against the one "
        "swept the other way, beyond their errors. Usual causes: flux trapped in or screened "
        "by the superconducting electrodes (it follows the field history), a magnet with "
        "remanence, or a field readback that lags the field (calibration or sweep-rate lag). "
        "Each direction is fitted on its own; sweep more slowly, or warm above Tc and "
        "demagnetise the magnet, and compare.",
    ),
    "long-junction": (
        "warning",
        "The junction is longer than the Josephson penetration depth, so the bias current and "
        "the field are screened over lambda_J and the pattern is not the Fraunhofer one: the "
        "node spacing of a sinc fit is not the period Phi0/(L d'), the area and thicknesses "
        "derived from it are wrong, Ic0 is not Jc times the area, and the Dynes-Fulton "
        "reconstruction does not apply. The long-inline and long-overlap models fit the "
        "sine-Gordon pattern, give the period in its short-junction meaning and L/lambda_J.",
    ),
    "period-unlike-geometry": (
        "warning",
        "The measured period is more than the tolerance (a factor given in the evidence) away "
        "from the period the junction's geometry and materials give, Phi0 / (L d'), or from "
        "every period the given films allow for any London depth. Check the length given "
        "(the side perpendicular to the field), the field calibration (coil constant, units "
        "of the field column), and the thicknesses; flux focusing by wide electrodes or a "
        "ground plane shortens the period, a tilted field lengthens it. The derived "
        "thicknesses and depths rest on this period.",
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
    "rounded-iv": (
        "warning",
        "The I-V curves bend up smoothly below the switching point instead of staying at "
        "zero voltage: phase diffusion, from thermal or electrical noise on an overdamped "
        "junction. A voltage threshold then reads the critical current below its noise-free "
        "value; the evidence gives the shortfall and, from a fit of the rounded curves "
        "(Ambegaokar-Halperin), the noise-free critical current at the top of the main lobe "
        "and an effective noise temperature. Filter the measurement lines or cool further "
        "to sharpen the switching.",
    ),
    # Drift between measurements of the same junction (the history catalog). Each compares
    # a record with the junction's previous measurement; the evidence names both records.
    "ic0-changed": (
        "warning",
        "Ic0 differs from the junction's previous measurement by more than its uncertainty "
        "and the tolerance. Compare the measurement temperatures first (Ic0 falls as the "
        "temperature rises); at the same temperature a lower Ic0 usually means an ageing "
        "barrier (oxide growth, interdiffusion) or damage from handling or electrostatic "
        "discharge.",
    ),
    "period-changed": (
        "warning",
        "The field period differs from the previous measurement by more than its uncertainty "
        "and the tolerance. A junction's magnetic thickness rarely changes: suspect the field "
        "calibration (coil constant, magnet, sample position or tilt) or flux trapped in the "
        "electrodes that changes flux focusing.",
    ),
    "offset-moved": (
        "warning",
        "The field offset moved by more than the tolerance (a fraction of a period) and its "
        "uncertainty since the previous measurement: flux trapped in the junction or its "
        "electrodes, or a remanent field of the magnet. Warm above Tc and cool in zero field, "
        "or demagnetise the magnet, and remeasure.",
    ),
    "chip-drift": (
        "warning",
        "Many junctions of the chip changed in the same direction between the same two "
        "cooldowns. A common cause (field calibration, magnet remanence, measurement "
        "temperature, a different set-up) is more likely than every junction changing; rule "
        "those out before blaming the junctions.",
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
