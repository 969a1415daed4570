"""Test-run settings: one BLAS thread (the suite's matrices are small, so threads only add
overhead on the 2-core machine), set before numpy is imported by any test module."""

import os
import tempfile

for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

# No test may record into a developer's own catalog: the default catalog lives under the
# user's data directory, and JJPATTERN_CATALOG would switch recording on for every run.
os.environ.pop("JJPATTERN_CATALOG", None)
os.environ["XDG_DATA_HOME"] = os.path.join(
    tempfile.mkdtemp(prefix="jjpattern-tests-"), "data")


import pytest  # noqa: E402  (after the thread settings above)


@pytest.fixture(scope="session")
def map_report_dir(tmp_path_factory):
    """The report of the demo map (voltage map, both branches, Tc given), made once."""
    from jjpattern.cli import main
    from jjpattern.demo import demo_files

    out = tmp_path_factory.mktemp("map-report") / "r"
    assert main(["report", demo_files()["kt14_j07_map.h5"], "--out", str(out),
                 "--tc-K", "9.2", "--figures", "png,pdf,svg"]) == 0
    return out
