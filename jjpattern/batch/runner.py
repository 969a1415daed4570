"""Run a manifest of junctions: in parallel, resumable, one bad file never stops the batch.

Each junction's result document is written to ``results/`` (atomically) as it
comes back; a junction whose saved document has the same input SHA-256 and
settings hash is not analysed again, so an interrupted batch continues where
it stopped. At the end the summary table and the chip outputs are written from
the documents alone.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import re
import sys
import time
from dataclasses import dataclass, field

from ..errors import InputError
from ..fmt import plural
from . import worker

RESULTS, REPORTS, CHIPS = "results", "reports", "chips"
#: Largest number of junctions sent to a worker at once.
MAX_CHUNK = 8
_TEMP = re.compile(r"\.tmp\d+")


@dataclass
class BatchOutcome:
    """What a batch did: counts, the wall time and the files written.

    ``analysis_seconds`` and ``analysis_cpu_seconds`` add up the wall and CPU time
    of the analyses inside the workers (this run's, not the skipped ones).
    """

    out_dir: str
    total: int = 0
    analysed: int = 0
    skipped: int = 0
    failed: int = 0
    flagged: int = 0
    seconds: float = 0.0
    analysis_seconds: float = 0.0
    analysis_cpu_seconds: float = 0.0
    paths: dict = field(default_factory=dict)
    errors: dict = field(default_factory=dict)

    def last_line(self) -> str:
        return (f"{plural(self.total, 'junction')}: {self.analysed} analysed "
                f"({self.skipped} already done), {self.flagged} flagged, {self.failed} failed; "
                f"wall time {self.seconds:.1f} s")


def result_stem(chip, junction, cooldown) -> str:
    """File stem of a junction's result: its chip, id and cooldown, and a short hash of them
    (two ids that differ only in characters a file name cannot hold stay apart)."""
    parts = [str(p) for p in (chip, junction, cooldown) if p]
    safe = "_".join(re.sub(r"[^A-Za-z0-9.-]+", "-", p).strip("-.") or "x" for p in parts)
    key = "\0".join(str(p or "") for p in (chip, junction, cooldown))
    return f"{safe[:80]}_{hashlib.sha256(key.encode('utf-8')).hexdigest()[:8]}"


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


def _clean_temp(out_dir: str) -> None:
    """Remove what a killed run left behind: temporary files and half-built report folders
    (never anything under a final name)."""
    from ..outdir import clean_partial

    folders = [out_dir, os.path.join(out_dir, RESULTS), os.path.join(out_dir, REPORTS)]
    chips = os.path.join(out_dir, CHIPS)
    if os.path.isdir(chips):
        folders += [os.path.join(chips, n) for n in os.listdir(chips)]
    for folder in folders:
        clean_partial(folder)
        if os.path.basename(folder) == RESULTS:  # names of versions before jjpattern.outdir
            for name in os.listdir(folder):
                if _TEMP.search(name):
                    with contextlib.suppress(OSError):
                        os.remove(os.path.join(folder, name))


#: Lock file of a batch inside its output folder: one batch writes a folder at a time.
LOCK = ".jjpattern-batch.lock"


def _check_inputs(rows, manifest: str, out_dir: str) -> None:
    """Refuse a batch whose outputs would overwrite its manifest or one of its inputs."""
    from ..outdir import OutputError

    written = [os.path.join(out_dir, d) for d in (RESULTS, REPORTS, CHIPS)]
    files = [os.path.join(out_dir, n) for n in ("summary.csv", "summary.parquet",
                                                "chip_report.html", LOCK)]
    for path in [manifest, *(r.file_path for r in rows)]:
        real = os.path.realpath(path)
        if any(os.path.commonpath([real, os.path.realpath(d)]) == os.path.realpath(d)
               for d in written) or any(real == os.path.realpath(f) for f in files):
            raise OutputError(f"{out_dir}: the batch would overwrite its input {path}; "
                              "choose another --out")


class Progress:
    """A one-line progress bar on a terminal; silent elsewhere."""

    def __init__(self, total: int, stream=None, enabled: bool | None = None):
        self.total, self.done, self.failed = total, 0, 0
        self.stream = stream or sys.stderr
        tty = getattr(self.stream, "isatty", lambda: False)()
        self.enabled = tty if enabled is None else enabled and tty
        self.start = time.perf_counter()
        self.first = None  # (time, count) when the first junction came back

    def update(self, done: int = 1, failed: int = 0) -> None:
        self.done += done
        self.failed += failed
        if not self.enabled or not self.total:
            return
        now = time.perf_counter()
        # The rate since the first junction came back: the workers' start-up is paid once.
        self.first = self.first or (now, self.done)
        rate = (now - self.first[0]) / (self.done - self.first[1]) if self.done > self.first[1] \
            else now - self.start
        width = 28
        filled = int(width * self.done / self.total)
        elapsed = now - self.start
        left = rate * (self.total - self.done)
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
    try:
        executor.shutdown(wait=False, cancel_futures=True)
    except TypeError:  # a Dask executor takes no cancel_futures
        executor.shutdown(wait=False)
    for process in list((getattr(executor, "_processes", None) or {}).values()):
        process.terminate()


def plan(rows, base, out_dir: str, manifest_dir: str, reports: bool, command) -> list[dict]:
    """One job per manifest row: its settings, input hash, result file and table cells."""
    from .table import manifest_cells

    xy_unit = "m" if any(r.xy_unit == "m" for r in rows) else ""
    jobs = []
    for order, row in enumerate(rows):
        stem = result_stem(row.chip, row.junction, row.cooldown)
        settings = row.settings(base)
        relative = os.path.relpath(row.file_path, manifest_dir).replace(os.sep, "/")
        job = {"key": stem, "order": order, "path": row.file_path, "settings": settings.to_dict(),
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
    from ..outdir import file_lock, output_error
    from .manifest import read_manifest

    start = time.perf_counter()
    manifest = os.path.abspath(os.fspath(manifest))
    out_dir = os.path.abspath(os.fspath(out_dir))
    rows = read_manifest(manifest)
    workers = max(1, int(workers or os.cpu_count() or 1))
    _check_inputs(rows, manifest, out_dir)
    try:
        os.makedirs(os.path.join(out_dir, RESULTS), exist_ok=True)
    except OSError as exc:
        raise output_error(exc, out_dir) from None
    busy = (f"{out_dir}: another batch is writing there; wait for it to finish or choose "
            "another --out")
    with file_lock(os.path.join(out_dir, LOCK), busy, timeout_s=0):
        return _run_locked(rows, manifest, out_dir, start, settings, workers, scheduler,
                           reports, svg, chunk_size, progress, command)


def _run_locked(rows, manifest, out_dir, start, settings, workers, scheduler, reports, svg,
                chunk_size, progress, command) -> BatchOutcome:
    from ..outdir import is_complete, write_text
    from ..result import Result
    from ..settings import Settings
    from .chipreport import write_chip_outputs
    from .table import failed_row, result_rows, summary_csv, write_parquet

    _clean_temp(out_dir)
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
        # Paths relative to the manifest, as in the file column, so the table can move.
        error = error.replace(job["path"], job["manifest"]["file"])
        table.append(failed_row(job["cells"], error, job["input_sha256"],
                                job["settings_sha256"]))
        outcome.failed += 1
        outcome.errors[job["key"]] = error

    todo = []
    for job in jobs:
        saved = None if "error" in job else _saved(job["result_path"], job["input_sha256"],
                                                   job["settings_sha256"])
        report_there = not reports or is_complete(job["report_dir"])
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

        def on_item(item) -> None:
            job = by_key[item["key"]]
            outcome.analysis_seconds += item.get("seconds", 0.0)
            outcome.analysis_cpu_seconds += item.get("cpu_seconds", 0.0)
            if item["status"] == "ok":
                write_text(job["result_path"], item["json"] + "\n")
                take(job, Result.from_json(item["json"]))
                bar.update()
            else:
                fail(job, item["error"])
                bar.update(failed=1)

        try:
            _run(executor, _chunks(todo, workers, chunk_size), on_item,
                 None if scheduler else lambda: _executor(1, None))
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


def _run(executor, chunks, on_item, new_executor=None) -> None:
    """Submit the chunks and hand each item to ``on_item`` as it comes back.

    A chunk whose task raised becomes failed items. When a local worker process
    dies (a crash in a compiled library, the out-of-memory killer), every chunk
    still in the pool is lost with it; those junctions are run again one at a
    time in a fresh pool (``new_executor``), so the one that kills its worker
    is found and only it fails.
    """
    from concurrent.futures import BrokenExecutor, as_completed

    futures = {executor.submit(worker.analyse_chunk, chunk): chunk for chunk in chunks}
    lost = []
    for future in as_completed(futures):
        try:
            items = future.result()
        except BrokenExecutor:
            lost += futures[future]
            continue
        except Exception as exc:  # noqa: BLE001 - a lost task fails its chunk, not the batch
            items = [_lost(job, exc) for job in futures[future]]
        for item in items:
            on_item(item)
    if lost and new_executor is None:
        for job in lost:
            on_item(_lost(job, None))
    elif lost:
        _one_by_one(lost, on_item, new_executor)


def _lost(job, exc) -> dict:
    why = "" if exc is None else f" ({exc.__class__.__name__}: {exc})"
    return {"key": job["key"], "status": "failed",
            "error": f"the worker analysing this junction was lost{why}"}


def _one_by_one(jobs, on_item, new_executor) -> None:
    from concurrent.futures import BrokenExecutor

    executor, close = new_executor()
    try:
        for job in sorted(jobs, key=lambda j: j["order"]):
            try:
                items = executor.submit(worker.analyse_chunk, [job]).result()
            except BrokenExecutor:
                items = [{"key": job["key"], "status": "failed",
                          "error": "internal error: the worker process died while analysing "
                                   "this junction (a crash or the out-of-memory killer)"}]
                close()
                executor, close = new_executor()
            for item in items:
                on_item(item)
    finally:
        close()
