"""Test-run settings: one BLAS thread (the suite's matrices are small, so threads only add
overhead on the 2-core machine), set before numpy is imported by any test module."""

import os

for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")
