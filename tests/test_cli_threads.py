"""The command line holds BLAS to one thread in the process it starts, unless the user chose."""

import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
CODE = ("import os, sys\n"
        "from jjpattern.cli import main\n"
        "main(['analyze', sys.argv[1], '--json'])\n"
        "import numpy\n"
        "print(os.environ.get('OPENBLAS_NUM_THREADS'), os.environ.get('OMP_NUM_THREADS'),"
        " file=sys.stderr)\n")


def _threads(**env):
    base = {k: v for k, v in os.environ.items() if not k.endswith("_NUM_THREADS")}
    out = subprocess.run([sys.executable, "-c", CODE,
                          str(ROOT / "jjpattern" / "demo_data" / "kt14_j03.csv")],
                         capture_output=True, text=True, cwd=ROOT, check=True,
                         env={**base, "PYTHONPATH": str(ROOT), **env})
    return out.stderr.split()[-2:]


def test_one_blas_thread_unless_the_user_set_it():
    assert _threads() == ["1", "1"]
    assert _threads(OPENBLAS_NUM_THREADS="2") == ["2", "1"]
