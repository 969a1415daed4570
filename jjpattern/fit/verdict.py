"""The verdict of the automatic model choice: the criterion, the decision rule, and what
sets a model aside.

A model other than the reference (the uniform rectangle) is reported only where it
describes the data; where the model the criterion picks misses the data, the reference
is reported and its numbers withheld (``"none fits"``). One rule serves a branch and the
branches of a junction together (``joint_choice``).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..physics.models import model_names
from .outcome import POOR_FIT_REDCHI

__all__ = ["CRITERION", "DESCRIBES_REDCHI", "MARGIN", "RUNS_RATIO", "RUNS_Z", "Trial",
           "decide", "describes", "joint_choice"]

#: BIC difference that makes a choice clear (Kass and Raftery 1995: "very strong").
MARGIN = 10.0
CRITERION = "BIC"
#: A model with a free shape parameter (L / lambda_J, a channel asymmetry) is chosen only
#: where it describes the data: reduced chi-square against the model-free noise at most
#: this. Such a model can bend towards a pattern it does not describe (a Gaussian current
#: profile fits a long overlap junction at L / lambda_J = 11 to a reduced chi-square of 3)
#: and then names physics the junction need not have; the rectangle's departures are read
#: by the diagnostics instead. Below it, rivals also need no scans of their own.
DESCRIBES_REDCHI = 2.0
#: A model other than the reference is chosen only where the signs of its residuals in field
#: order pass the runs test (``runs.py``) at this one-sided normal score: a model that bends
#: towards a pattern it does not describe leaves long runs of one sign (a Gaussian current
#: profile fitted as a long overlap junction at 2.5 % noise: z = -7; the right model: |z| < 2).
RUNS_Z = 4.0
#: ... and where it finds materially fewer runs than expected, this fraction (a Gaussian
#: profile as a long overlap junction: about 0.7; a disc with a tenth of a rectangle mixed
#: in, on ten thousand points: 0.92, though z = -8).
RUNS_RATIO = 0.85


@dataclass
class Trial:
    """One model's quick fit: its parameters, chi-square over the noise and BIC."""

    name: str
    params: dict
    chisq_over_noise: float
    parameters: int
    floor: bool
    bic: float = np.inf
    at_limit: list = field(default_factory=list)
    points: int = 0
    shaped: bool = False
    runs_z: float = 0.0
    runs_ratio: float = 1.0
    screened: int = 0
    gof_scale: float = 1.0

    @property
    def reduced_chisq(self) -> float:
        """Chi-square over the noise per degree of freedom, over what the right model gives
        under the loss (``gof_scale``; 1 for least squares)."""
        return self.chisq_over_noise / max(self.points - self.parameters, 1) / self.gof_scale


def _simplicity(trial: Trial, order: dict):
    return trial.parameters, order.get(trial.name, len(order))


def decide(trials, order):
    """Sort ``trials`` by BIC; the simplest within the margin of the lowest is chosen,
    unless it is not the reference and does not describe the data (``_unlike``: a shape
    parameter with a reduced chi-square above ``DESCRIBES_REDCHI``, or residual signs that
    fail the runs test): then it is set aside and the choice made among the rest.

    Where the model so chosen misses the data (reduced chi-square above
    ``POOR_FIT_REDCHI``, where its numbers would be withheld), the reference model (first
    in ``order``) is reported instead and the decision is ``"none fits"``.

    Returns ``(chosen, verdict)``, the verdict being the block's keys from ``chosen`` to
    ``set_aside``.
    """
    trials.sort(key=lambda t: t.bic)
    set_aside, rest = [], list(trials)
    while True:
        lowest = rest[0]
        within = [t for t in rest if t.bic - lowest.bic < MARGIN]
        chosen = min(within, key=lambda t: _simplicity(t, order))
        reason = _unlike(chosen, order)
        if reason is None or len(rest) == 1:
            break
        set_aside.append((chosen, reason))
        rest.remove(chosen)
    decision = ("clear" if chosen is lowest and (len(rest) == 1 or sorted(
        t.bic for t in rest)[1] - chosen.bic >= MARGIN) else "near tie")
    # Where no model describes the data, none is named: the reference (the simplest, the
    # uniform junction) is reported, its numbers withheld as a poor fit, and its
    # departures read by the diagnostics.
    reference = min(trials, key=lambda t: order.get(t.name, len(order)))
    if chosen.reduced_chisq > POOR_FIT_REDCHI:
        chosen, decision = reference, "none fits"
    aside = [t for t, _ in set_aside]
    runner = next((t for t in trials if t is not chosen and t not in aside), None)
    return chosen, {
        "chosen": chosen.name,
        "lowest_criterion": rest[0].name,
        "runner_up": None if runner is None else runner.name,
        "criterion_difference": None if runner is None else float(runner.bic - chosen.bic),
        "decision": decision,
        "candidates": [{"model": t.name, "bic": float(t.bic),
                        "delta_bic": float(t.bic - trials[0].bic),
                        "chisq_over_noise": float(t.chisq_over_noise),
                        "reduced_chisq": float(t.reduced_chisq),
                        "parameters": t.parameters, "node_floor": t.floor,
                        "shape_parameter": t.shaped, "residual_runs_z": float(t.runs_z),
                        "residual_runs_ratio": float(t.runs_ratio),
                        "screened_every": t.screened or None}
                       for t in trials],
        "set_aside": [{"model": t.name, "reduced_chisq": float(t.reduced_chisq),
                       "residual_runs_z": float(t.runs_z),
                       "residual_runs_ratio": float(t.runs_ratio), "reason": reason}
                      for t, reason in set_aside],
    }


