"""The worker side of a batch: analyse a chunk of junctions, hand back JSON text.

Nothing heavy is imported at module level: a freshly spawned worker sets its
BLAS threads to one (:func:`init_worker`) before numpy is first imported, then
imports the pipeline once and analyses many junctions. Results travel back as
the result document's JSON text (or an error text), never as live objects, so
the same functions run on local processes and on a Dask cluster.
"""

from __future__ import annotations

import os
import time

#: Environment variables that cap the BLAS and OpenMP thread pools of numpy and scipy.
THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS",
                    "VECLIB_MAXIMUM_THREADS", "NUMEXPR_NUM_THREADS")


def one_blas_thread() -> None:
    """BLAS and OpenMP pools to one thread unless the user set them, in a process the
    command line started (numpy not yet imported): the products of one analysis are
    small and further threads only spin, about doubling the CPU time."""
    import sys

    if "numpy" in sys.modules:
        return
    for name in THREAD_VARIABLES:
        os.environ.setdefault(name, "1")


def input_sha256(path) -> str:
    """SHA-256 of an input as the reader records it in ``result.input["sha256"]``.

    A file: the hash of its bytes. A folder of I-V files: the hash of the
    concatenated bytes of its visible files in name order. This is the one
    place to change when the readers hash differently.
    """
    import hashlib

    path = os.fspath(path)
    if os.path.isdir(path):
        try:  # the folder hash of the rewritten readers, once they are in
            from ..io import folder_sha256
        except ImportError:
            pass
        else:
            return folder_sha256(path)
    digest = hashlib.sha256()
    if os.path.isdir(path):
        names = sorted(n for n in os.listdir(path)
                       if not n.startswith(".") and os.path.isfile(os.path.join(path, n)))
        files = [os.path.join(path, n) for n in names]
    else:
        files = [path]
    for name in files:
        with open(name, "rb") as handle:
            for block in iter(lambda h=handle: h.read(1 << 20), b""):
                digest.update(block)
    return digest.hexdigest()


def init_worker() -> None:
    """Initializer of a local worker process: one BLAS thread, no Ctrl-C, exit with the parent.

    The thread caps only work before numpy is imported, which is why this
    module imports nothing heavy. The watchdog ends an orphaned worker when the
    batch process is killed (SIGKILL leaves no chance to shut the pool down).
    """
    for name in THREAD_VARIABLES:
        os.environ[name] = "1"
    import multiprocessing
    import signal
    import threading

    # Ctrl-C reaches the whole process group: the batch process stops the pool itself.
    signal.signal(signal.SIGINT, signal.SIG_IGN)

    parent = multiprocessing.parent_process()
    if parent is not None:
        def watch():
            parent.join()
            os._exit(3)

        threading.Thread(target=watch, name="jjpattern-parent-watch", daemon=True).start()
    # Import the analysis once, up front, so that no junction's time includes it.
    from ..diagnose import run as _diagnose  # noqa: F401
    from ..extract import engine as _extract  # noqa: F401
    from ..fit import engine as _fit  # noqa: F401
    from ..io import maps as _maps  # noqa: F401


def _one_thread():
    """A context that holds BLAS to one thread where threadpoolctl is installed (Dask workers
    have imported numpy before any task runs, so the environment alone is too late there)."""
    import contextlib

    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        return contextlib.nullcontext()
    return threadpool_limits(limits=1)


def error_text(exc: BaseException) -> str:
    """The row's error: an input error's own sentence, else the class and message."""
    from ..errors import InputError

    if isinstance(exc, InputError):
        return str(exc)
    return f"internal error {exc.__class__.__name__}: {exc}"


def analyse_job(job: dict) -> dict:
    """Analyse one junction described by ``job`` (see :func:`jjpattern.batch.runner.plan`).

    Returns ``{"key", "status", "json" or "error", "seconds", "cpu_seconds"}`` (wall
    and CPU time of the analysis); never raises for a problem with the junction's data.
    """
    from ..pipeline import analyze_input
    from ..settings import Settings

    start, cpu = time.perf_counter(), time.process_time()
    try:
        settings = Settings.from_dict(job["settings"])
        done = analyze_input(job["path"], settings, command=job.get("command"))
        result = done.result
        result.input["manifest"] = dict(job["manifest"])
        metadata = result.input.setdefault("metadata", {})
        for key in ("junction", "chip", "cooldown"):
            if job["manifest"].get(key) and not metadata.get(key):
                metadata[key] = job["manifest"][key]
        if job.get("report_dir"):
            from ..report.bundle import write_report

            write_report(result, job["report_dir"], job.get("command") or [],
                         ivmap=done.data if result.extraction is not None else None,
                         inputs=[job["path"]])
        text = result.to_json()
    except Exception as exc:  # noqa: BLE001 - one junction's failure becomes its row
        return {"key": job["key"], "status": "failed", "error": error_text(exc),
                "seconds": time.perf_counter() - start, "cpu_seconds": time.process_time() - cpu}
    return {"key": job["key"], "status": "ok", "json": text,
            "seconds": time.perf_counter() - start, "cpu_seconds": time.process_time() - cpu}


def analyse_chunk(jobs: list) -> list:
    """:func:`analyse_job` for each job of a chunk, BLAS held to one thread."""
    with _one_thread():
        return [analyse_job(job) for job in jobs]
