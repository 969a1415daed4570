"""lmfit wrappers around the closed-form patterns of :mod:`jjpattern.physics.patterns`.

The parameters are left unbounded: every pattern is even in ``ic0_A``,
``period_T`` and ``floor_A``, so their magnitudes are reported, and lmfit's
bound transforms (which lose precision at SI magnitudes such as 1e-9 A) are
never engaged. The derived ``effective_area_m2 = Phi0 / |period_T|`` is an
lmfit expression, so its standard error carries the covariance.
"""

from __future__ import annotations

import lmfit
import numpy as np

from ..physics.constants import PHI0_WB
from ..physics.patterns import PATTERNS
from .scan import ScanResult, scan_pattern


class PatternModel(lmfit.Model):
    """Base class: one closed-form pattern with hints and a data-driven guess."""

    geometry: str = ""

    def __init__(self, **kwargs):
        kwargs.setdefault("independent_vars", ["field_T"])
        super().__init__(PATTERNS[self.geometry], **kwargs)
        self.set_param_hint("ic0_A", value=1e-6)
        self.set_param_hint("period_T", value=1e-3)
        self.set_param_hint("field_offset_T", value=0.0)
        self.set_param_hint("floor_A", value=0.0, vary=False)
        self.set_param_hint("phi0_Wb", value=PHI0_WB, vary=False)
        self.set_param_hint("effective_area_m2", expr="phi0_Wb / abs(period_T)")

    def unit_shape(self, u):
        """Unit-height pattern of the reduced flux, used by the scan."""
        return PATTERNS[self.geometry](u)

    def scan(self, data, field_T, **kwargs) -> ScanResult:
        """Global (period, offset) search over the data; see :func:`scan_pattern`."""
        return scan_pattern(np.asarray(field_T), np.asarray(data), self.unit_shape, **kwargs)

    def guess(self, data, field_T, **kwargs):
        """Starting values from the data alone: the best candidate of the scan."""
        best = self.scan(data, field_T).candidates[0]
        params = self.make_params(
            ic0_A=best.amplitude_A + best.background_A,
            period_T=best.period_T,
            field_offset_T=best.field_offset_T,
        )
        return lmfit.models.update_param_vals(params, self.prefix, **kwargs)


class RectangularModel(PatternModel):
    """Uniform rectangular junction, ``Ic0 |sinc(u)|``."""

    geometry = "rectangular"


class CircularModel(PatternModel):
    """Uniform circular junction, ``Ic0 |2 J1(pi u) / (pi u)|``."""

    geometry = "circular"


class TwoChannelModel(PatternModel):
    """Two parallel channels, ``Ic0 sqrt(cos^2(pi u) + a^2 sin^2(pi u))``."""

    geometry = "two-channel"

    def __init__(self, **kwargs):
        super().__init__(**kwargs)
        # Even in the asymmetry too; its magnitude is reported.
        self.set_param_hint("asymmetry", value=0.1)

    def unit_shape(self, u):
        # The scan's background term stands in for the asymmetry's lifted minima.
        return np.abs(np.cos(np.pi * u))


#: Every fit model by geometry name; tests loop over this registry.
MODELS = {cls.geometry: cls for cls in (RectangularModel, CircularModel, TwoChannelModel)}
