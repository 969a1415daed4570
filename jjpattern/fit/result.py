"""The result of one automatic fit, named like the JSON keys."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..physics.models import get_model

#: Keys of one ``fits`` entry in the JSON document, in order.
FIT_KEYS = (
    "branch", "model", "period_T", "period_stderr_T", "field_offset_T", "field_offset_stderr_T",
    "ic0_A", "ic0_stderr_A", "effective_area_m2", "effective_area_stderr_m2",
    "node_floor_A", "node_floor_stderr_A", "reduced_chisq", "lobes_observed", "nodes_observed",
    "points_used", "points_downweighted", "residual_rms_A", "noise_A", "ic_max_A",
    "field_min_T", "field_max_T", "loss", "uncertainty", "asymmetry", "asymmetry_stderr",
)


@dataclass
class PatternFit:
    """Outcome of :func:`jjpattern.fit_pattern` for one current branch.

    Attributes are ``None`` where the data do not determine the number (an
    honest "cannot tell"); ``flags`` says why. ``fit_result`` is the
    reported fit, a :class:`jjpattern.fit.reported.ReportedFit` in SI (``params`` with
    ``effective_area_m2``, ``covar`` over ``var_names``, ``best_fit`` in A; its residual
    and reduced chi-square are in units of the model-free noise), for further work;
    :meth:`lmfit_result` gives lmfit's view of the same fit (imports lmfit).
    ``extra_params`` and ``extra_stderr`` hold the model's extra parameters by
    name (magnitudes where the pattern is even in them); those with a JSON key
    of their own (``asymmetry``) are also copied there. ``derived`` holds the
    model's own derived numbers (``jc_times_area_A`` of a long junction) with
    ``derived_stderr``; ``withheld`` says why the numbers of a fit that misses the
    data are ``None`` (``best_params`` then holds the trial parameters, which are
    not results); ``model_choice`` is the evidence of an automatic choice.
    """

    branch: str
    model: str
    period_T: float | None = None
    period_stderr_T: float | None = None
    field_offset_T: float | None = None
    field_offset_stderr_T: float | None = None
    ic0_A: float | None = None
    ic0_stderr_A: float | None = None
    effective_area_m2: float | None = None
    effective_area_stderr_m2: float | None = None
    node_floor_A: float | None = None
    node_floor_stderr_A: float | None = None
    reduced_chisq: float | None = None
    lobes_observed: int | None = None
    nodes_observed: int | None = None
    points_used: int = 0
    points_downweighted: int = 0
    residual_rms_A: float | None = None
    noise_A: float | None = None
    ic_max_A: float | None = None
    field_min_T: float | None = None
    field_max_T: float | None = None
    loss: str = "linear"
    uncertainty: str = ""
    asymmetry: float | None = None
    asymmetry_stderr: float | None = None
    flags: list = field(default_factory=list)
    field_T: np.ndarray = field(default=None, repr=False)
    ic_A: np.ndarray = field(default=None, repr=False)
    best_params: dict = field(default_factory=dict, repr=False)
    extra_params: dict = field(default_factory=dict, repr=False)
    extra_stderr: dict = field(default_factory=dict, repr=False)
    floor_evidence: dict | None = field(default=None, repr=False)
    fit_result: object = field(default=None, repr=False)
    derived: dict = field(default_factory=dict, repr=False)
    derived_stderr: dict = field(default_factory=dict, repr=False)
    withheld: dict | None = field(default=None, repr=False)
    model_choice: dict | None = field(default=None, repr=False)

    def to_dict(self) -> dict:
        """The ``fits`` entry of the JSON document (plain floats, ``None`` for null)."""
        out = {}
        for key in FIT_KEYS:
            value = getattr(self, key)
            if isinstance(value, (np.floating, np.integer)):
                value = value.item()
            if isinstance(value, float) and not np.isfinite(value):
                value = None
            out[key] = value
        return out

    def lmfit_result(self):
        """lmfit's ``MinimizerResult`` of the reported fit in SI (``None`` without one),
        for ``lmfit.fit_report`` and confidence intervals."""
        return None if self.fit_result is None else self.fit_result.to_lmfit()

    def model_A(self, field_T) -> np.ndarray:
        """The best-fit curve at ``field_T`` (also where offset or Ic0 are withheld); NaN
        for a fit withheld because the model misses the data (``withheld``)."""
        p = self.best_params
        if not p or self.withheld:
            return np.full(np.shape(field_T), np.nan)
        return get_model(self.model).formula(np.asarray(field_T, dtype=float), **p)

    def residual_A(self) -> np.ndarray:
        """Data minus the best-fit curve."""
        return self.ic_A - self.model_A(self.field_T)
