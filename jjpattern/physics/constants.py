"""Physical constants taken from scipy.constants (CODATA), never typed in."""

from scipy.constants import physical_constants

#: Magnetic flux quantum h/(2e) in weber (exact since the 2019 SI redefinition).
PHI0_WB: float = physical_constants["mag. flux quantum"][0]
