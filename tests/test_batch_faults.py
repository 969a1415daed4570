"""A batch killed with SIGKILL at several points and rerun ends with the same outputs as an
uninterrupted run.

Each kill point is a named step at which the batch process sends itself SIGKILL
(``JJPATTERN_TEST_KILL_AT``), so the test does not depend on timing; each rerun
is itself killed at a later point, and the last run finishes. The sweeps are the
ones of test_batch_run.py (numpy |Ic0 sinc| + noise, independent of the fit code).
"""

import json
import os
import signal
import subprocess
import sys

from test_batch_run import make_chip

from jjpattern.batch.runner import result_stem, run_batch
from jjpattern.outdir import KILL_HOOK, TEMP_MARK

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def _small_manifest(folder) -> str:
    """Two junctions of the test chip, with few resamples to stay quick."""
    with open(make_chip(str(folder)), encoding="utf-8") as handle:
        lines = handle.read().splitlines()[:3]
    path = os.path.join(folder, "two.csv")
    with open(path, "w", encoding="utf-8") as handle:
        handle.write("\n".join(line.rsplit(",", 1)[0] + ",5" if i else line
                               for i, line in enumerate(lines)) + "\n")
    return path


def _without(doc, keys):
    if isinstance(doc, dict):
        return {k: _without(v, keys) for k, v in doc.items() if k not in keys}
    if isinstance(doc, list):
        return [_without(v, keys) for v in doc]
    return doc


def _outputs(out) -> dict:
    """Every output file's content; result documents without their time of writing and the
    command line (the killed runs' differs from the in-process run's by construction)."""
    found = {}
    for where, _, files in os.walk(out):
        for name in files:
            path = os.path.join(where, name)
            rel = os.path.relpath(path, out)
            assert TEMP_MARK not in rel and ".tmp" not in rel, rel
            if name.endswith(".lock"):
                continue
            with open(path, "rb") as handle:
                data = handle.read()
            if name.endswith(".json"):
                data = _without(json.loads(data), {"generated_utc", "command"})
            found[rel] = data
    return found


def test_a_batch_killed_at_several_points_ends_as_an_uninterrupted_one(tmp_path):
    manifest = _small_manifest(tmp_path)
    command = ["batch", "two.csv", "--out", "out"]
    reference = run_batch(manifest, tmp_path / "ref", workers=1, chunk_size=1,
                          progress=False, command=command)
    assert (reference.analysed, reference.failed) == (2, 0)
    expected = _outputs(tmp_path / "ref")

    out = tmp_path / "out"
    second = f"{result_stem('T-1', 'J2', 'CD-1')}.json"
    env = {**os.environ, "PYTHONPATH": ROOT}
    argv = [sys.executable, "-m", "jjpattern.cli", "batch", manifest, "--out", str(out),
            "--workers", "1", "--chunk-size", "1", "--quiet", "--no-catalog"]
    for kill_at in (f"{second}:written",      # J1 saved, J2's document half-way
                    "summary.csv:written",    # every document saved, the table not yet
                    "period.png:written"):    # a chip figure half-way
        proc = subprocess.run(argv, env={**env, KILL_HOOK: kill_at}, timeout=300,
                              stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
        assert proc.returncode == -signal.SIGKILL, (kill_at, proc.stderr)
        results = out / "results"
        for name in os.listdir(results):  # what stands under a final name is whole
            if name.endswith(".json"):
                json.loads((results / name).read_text(encoding="utf-8"))
    left = [n for n in os.listdir(out / "chips" / "T-1") if TEMP_MARK in n]
    assert left, "the last kill left its half-written figure behind"

    final = run_batch(manifest, out, workers=1, chunk_size=1, progress=False,
                      command=command)
    assert (final.analysed, final.skipped, final.failed) == (2, 2, 0)
    assert _outputs(out) == expected
