"""The code stays ruff clean (the linter is part of the test extra)."""

import pathlib
import shutil
import subprocess

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[1]


@pytest.mark.skipif(shutil.which("ruff") is None, reason="ruff is not installed")
def test_ruff_clean():
    done = subprocess.run(["ruff", "check", str(ROOT)], capture_output=True, text=True)
    assert done.returncode == 0, done.stdout


def test_no_module_over_500_lines():
    long = [str(p.relative_to(ROOT)) for p in (ROOT / "jjpattern").rglob("*.py")
            if len(p.read_text(encoding="utf-8").splitlines()) > 500]
    assert long == []
