"""One sweep in, one analysis out: every branch fitted, settings recorded."""

from __future__ import annotations

from dataclasses import dataclass, field

from .fit import engine
from .fit.engine import fit_pattern
from .io.sweep import Sweep


@dataclass
class Analysis:
    """Fits of every branch of a sweep, with the settings that produced them.

    For raw maps ``extraction`` holds how the sweep was extracted and ``icrn``
    the IcRn product (compared with Ambegaokar-Baratoff when a gap is known).
    """

    sweep: Sweep
    fits: list
    settings: dict = field(default_factory=dict)
    extraction: object = None
    icrn: dict | None = None
    current_density: dict = field(default_factory=dict)
    geometry: dict | None = None
    diagnostic_flags: list = field(default_factory=list)

    @property
    def flags(self) -> list:
        extra = self.extraction.flags if self.extraction is not None else []
        return ([f for fit in self.fits for f in fit.flags] + list(extra)
                + list(self.diagnostic_flags))


def fit_settings(geometry="rectangular", node_floor="auto", loss="linear") -> dict:
    """Every fit option in force, thresholds included, for the JSON ``settings`` block."""
    return {
        "geometry": geometry,
        "node_floor": node_floor,
        "loss": loss,
        "method": "scan of period and offset (FFT correlation), then lmfit "
                  + ("leastsq (Levenberg-Marquardt)" if loss == "linear"
                     else f"least_squares (trust region, {loss} loss)"),
        "thresholds": {
            "modulation_chisq_drop": engine.MODULATION_DCHI2,
            "min_nodes": engine.MIN_NODES,
            "floor_chisq_gain": engine.FLOOR_DCHI2,
            "offset_chisq_margin": engine.OFFSET_DCHI2,
            "poor_fit_reduced_chisq": engine.POOR_FIT_REDCHI,
            "robust_scale_over_noise": engine.ROBUST_SCALE,
        },
    }


def analyze_sweep(sweep: Sweep, *, geometry="rectangular", node_floor="auto",
                  loss="linear", diagnose=True, seed=0, junction=None,
                  criterion_floor_A=0.0) -> Analysis:
    """Fit each branch of ``sweep`` separately, then diagnose the shapes.

    ``junction`` is a :class:`jjpattern.diagnose.run.GeometryInputs`; ``seed``
    drives the resampled bands of the current-density reconstruction.
    """
    fits = [
        fit_pattern(b.field_T, b.ic_A, geometry=geometry, node_floor=node_floor, loss=loss,
                    branch=b.name)
        for b in sweep.branches
    ]
    analysis = Analysis(sweep, fits, fit_settings(geometry, node_floor, loss))
    if diagnose:
        from .diagnose.run import diagnose as run_diagnostics

        run_diagnostics(analysis, seed=seed, geometry=junction,
                        criterion_floor_A=criterion_floor_A)
    return analysis


def icrn_block(analysis: Analysis, rn_ohm, *, gap_J=None, tc_K=None, temperature_K=None):
    """IcRn from the fitted Ic0 (positive branch first) and the extracted Rn.

    With a gap, or a Tc (weak-coupling BCS gap), the Ambegaokar-Baratoff value
    and the ratio are added; the ratio is reported, never flagged.
    """
    from .physics.junction import ambegaokar_baratoff_V, bcs_gap_J

    ic0 = next((f.ic0_A for f in analysis.fits if f.ic0_A is not None), None)
    if ic0 is None or rn_ohm is None:
        return None
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


def analyze_map(ivmap, *, criterion="auto", threshold=None, gap_J=None, tc_K=None,
                temperature_K=None, **fit_options) -> Analysis:
    """Extract both branches from a raw map, then fit them like a sweep."""
    from .extract.engine import extract

    extraction = extract(ivmap, criterion=criterion, threshold=threshold)
    floor = 0.0
    if extraction.criterion == "voltage" and extraction.rn_ohm:
        # A voltage threshold reads sqrt(Ic^2 + (V_th/Rn)^2) on an RSJ curve: a floor of
        # V_th/Rn in quadrature at the nodes comes from the criterion itself.
        floor = extraction.threshold["value"] / extraction.rn_ohm
    analysis = analyze_sweep(extraction.to_sweep(), criterion_floor_A=floor, **fit_options)
    analysis.extraction = extraction
    if temperature_K is None:
        try:
            temperature_K = float(ivmap.metadata.get("temperature_K", ""))
        except ValueError:
            temperature_K = None
    analysis.icrn = icrn_block(analysis, extraction.rn_ohm, gap_J=gap_J, tc_K=tc_K,
                               temperature_K=temperature_K)
    return analysis
