"""Output safety: atomic files, report folders swapped in whole, locks, inputs never
overwritten, every output error a sentence with exit 2, a quiet end on a closed pipe.

Kill points are named steps (``JJPATTERN_TEST_KILL_AT``) at which the writer sends
itself SIGKILL, so no test depends on timing.
"""

import errno
import json
import os
import signal
import subprocess
import sys
import tempfile
import threading

import pytest

from jjpattern import outdir
from jjpattern.cli import EXIT_CLOSED_PIPE, main
from jjpattern.demo import demo_files
from jjpattern.outdir import COMPLETE, TEMP_MARK, OutputError

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def _run_killed(code: str, kill_at: str):
    """Run ``code`` (with ``outdir`` imported) in a fresh interpreter that dies at ``kill_at``."""
    env = {**os.environ, "PYTHONPATH": ROOT, outdir.KILL_HOOK: kill_at}
    proc = subprocess.run([sys.executable, "-c", "from jjpattern import outdir\n" + code],
                          env=env, capture_output=True, text=True, timeout=120)
    return proc


def _tree(folder) -> dict:
    """Relative path -> text of every file under ``folder``."""
    out = {}
    for where, _, files in os.walk(folder):
        for name in files:
            path = os.path.join(where, name)
            with open(path, encoding="utf-8") as handle:
                out[os.path.relpath(path, folder)] = handle.read()
    return out


# -- single files --------------------------------------------------------------------------
def test_a_planted_symlink_is_never_followed(tmp_path):
    victim = tmp_path / "victim.txt"
    victim.write_text("precious\n")
    out = tmp_path / "methods.txt"
    # The names a predictable scheme would use, and the final name itself, all point at it.
    for pid in range(os.getpid() - 3, os.getpid() + 4):
        os.symlink(victim, tmp_path / f"methods.txt.tmp{pid}")
    os.symlink(victim, out)
    outdir.write_text(out, "new text\n")
    assert victim.read_text() == "precious\n"
    assert not out.is_symlink() and out.read_text() == "new text\n"


def test_a_failed_write_keeps_the_old_file_and_leaves_no_temporary(tmp_path):
    out = tmp_path / "fit.csv"
    out.write_text("old\n")
    with pytest.raises(RuntimeError), outdir.atomic_file(out) as handle:
        handle.write("half a tab")
        raise RuntimeError("the renderer failed")
    assert out.read_text() == "old\n"
    assert os.listdir(tmp_path) == ["fit.csv"]


def test_new_files_get_the_umask_and_a_replaced_file_keeps_its_mode(tmp_path):
    umask = os.umask(0o022)  # the test sets it: mkstemp alone would give 0600
    try:
        outdir.write_text(tmp_path / "a.txt", "a")
        assert (tmp_path / "a.txt").stat().st_mode & 0o777 == 0o644
        os.chmod(tmp_path / "a.txt", 0o640)
        outdir.write_text(tmp_path / "a.txt", "b")
        assert (tmp_path / "a.txt").stat().st_mode & 0o777 == 0o640
    finally:
        os.umask(umask)


@pytest.mark.parametrize("phase", ["written", "replaced"])
def test_a_file_write_killed_leaves_the_old_or_new_file_and_a_hidden_temporary(tmp_path, phase):
    out = tmp_path / "pattern.svg"
    out.write_text("<svg>old</svg>")
    proc = _run_killed(f"outdir.write_text({str(out)!r}, '<svg>new</svg>')",
                       f"pattern.svg:{phase}")
    assert proc.returncode == -signal.SIGKILL
    assert out.read_text() == ("<svg>old</svg>" if phase == "written" else "<svg>new</svg>")
    left = [n for n in os.listdir(tmp_path) if n != "pattern.svg"]
    # A cut-off temporary stays after SIGKILL, but hidden and never under a figure's suffix.
    assert len(left) == (1 if phase == "written" else 0)
    assert all(n.startswith(".") and TEMP_MARK in n and not n.endswith(".svg") for n in left)
    outdir.check_file_target(out)  # the next write of the same file cleans up first
    assert os.listdir(tmp_path) == ["pattern.svg"]


def test_cleaning_spares_a_temporary_that_is_being_written(tmp_path):
    with outdir.atomic_file(tmp_path / "a.csv") as handle:
        handle.write("x")
        outdir.clean_partial(tmp_path)
        assert len(os.listdir(tmp_path)) == 1
    assert os.listdir(tmp_path) == ["a.csv"]


# -- whole folders -------------------------------------------------------------------------
_OLD = {"report.html": "old page", "fit.csv": "old table"}
_NEW = {"report.html": "new page", "fit.csv": "new table", "map.png": "new map"}
_BUILD = """
import os
with outdir.replace_folder({out!r}) as build:
    for name, text in {files!r}.items():
        outdir.write_text(os.path.join(build, name), text)
"""


