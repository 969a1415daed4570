"""Run a manifest of junctions: in parallel, resumable, one bad file never stops the batch.

Each junction's result document is written to ``results/`` (atomically) as it
comes back; a junction whose saved document has the same input SHA-256 and
settings hash is not analysed again, so an interrupted batch continues where
it stopped. At the end the summary table and the chip outputs are written from
the documents alone.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import sys
import time
from dataclasses import dataclass, field

from ..errors import InputError
from . import worker

RESULTS, REPORTS = "results", "reports"
#: Largest number of junctions sent to a worker at once.
MAX_CHUNK = 8
_TEMP = re.compile(r"\.tmp\d+")


@dataclass
class BatchOutcome:
    """What a batch did: counts, the wall time and the files written."""

    out_dir: str
    total: int = 0
    analysed: int = 0
    skipped: int = 0
    failed: int = 0
    flagged: int = 0
    seconds: float = 0.0
    analysis_seconds: float = 0.0
    paths: dict = field(default_factory=dict)
    errors: dict = field(default_factory=dict)

    def last_line(self) -> str:
        return (f"{self.total} junctions: {self.analysed} analysed ({self.skipped} already "
                f"done), {self.flagged} flagged, {self.failed} failed; wall time "
                f"{self.seconds:.1f} s")


def result_stem(chip, junction, cooldown) -> str:
    """File stem of a junction's result: its chip, id and cooldown, and a short hash of them
    (two ids that differ only in characters a file name cannot hold stay apart)."""
    parts = [str(p) for p in (chip, junction, cooldown) if p]
    safe = "_".join(re.sub(r"[^A-Za-z0-9.-]+", "-", p).strip("-.") or "x" for p in parts)
    key = "\0".join(str(p or "") for p in (chip, junction, cooldown))
    return f"{safe[:80]}_{hashlib.sha256(key.encode('utf-8')).hexdigest()[:8]}"


def can_read(path) -> bool:
    """Whether jjpattern reads ``path`` as one junction, judged from the first 64 KiB.

    Files: HDF5 and ``.npz`` by signature, delimited text by a header with a
    field and a critical-current column (or a long-form raw map). Folders: two
    or more I-V files (bias and voltage columns, no field column).
    """
    path = os.fspath(path)
    if os.path.basename(path).startswith("."):
        return False
    if os.path.isdir(path):
        try:
            names = [n for n in os.listdir(path) if not n.startswith(".")]
        except OSError:
            return False
        files = [os.path.join(path, n) for n in names if os.path.isfile(os.path.join(path, n))]
        return len(files) >= 2 and len(files) == len(names) and all(
            _sniff(f) == "iv" for f in files)
    return os.path.isfile(path) and _sniff(path) in ("hdf5", "npz", "sweep", "map")


def _sniff(path: str) -> str | None:
    from ..io.maps import looks_like_map
    from ..io.sweep import ic_branch_hint, is_field_name
    from ..io.text import split_whitespace_header

    try:
        with open(path, "rb") as handle:
            head = handle.read(1 << 16)
    except OSError:
        return None
    suffix = os.path.splitext(path)[1].lower()
    if head.startswith(b"\x89HDF\r\n\x1a\n"):
        return "hdf5"
    if head.startswith(b"PK") and suffix == ".npz":
        return "npz"
    if not head.strip() or b"\x00" in head:
        return None
    try:
        text = head.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = head.decode("latin-1")
    lines = [s.strip() for s in text.splitlines() if s.strip() and not s.strip().startswith("#")]
    if len(lines) < 2:
        return None
    delim = next((d for d in (",", "\t", ";") if d in lines[0]), None)
    names = (split_whitespace_header(lines[0]) if delim is None
             else [n.strip().strip("\"'") for n in lines[0].split(delim)])
    first = lines[1].split() if delim is None else lines[1].split(delim)
    try:
        float(first[0])
    except ValueError:
        return None
    if len(names) < 2 or all(_is_number(n) for n in names):
        return None
    has_field = any(is_field_name(n) or is_field_name(n.split("(")[0].split("[")[0])
                    for n in names)
    if looks_like_map(names):
        return "map" if has_field else "iv"
    if any(ic_branch_hint(n.split("(")[0].split("[")[0].strip()) is not None for n in names):
        return "sweep"
    return None


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def starter_manifest(folder, out_path=None) -> tuple[str, list[str]]:
    """Write ``manifest.csv`` in ``folder`` listing what jjpattern can read there.

    Returns the manifest's path and the entries written.
    """
    from .manifest import write_starter_manifest

    out_path = os.fspath(out_path or os.path.join(os.fspath(folder), "manifest.csv"))
    if os.path.exists(out_path):
        raise InputError(f"{out_path}: a manifest is already there; run jjpattern batch "
                         f"{out_path} --out DIR, or remove it to list the folder again")
    return out_path, write_starter_manifest(folder, out_path, can_read)


def _saved(path: str, input_sha: str, settings_hash: str):
    """The saved result at ``path`` when it was made from this input with these settings."""
    from ..result import Result

    try:
        with open(path, encoding="utf-8") as handle:
            doc = json.load(handle)
        result = Result.from_dict(doc)
    except (OSError, ValueError, KeyError, TypeError):
        return None
    if result.input.get("sha256") != input_sha or result.settings.hash() != settings_hash:
        return None
    return result


def _clean_temp(folder: str) -> None:
    """Remove temporary files a killed run left behind (never a file under a final name)."""
    for name in os.listdir(folder):
        if _TEMP.search(name):
            try:
                os.remove(os.path.join(folder, name))
            except OSError:
                pass


class Progress:
    """A one-line progress bar on a terminal; silent elsewhere."""

    def __init__(self, total: int, stream=None, enabled: bool | None = None):
        self.total, self.done, self.failed = total, 0, 0
        self.stream = stream or sys.stderr
        tty = getattr(self.stream, "isatty", lambda: False)()
        self.enabled = tty if enabled is None else enabled and tty
        self.start = time.perf_counter()

    def update(self, done: int = 1, failed: int = 0) -> None:
        self.done += done
        self.failed += failed
        if not self.enabled or not self.total:
            return
        width = 28
        filled = int(width * self.done / self.total)
        elapsed = time.perf_counter() - self.start
        left = elapsed / self.done * (self.total - self.done) if self.done else 0.0
        self.stream.write(f"\r[{'#' * filled}{'.' * (width - filled)}] {self.done}/{self.total}"
                          f" junctions, {self.failed} failed, {elapsed:.0f} s elapsed, "
                          f"~{left:.0f} s left ")
        self.stream.flush()

    def close(self) -> None:
        if self.enabled and self.total:
            self.stream.write("\n")
            self.stream.flush()


def _executor(workers: int, scheduler: str | None):
    """A concurrent.futures executor and the function that closes it."""
    if scheduler:
        try:
            from distributed import Client
        except ImportError:
            raise InputError("--scheduler needs dask.distributed; install it with "
                             "pip install 'jjpattern[cluster]'") from None
        try:
            client = Client(scheduler, timeout="20s")
        except (OSError, TimeoutError) as exc:
            raise InputError(f"--scheduler {scheduler}: cannot reach the scheduler ({exc}); "
                             "check the address") from None
        return client.get_executor(pure=False), client.close
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor

    # Spawned workers start without numpy, so init_worker can pin BLAS to one thread.
    pool = ProcessPoolExecutor(max_workers=workers, initializer=worker.init_worker,
                               mp_context=multiprocessing.get_context("spawn"))
    return pool, lambda: pool.shutdown(wait=True)


def _stop(executor) -> None:
    """Stop at once on Ctrl-C: drop queued chunks and end the local workers."""
    executor.shutdown(wait=False, cancel_futures=True)
    for process in list((getattr(executor, "_processes", None) or {}).values()):
        process.terminate()


def plan(rows, base, out_dir: str, manifest_dir: str, reports: bool, command) -> list[dict]:
    """One job per manifest row: its settings, input hash, result file and table cells."""
    from .table import manifest_cells

    xy_unit = "m" if any(r.xy_unit == "m" for r in rows) else ""
    jobs = []
    for row in rows:
        stem = result_stem(row.chip, row.junction, row.cooldown)
        settings = row.settings(base)
        relative = os.path.relpath(row.file_path, manifest_dir).replace(os.sep, "/")
        job = {"key": stem, "path": row.file_path, "settings": settings.to_dict(),
               "settings_sha256": settings.hash(), "command": command,
               "manifest": {"junction": row.junction, "chip": row.chip, "cooldown": row.cooldown,
                            "row": row.row_number, "file": relative},
               "report_dir": os.path.join(out_dir, REPORTS, stem) if reports else None,
               "result_path": os.path.join(out_dir, RESULTS, f"{stem}.json"),
               "cells": manifest_cells(row, relative, xy_unit, f"{RESULTS}/{stem}.json")}
        try:
            job["input_sha256"] = worker.input_sha256(row.file_path)
        except OSError as exc:
            job["input_sha256"], job["error"] = "", f"{row.file_path}: cannot be read " \
                f"({exc.strerror}); check the file's permissions"
        jobs.append(job)
    return jobs


def _chunks(jobs: list, workers: int, chunk_size: int | None) -> list[list]:
    size = chunk_size or max(1, min(MAX_CHUNK, -(-len(jobs) // (4 * max(workers, 1)))))
    return [jobs[i:i + size] for i in range(0, len(jobs), size)]


def run_batch(manifest, out_dir, *, settings=None, workers: int | None = None,
              scheduler: str | None = None, reports: bool = False, svg: bool = False,
              chunk_size: int | None = None, progress: bool | None = None,
              command=None) -> BatchOutcome:
    """Analyse every junction of ``manifest`` and write the batch outputs into ``out_dir``.

    Parameters
    ----------
    manifest : path
        The manifest CSV (see :mod:`jjpattern.batch.manifest`).
    out_dir : path
        Output folder; created if needed. A rerun resumes from its ``results/``.
    settings : Settings, optional
        Settings of every junction before the manifest's per-row overrides.
    workers : int, optional
        Local worker processes (default ``os.cpu_count()``).
    scheduler : str, optional
        Address of a Dask scheduler; the junctions run on its cluster instead.
    reports, svg : bool
        Write a report folder per junction; write the chip figures as SVG too.
    chunk_size : int, optional
        Junctions per task (default: a quarter of an even share, at most 8).
    progress : bool, optional
        Show the progress bar (default: when stderr is a terminal).
    command : sequence of str, optional
        The command-line arguments, recorded in every result and the chip report.
    """
    from ..report.files import write_text
    from ..result import Result
    from ..settings import Settings
    from .chipreport import write_chip_outputs
    from .manifest import read_manifest
    from .table import failed_row, result_rows, summary_csv, write_parquet

    start = time.perf_counter()
    manifest = os.path.abspath(os.fspath(manifest))
    out_dir = os.path.abspath(os.fspath(out_dir))
    rows = read_manifest(manifest)
    workers = max(1, int(workers or os.cpu_count() or 1))
    os.makedirs(os.path.join(out_dir, RESULTS), exist_ok=True)
    _clean_temp(os.path.join(out_dir, RESULTS))
    outcome = BatchOutcome(out_dir, total=len(rows))
    jobs = plan(rows, settings or Settings(), out_dir, os.path.dirname(manifest), reports,
                list(command) if command is not None else None)
    table: list[dict] = []

    def take(job, result) -> None:
        table.extend(result_rows(result, job["cells"]))
        outcome.analysed += 1
        outcome.flagged += any(f.severity in ("warning", "error") for f in result.flags)

    def fail(job, error: str) -> None:
        if os.path.exists(job["result_path"]):  # it no longer describes this input
            os.remove(job["result_path"])
        table.append(failed_row(job["cells"], error, job["input_sha256"],
                                job["settings_sha256"]))
        outcome.failed += 1
        outcome.errors[job["key"]] = error

    todo = []
    for job in jobs:
        saved = None if "error" in job else _saved(job["result_path"], job["input_sha256"],
                                                   job["settings_sha256"])
        report_there = not reports or os.path.exists(
            os.path.join(job["report_dir"], "report.html"))
        if "error" in job:
            fail(job, job["error"])
        elif saved is not None and report_there:
            take(job, saved)
            outcome.skipped += 1
        else:
            todo.append(job)
    bar = Progress(len(todo), enabled=progress)
    if todo:
        by_key = {job["key"]: job for job in todo}
        executor, close = _executor(workers, scheduler)
        try:
            _run(executor, _chunks(todo, workers, chunk_size), by_key, bar, take, fail,
                 write_text, Result, outcome)
        except KeyboardInterrupt:
            _stop(executor)
            bar.close()
            raise
        finally:
            close()
    bar.close()
    write_text(os.path.join(out_dir, "summary.csv"), summary_csv(table))
    outcome.paths["summary.csv"] = os.path.join(out_dir, "summary.csv")
    if write_parquet(table, os.path.join(out_dir, "summary.parquet")):
        outcome.paths["summary.parquet"] = os.path.join(out_dir, "summary.parquet")
    outcome.paths.update(write_chip_outputs(
        table, out_dir, xy_unit="m" if any(r.xy_unit == "m" for r in rows) else "",
        manifest_path=manifest, settings=settings or Settings(), command=command, svg=svg,
        reports=reports))
    outcome.seconds = time.perf_counter() - start
    return outcome


def _run(executor, chunks, by_key, bar, take, fail, write_text, result_cls, outcome) -> None:
    """Submit the chunks, write each result as it comes back, turn failures into rows."""
    from concurrent.futures import as_completed

    futures = {executor.submit(worker.analyse_chunk, chunk): chunk for chunk in chunks}
    for future in as_completed(futures):
        try:
            items = future.result()
        except Exception as exc:  # noqa: BLE001 - a lost worker fails its chunk, not the batch
            items = [{"key": job["key"], "status": "failed",
                      "error": f"worker lost ({exc.__class__.__name__}: {exc})"}
                     for job in futures[future]]
        for item in items:
            job = by_key[item["key"]]
            outcome.analysis_seconds += item.get("seconds", 0.0)
            if item["status"] == "ok":
                write_text(job["result_path"], item["json"] + "\n")
                take(job, result_cls.from_json(item["json"]))
                bar.update()
            else:
                fail(job, item["error"])
                bar.update(failed=1)