def describes(trial) -> bool:
    """Whether a trial describes the data: reduced chi-square at most
    ``DESCRIBES_REDCHI`` and residual signs without material structure."""
    return trial.reduced_chisq <= DESCRIBES_REDCHI and not _structured(trial)


def _structured(trial) -> bool:
    """Residual signs in field order that are both significantly (runs test z below
    ``-RUNS_Z``) and materially (fewer than ``RUNS_RATIO`` of the expected runs) too
    few: a significance alone grows with the square root of the points and would, on
    ten thousand points, reject a model for a mismatch of a percent."""
    return trial.runs_z < -RUNS_Z and trial.runs_ratio < RUNS_RATIO


def _unlike(trial, order):
    """Why a model other than the reference does not describe the data, or ``None``."""
    if order.get(trial.name, len(order)) == 0:
        return None
    if trial.shaped and trial.reduced_chisq > DESCRIBES_REDCHI:
        return (f"its shape parameter lets it bend towards data it does not describe "
                f"(reduced chi-square {trial.reduced_chisq:.3g} above {DESCRIBES_REDCHI:g})")
    if _structured(trial):
        return (f"its residuals run in long stretches of one sign (runs test z = "
                f"{trial.runs_z:.1f}, below -{RUNS_Z:g}; {trial.runs_ratio:.2f} of the "
                f"expected runs, below {RUNS_RATIO:g})")
    return None


def joint_choice(blocks, names=None) -> dict | None:
    """One model for all branches of a junction: the per-branch BICs summed per model.

    ``blocks`` are the ``model_choice`` blocks of the branches; only models fitted
    on every branch compete. Returns the same layout as one branch's block (the
    candidates carry summed values), or ``None`` with fewer than two blocks.
    """
    blocks = [b for b in blocks if b]
    if len(blocks) < 2:
        return None
    names = tuple(names or model_names())
    order = {name: i for i, name in enumerate(names)}
    per_model = {}
    for block in blocks:
        for c in block["candidates"]:
            entry = per_model.setdefault(c["model"],
                                         [0.0, 0.0, 0, False, 0, 0, False, 0.0, 0.0])
            entry[0] += c["bic"]
            entry[1] += c["chisq_over_noise"]
            entry[2] += c["parameters"]
            entry[3] |= c["node_floor"]
            entry[4] += 1
            entry[5] += int(block.get("points", 0))
            entry[6] |= bool(c.get("shape_parameter", False))
            entry[7] += float(c.get("residual_runs_z", 0.0))
            entry[8] += float(c.get("residual_runs_ratio", 1.0))
    # The branches' runs scores combined as independent normal scores (Stouffer).
    trials = [Trial(m, {}, v[1], v[2], v[3], v[0], points=v[5], shaped=v[6],
                    runs_z=v[7] / np.sqrt(v[4]), runs_ratio=v[8] / v[4],
                    gof_scale=float(blocks[0].get("chisq_scale", 1.0)))
              for m, v in per_model.items() if v[4] == len(blocks)]
    if not trials:
        return None
    _, verdict = decide(trials, order)
    return {"criterion": CRITERION, "margin": MARGIN, "branches": len(blocks), **verdict}