def _old_report(out):
    with outdir.replace_folder(out) as build:
        for name, text in _OLD.items():
            outdir.write_text(os.path.join(build, name), text)


@pytest.mark.parametrize(("kill_at", "exchange", "expect"), [
    ("fit.csv:replaced", True, _OLD),   # half-way through the build
    ("rep:built", True, _OLD),          # built, not yet swapped
    ("rep:swapped", True, _NEW),        # swapped, the old one not yet removed
    ("rep:aside", False, None),         # two renames: between them
    ("rep:swapped", False, _NEW),
])
def test_a_report_killed_part_way_leaves_the_old_or_the_new_folder(tmp_path, kill_at,
                                                                   exchange, expect):
    out = tmp_path / "rep"
    _old_report(out)
    code = ("" if exchange else "outdir._exchange = lambda a, b: False\n") + _BUILD.format(
        out=str(out), files=_NEW)
    proc = _run_killed(code, kill_at)
    assert proc.returncode == -signal.SIGKILL, proc.stderr
    if expect is None:  # the old folder is set aside whole; the next writer puts it back
        assert not out.exists()
        aside = [n for n in os.listdir(tmp_path) if f"{TEMP_MARK}old-" in n]
        outdir.clean_partial(tmp_path)
        assert aside and _tree(out) == {**_OLD, COMPLETE: _tree(out)[COMPLETE]}
    else:
        tree = _tree(out)
        assert json.loads(tree.pop(COMPLETE))["files"] == sorted(expect)
        assert tree == expect
    if kill_at == "rep:swapped":  # the old folder waits beside, under a temporary name
        kind = "build-" if exchange else "old-"
        aside, = [n for n in os.listdir(tmp_path) if f"{TEMP_MARK}{kind}" in n]
        assert {k: v for k, v in _tree(tmp_path / aside).items() if k != COMPLETE} == _OLD
    # The next report cleans what the killed one left and lands whole.
    with outdir.replace_folder(out) as build:
        outdir.write_text(os.path.join(build, "report.html"), "third")
    assert sorted(os.listdir(tmp_path)) == [".rep.lock", "rep"]
    assert sorted(os.listdir(out)) == [COMPLETE, "report.html"]


def test_two_reports_into_one_folder_wait_for_each_other(tmp_path):
    out = tmp_path / "rep"
    inside, release = threading.Event(), threading.Event()

    def first():
        with outdir.replace_folder(out) as build:
            outdir.write_text(os.path.join(build, "fit.csv"), "first")
            inside.set()
            release.wait(30)

    writer = threading.Thread(target=first)
    writer.start()
    assert inside.wait(30)
    with pytest.raises(OutputError, match="another jjpattern run is writing there"), \
            outdir.replace_folder(out, lock_timeout_s=0):
        pass
    release.set()
    with outdir.replace_folder(out, lock_timeout_s=30) as build:  # waits for the first
        outdir.write_text(os.path.join(build, "report.html"), "second")
    writer.join()
    assert sorted(os.listdir(out)) == [COMPLETE, "report.html"]  # no figure of the first


def test_a_folder_that_is_not_a_report_is_refused(tmp_path):
    (tmp_path / "notes.txt").write_text("lab notes")
    with pytest.raises(OutputError, match="'notes.txt', which is not from an earlier report"), \
            outdir.replace_folder(tmp_path):
        pass
    assert os.listdir(tmp_path) == ["notes.txt"]
    # Nor is a report someone has added a file of their own to.
    _old_report(tmp_path / "rep")
    (tmp_path / "rep" / "notes.txt").write_text("lab notes")
    with pytest.raises(OutputError, match="'notes.txt'"), outdir.replace_folder(tmp_path / "rep"):
        pass
    assert sorted(os.listdir(tmp_path / "rep")) == sorted([COMPLETE, "notes.txt", *_OLD])


# -- the command line ----------------------------------------------------------------------
@pytest.fixture()
def sweep_folder(tmp_path):
    """A sweep saved as ``fit.csv`` in its own folder beside a ``methods.txt`` of the lab's."""
    folder = tmp_path / "cooldown"
    folder.mkdir()
    with open(demo_files()["kt14_j03.csv"], encoding="utf-8") as handle:
        (folder / "fit.csv").write_text(handle.read())
    (folder / "methods.txt").write_text("our own methods\n")
    return folder


def _one_sentence(err: str) -> str:
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("jjpattern: "), err
    assert "internal error" not in err and "Traceback" not in err
    return lines[0]


