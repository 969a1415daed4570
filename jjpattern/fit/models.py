"""One lmfit model class for every pattern of :mod:`jjpattern.physics.models`.

The parameters are left unbounded unless a model's extra parameter asks for
bounds: every pattern is even in ``ic0_A``, ``period_T`` and ``floor_A``, so their
magnitudes are reported, and lmfit's bound transforms (which lose precision at SI
magnitudes such as 1e-9 A) are never engaged. The derived
``effective_area_m2 = Phi0 / |period_T|`` is an lmfit expression, so its standard
error carries the covariance.
"""

from __future__ import annotations

from functools import partial

import lmfit
import numpy as np

from ..physics.constants import PHI0_WB
from ..physics.models import PatternModelSpec, get_model
from ..physics.models.registry import ModelView
from .scan import ScanResult, scan_pattern


class PatternModel(lmfit.Model):
    """The lmfit model of one pattern spec (or its registered name)."""

    def __init__(self, spec: PatternModelSpec | str, **kwargs):
        self.spec = get_model(spec) if isinstance(spec, str) else spec
        kwargs.setdefault("independent_vars", ["field_T"])
        kwargs.setdefault("param_names", list(self.spec.parameter_names()))
        kwargs.setdefault("name", self.spec.name)
        super().__init__(self.spec.formula, **kwargs)
        self.set_param_hint("ic0_A", value=1e-6)
        self.set_param_hint("period_T", value=1e-3)
        self.set_param_hint("field_offset_T", value=0.0)
        self.set_param_hint("floor_A", value=0.0, vary=False)
        for p in self.spec.extra:
            self.set_param_hint(p.name, value=p.start, min=p.min, max=p.max)
        self.set_param_hint("phi0_Wb", value=PHI0_WB, vary=False)
        self.set_param_hint("effective_area_m2", expr="phi0_Wb / abs(period_T)")

    @property
    def geometry(self) -> str:
        """Registered name of the pattern."""
        return self.spec.name

    def unit_shape(self, u):
        """Unit-height pattern of the reduced flux, used by the scan."""
        return self.spec.unit_shape(u)

    def scan(self, data, field_T, **kwargs) -> ScanResult:
        """Global (period, offset) search over the data; see :func:`scan_pattern`.

        A periodic pattern's offset is defined modulo a period, so its offsets are
        searched within the window only.
        """
        if self.spec.periodic:
            kwargs.setdefault("extend", 0.0)
        return scan_pattern(np.asarray(field_T), np.asarray(data), self.unit_shape, **kwargs)


def pattern_model(geometry: str) -> PatternModel:
    """The lmfit model of the registered pattern ``geometry`` (InputError if unknown)."""
    return PatternModel(get_model(geometry))


#: ``name -> zero-argument model factory`` over the registry (temporary models too), so
#: ``MODELS[name]()`` works as it did when each model was a class.
MODELS = ModelView(lambda spec: partial(PatternModel, spec))
