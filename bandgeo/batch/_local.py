"""Run specimens in local worker processes; a worker that dies takes down only its own specimen.

The workers live and die with the batch: they ignore Ctrl-C (the batch process handles it, at a safe
point, and stops them), and they exit when the batch process dies, even by ``kill -9``
(``_worker.worker_init``).
"""
from __future__ import annotations

import contextlib
import os
import signal
import threading
from collections import deque
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from typing import Callable

from ._worker import one_line_error, run_specimen, worker_init

_DIED = ("the worker process died while analysing this specimen (a crash in native code or out of "
         "memory); check the scan, or run it alone with 'bandgeo analyze'")

#: How often the batch process looks up from waiting, to notice Ctrl-C (seconds).
_POLL_SECONDS = 0.5


def _pool(workers: int) -> ProcessPoolExecutor:
    return ProcessPoolExecutor(max_workers=workers, initializer=worker_init, initargs=(os.getpid(),))


def _stop_workers(pool: ProcessPoolExecutor) -> None:
    """Kill the pool's worker processes now (an interrupted batch leaves nothing running)."""
    processes = list((getattr(pool, "_processes", None) or {}).values())
    for process in processes:
        with contextlib.suppress(Exception):
            process.kill()
    pool.shutdown(wait=False, cancel_futures=True)
    for process in processes:
        with contextlib.suppress(Exception):
            process.join(5)


@contextlib.contextmanager
def _ctrl_c_flag():
    """While running, Ctrl-C only sets a flag; the loop turns it into KeyboardInterrupt at a safe point
    (never inside the executor's own locks)."""
    flag = threading.Event()
    if threading.current_thread() is not threading.main_thread():
        yield flag
        return
    previous = signal.signal(signal.SIGINT, lambda signum, frame: flag.set())
    try:
        yield flag
    finally:
        signal.signal(signal.SIGINT, previous)


def _submit(pool, inflight, task, analyze_fn, mark_running):
    inflight[pool.submit(run_specimen, analyze_fn, task)] = task
    mark_running(task)


def run_local(analyze_fn: Callable, tasks: list, workers: int, finished: Callable,
              mark_running: Callable = lambda task: None) -> None:
    """Run ``tasks`` in a ``ProcessPoolExecutor`` of ``workers`` processes.

    ``finished(task, answer)`` is called in this process as each specimen ends. When a worker
    process dies (segfault, out-of-memory kill), the pool is rebuilt; the specimens that were in
    flight are re-run one at a time, and the one that kills its worker when running alone is
    recorded as failed. The others are unaffected. Ctrl-C stops every worker and raises
    KeyboardInterrupt; the specimens in flight are left as they were before this run.
    """
    pending, suspects = deque(tasks), deque()
    pool, inflight = _pool(workers), {}
    completed = False
    try:
        with _ctrl_c_flag() as interrupted:
            while pending or suspects or inflight:
                if suspects and not inflight:
                    _submit(pool, inflight, suspects.popleft(), analyze_fn, mark_running)
                while not suspects and pending and len(inflight) < workers:
                    _submit(pool, inflight, pending.popleft(), analyze_fn, mark_running)
                alone = len(inflight) == 1
                done, _ = wait(list(inflight), timeout=_POLL_SECONDS, return_when=FIRST_COMPLETED)
                if interrupted.is_set():
                    raise KeyboardInterrupt
                crashed = _collect(done, inflight, finished)
                if crashed:
                    crashed.extend(inflight.values())  # the pool is gone: every task in flight died
                    inflight.clear()
                    pool.shutdown(wait=True, cancel_futures=True)
                    pool = _pool(workers)
                    for task in crashed:
                        if alone:
                            finished(task, {"status": "failed", "error": _DIED})
                        else:
                            suspects.append(task)
        completed = True
    finally:
        if completed:
            pool.shutdown(wait=True)
        else:
            _stop_workers(pool)


def _collect(done, inflight: dict, finished: Callable) -> list:
    """Hand finished futures to ``finished``; return the tasks whose worker process died."""
    crashed = []
    for future in done:
        task = inflight.pop(future)
        try:
            answer = future.result()
        except BrokenProcessPool:
            crashed.append(task)
            continue
        except Exception as exc:  # e.g. a task that cannot be pickled
            answer = {"status": "failed", "error": one_line_error(exc)}
        finished(task, answer)
    return crashed
