"""One sweep in, one analysis out: every branch fitted, settings recorded."""

from __future__ import annotations

from dataclasses import dataclass, field

from .fit import engine
from .fit.engine import fit_pattern
from .io.sweep import Sweep


@dataclass
class Analysis:
    """Fits of every branch of a sweep, with the settings that produced them."""

    sweep: Sweep
    fits: list
    settings: dict = field(default_factory=dict)

    @property
    def flags(self) -> list:
        return [f for fit in self.fits for f in fit.flags]


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
                  loss="linear") -> Analysis:
    """Fit each branch of ``sweep`` separately."""
    fits = [
        fit_pattern(b.field_T, b.ic_A, geometry=geometry, node_floor=node_floor, loss=loss,
                    branch=b.name)
        for b in sweep.branches
    ]
    return Analysis(sweep, fits, fit_settings(geometry, node_floor, loss))
