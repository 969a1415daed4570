"""Several processes recording into one catalog at once, and a process killed while writing
(SIGKILL at an arbitrary moment): the file stays sound and keeps every committed record."""

import multiprocessing
import os
import pathlib
import signal
import subprocess
import sys

import pytest

from jjpattern.catalog import open_catalog

ROOT = pathlib.Path(__file__).resolve().parents[1]


def _writer(path, worker, count, shared):
    # Runs in a child process: its own records, then records every worker also writes.
    sys.path.insert(0, str(ROOT / "tests"))
    from catalog_helpers import result

    with open_catalog(path) as cat:
        for i in range(count):
            cat.record(result(cooldown=f"CD-{worker}-{i}"))
        for i in range(shared):
            cat.record(result(cooldown=f"shared-{i}"))


def test_processes_recording_at_once(tmp_path):
    path = str(tmp_path / "lab.sqlite")
    # fork where there is one: the children start without importing numpy again
    methods = multiprocessing.get_all_start_methods()
    ctx = multiprocessing.get_context("fork" if "fork" in methods else "spawn")
    workers = [ctx.Process(target=_writer, args=(path, w, 12, 4)) for w in range(3)]
    for p in workers:
        p.start()
    for p in workers:
        p.join(120)
    assert [p.exitcode for p in workers] == [0, 0, 0]
    with open_catalog(path, create=False) as cat:
        rows = cat.records()
        assert cat.integrity() == "ok"
        fits = cat.conn.execute("SELECT count(*) FROM fits").fetchone()[0]
    cooldowns = sorted(r.cooldown for r in rows)
    # Each worker's own records once, the shared ones once in all.
    assert len(rows) == 3 * 12 + 4 and len(set(cooldowns)) == len(cooldowns)
    assert fits == 2 * len(rows)


_LOOP = """
import sys
sys.path.insert(0, {tests!r})
from catalog_helpers import result
from jjpattern.catalog import open_catalog
with open_catalog({path!r}) as cat:
    i = {start}
    while True:
        done = cat.record(result(cooldown=f"CD-{{i}}"))
        print(done.record_id, flush=True)
        i += 1
"""


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs SIGKILL")
def test_killed_writer_leaves_a_sound_catalog(tmp_path):
    path = str(tmp_path / "lab.sqlite")
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    committed = set()
    for round_, wanted in enumerate((7, 13, 4)):
        code = _LOOP.format(tests=str(ROOT / "tests"), path=path, start=1000 * round_)
        proc = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE,
                                env=env, text=True)
        seen = []
        while len(seen) < wanted:
            line = proc.stdout.readline()
            assert line, "the writer stopped by itself"
            seen.append(int(line))
        proc.send_signal(signal.SIGKILL)  # mid-loop: often inside a transaction
        proc.wait(30)
        proc.stdout.close()
        committed |= set(seen)
        with open_catalog(path, create=False) as cat:
            assert cat.integrity() == "ok"
            stored = {r.id for r in cat.records()}
            orphans = cat.conn.execute(
                "SELECT count(*) FROM fits WHERE record_id NOT IN (SELECT id FROM records)"
            ).fetchone()[0]
        # Every record reported as committed is there; at most the one in flight beyond.
        assert committed <= stored
        assert len(stored - committed) <= round_ + 1
        assert orphans == 0
