"""The analysis of a small CSV imports none of the heavy libraries (issue 13, start-up).

Each costs a noticeable part of a second to import (``python -X importtime``; figures in
DEVELOPERS.md, performance). The command runs in a fresh interpreter, so what it imports
shows in ``sys.modules`` afterwards. Not timed: ``scripts/bench_startup.py`` measures.
"""

import hashlib
import json
import os
import subprocess
import sys
from pathlib import Path

from jjpattern.demo import demo_files

#: Libraries ``analyze <demo csv> --json`` must not import: figures (matplotlib), tables
#: (pandas), HDF5 (h5py) and what the fit no longer uses (lmfit, which brought scipy.stats
#: and uncertainties). scipy.optimize stays: the fit needs it.
NOT_ON_ANALYZE_PATH = ("pandas", "matplotlib", "h5py", "lmfit", "scipy.stats", "uncertainties",
                       "scipy.signal", "xarray")

CHILD = """\
import contextlib, io, json, sys
from jjpattern.cli import main
out = io.StringIO()
with contextlib.redirect_stdout(out):
    code = main(sys.argv[1:])
print(json.dumps({"code": code, "modules": sorted(sys.modules), "out": out.getvalue()}))
"""


def run_fresh(*args):
    """Exit code, module names and output of the command line run in a new interpreter."""
    root = str(Path(__file__).resolve().parent.parent)
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(
        [root, *filter(None, [os.environ.get("PYTHONPATH")])])}
    proc = subprocess.run([sys.executable, "-c", CHILD, *args], capture_output=True, text=True,
                          env=env, timeout=120, check=False)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout.splitlines()[-1])


def test_analyze_json_of_the_demo_csv_imports_no_heavy_library():
    path = demo_files()["kt14_j03.csv"]
    got = run_fresh("analyze", path, "--json")
    assert got["code"] == 0
    # The document is of this file (SHA-256, FIPS 180-4, through hashlib).
    assert json.loads(got["out"])["input"]["sha256"] == hashlib.sha256(
        Path(path).read_bytes()).hexdigest()
    heavy = [m for m in NOT_ON_ANALYZE_PATH if m in got["modules"]]
    assert heavy == [], f"imported on the analyze path: {heavy}"
    assert "scipy.optimize" in got["modules"]  # the fit ran (it needs scipy.optimize)
