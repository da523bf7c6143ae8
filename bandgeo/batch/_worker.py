"""What runs in a batch worker: one specimen's analysis, and the set-up that ties a worker's life to
the batch (it dies with it and leaves Ctrl-C to the batch process).

The runner and both engines (``_local``, ``_dask``) import this module; it imports none of them.
"""
from __future__ import annotations

import contextlib
import os
import signal
import threading
import time
import traceback
from pathlib import Path
from typing import Callable, Optional

from .. import __version__
from ..atomic import write_json
from ..errors import BandgeoError
from . import _result

#: How often a worker checks that the batch process that started it is still alive (seconds).
PARENT_CHECK_SECONDS = 1.0


def one_line_error(exc: BaseException) -> str:
    """A user-facing one-line description of an exception raised while analysing a specimen."""
    text = " ".join(str(exc).split())
    if isinstance(exc, BandgeoError):
        return text or type(exc).__name__
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


@contextlib.contextmanager
def thread_limit(threads: Optional[int]):
    """Limit BLAS/OpenMP threads in a worker so that workers x threads <= cores."""
    if not threads:
        yield
        return
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        yield
        return
    with threadpool_limits(limits=int(threads)):
        yield


def _die_with_parent_linux(sig: int) -> bool:
    """Ask the kernel to send ``sig`` to this process when its parent dies (Linux prctl)."""
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        return libc.prctl(1, int(sig), 0, 0, 0) == 0  # PR_SET_PDEATHSIG = 1
    except (OSError, AttributeError):
        return False


def _watch_parent(parent_pid: int, interval: float) -> None:
    while True:
        time.sleep(interval)
        if os.getppid() != parent_pid:  # re-parented: the batch process is gone
            os._exit(70)


def worker_init(parent_pid: int, interval: float = PARENT_CHECK_SECONDS) -> None:
    """Initialiser of a local worker process.

    - Ctrl-C in the terminal reaches the whole process group; workers ignore it and the batch process
      stops them, so that a specimen is never cut in the middle of a write by two hands at once;
    - the worker exits when the batch process dies, even by ``kill -9``: the kernel's parent-death
      signal where there is one (Linux), and a thread that checks the parent every second everywhere.
    """
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if os.getppid() != parent_pid:  # the parent died while this worker started
        os._exit(70)
    _die_with_parent_linux(signal.SIGKILL)
    threading.Thread(target=_watch_parent, args=(parent_pid, interval), name="bandgeo-parent-watch",
                     daemon=True).start()


def run_specimen(analyze_fn: Callable, task: dict) -> dict:
    """Analyse one specimen into its folder and return a small outcome dict (runs in a worker).

    Removes any stale job marker first, so that a specimen interrupted half-way is never mistaken
    for a finished one; writes the marker (job key, sheet fields) only after ``analyze_fn`` returned
    and ``result.json`` exists. Exceptions become ``status = "failed"`` with a one-line error;
    ``KeyboardInterrupt`` and ``SystemExit`` propagate.
    """
    folder = Path(task["folder"])
    folder.mkdir(parents=True, exist_ok=True)
    marker = folder / _result.JOB_FILE
    with contextlib.suppress(FileNotFoundError):
        marker.unlink()
    start = time.perf_counter()
    try:
        with thread_limit(task.get("threads")):
            answer = analyze_fn(task["scan_path"], folder, **task["kwargs"])
        result = answer.result if isinstance(getattr(answer, "result", None), dict) else \
            _result.read_json(folder / _result.RESULT_FILE)
        if not (folder / _result.RESULT_FILE).is_file() or result is None:
            raise RuntimeError("the analysis returned without writing result.json")
    except Exception as exc:  # one specimen's failure never stops the batch
        return {"status": "failed", "error": one_line_error(exc), "seconds": time.perf_counter() - start,
                "traceback": traceback.format_exc(limit=8)}
    seconds = time.perf_counter() - start
    write_json(marker, {"schema": _result.JOB_SCHEMA, "job_key": task["job_key"],
                        "scan_sha256": task["scan_sha256"], "specimen_id": task["specimen_id"],
                        "scan_path": task["scan_path"], "sheet_path": task["sheet_path"],
                        "sheet": task["sheet"], "seed": task["seed"], "params": task["params"],
                        "analyzer": task["analyzer"], "seconds": seconds, "bandgeo_version": __version__,
                        "finished_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())})
    return {"status": "done", "seconds": seconds, "digest": _result.digest(result)}