def test_report_into_the_inputs_own_folder_is_refused(sweep_folder, capsys):
    before = {n: (sweep_folder / n).read_bytes() for n in os.listdir(sweep_folder)}
    for argv in (["report", str(sweep_folder / "fit.csv"), "--out", str(sweep_folder)],
                 ["analyze", str(sweep_folder / "fit.csv"), "--report", str(sweep_folder)]):
        assert main(argv) == 2
        line = _one_sentence(capsys.readouterr().err)
        assert "fit.csv is inside this folder" in line and "choose another folder" in line
    assert {n: (sweep_folder / n).read_bytes() for n in os.listdir(sweep_folder)} == before


def test_a_batch_whose_outputs_would_hold_its_inputs_is_refused(sweep_folder, capsys):
    results = sweep_folder / "results"  # where the batch writes its result documents
    results.mkdir()
    (results / "j1.csv").write_bytes((sweep_folder / "fit.csv").read_bytes())
    manifest = sweep_folder / "manifest.csv"
    manifest.write_text("file,junction\nresults/j1.csv,J1\n")
    assert main(["batch", str(manifest), "--out", str(sweep_folder)]) == 2
    assert "would overwrite its input" in _one_sentence(capsys.readouterr().err)
    assert sorted(os.listdir(results)) == ["j1.csv"]


def test_output_paths_that_cannot_be_written_are_one_sentence(sweep_folder, tmp_path, capsys):
    sweep = str(sweep_folder / "fit.csv")
    cases = [
        (["report", sweep, "--out", str(sweep_folder / "methods.txt")], "it is a file"),
        (["extract", demo_files()["kt14_j07_map.h5"], "--out", str(tmp_path)],
         "it is a folder; give a file name"),
        (["analyze", sweep, "--plot", str(tmp_path / "nowhere" / "p.png")], "does not exist"),
    ]
    for argv, words in cases:
        assert main(argv) == 2
        assert words in _one_sentence(capsys.readouterr().err)


@pytest.mark.parametrize(("error", "words"), [
    (errno.EROFS, "the file system is read-only"),
    (errno.EACCES, "no permission to write there"),
])
def test_a_folder_that_refuses_writes_is_one_sentence(tmp_path, monkeypatch, capsys, error,
                                                      words):
    # Tests run as root, for whom a chmod-ed folder stays writable: the refusal is simulated
    # where the operating system would give it.
    def refuse(*args, **kwargs):
        raise OSError(error, os.strerror(error))

    monkeypatch.setattr(tempfile, "mkstemp", refuse)
    (tmp_path / "a.csv").write_text("B (mT),Ic (uA)\n0,1\n")
    assert main(["batch", str(tmp_path)]) == 2  # writes a starter manifest there
    line = _one_sentence(capsys.readouterr().err)
    assert words in line and "manifest.csv" in line


def test_a_full_disk_is_one_sentence_and_keeps_the_old_file(tmp_path, monkeypatch, capsys):
    table = tmp_path / "ic.csv"
    table.write_text("the table of yesterday\n")
    real_fsync = os.fsync

    def full(fd):
        real_fsync(fd)
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(os, "fsync", full)
    assert main(["extract", demo_files()["kt14_j07_map.h5"], "--out", str(table)]) == 2
    assert "ic.csv: cannot write (the disk is full" in _one_sentence(capsys.readouterr().err)
    assert table.read_text() == "the table of yesterday\n"
    assert os.listdir(tmp_path) == ["ic.csv"]


def test_a_file_system_error_anywhere_is_one_sentence(tmp_path, monkeypatch, capsys):
    def full(path, *args, **kwargs):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(path))

    monkeypatch.setattr(os, "makedirs", full)
    assert main(["demo", "--out", str(tmp_path / "d")]) == 2
    line = _one_sentence(capsys.readouterr().err)
    assert f"{tmp_path / 'd'}: cannot write (the disk is full" in line


def test_a_report_over_the_current_folder_is_refused(tmp_path, monkeypatch, capsys):
    _old_report(tmp_path / "rep")
    monkeypatch.chdir(tmp_path / "rep")
    assert main(["report", demo_files()["kt14_j03.csv"], "--out", "."]) == 2
    assert "the current folder is inside it" in _one_sentence(capsys.readouterr().err)
    assert sorted(os.listdir(tmp_path / "rep")) == sorted([COMPLETE, *_OLD])


def test_a_closed_pipe_ends_quietly(tmp_path):
    # ``analyze --json | head -1`` with the reader gone before the first byte.
    env = {**os.environ, "PYTHONPATH": ROOT}
    proc = subprocess.Popen([sys.executable, "-m", "jjpattern.cli", "analyze", "--json",
                             demo_files()["kt14_j03.csv"], "--no-catalog"], env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()
    err = proc.stderr.read().decode()
    assert proc.wait(timeout=120) == EXIT_CLOSED_PIPE
    assert err == ""
