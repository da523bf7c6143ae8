"""Run specimens in local worker processes; a worker that dies takes down only its own specimen."""
from __future__ import annotations

from collections import deque
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from typing import Callable

from .runner import one_line_error, run_specimen

_DIED = ("the worker process died while analysing this specimen (a crash in native code or out of "
         "memory); check the scan, or run it alone with 'bandgeo analyze'")


def run_local(analyze_fn: Callable, tasks: list, workers: int, finished: Callable,
              mark_running: Callable = lambda task: None) -> None:
    """Run ``tasks`` in a ``ProcessPoolExecutor`` of ``workers`` processes.

    ``finished(task, answer)`` is called in this process as each specimen ends. When a worker
    process dies (segfault, out-of-memory kill), the pool is rebuilt; the specimens that were in
    flight are re-run one at a time, and the one that kills its worker when running alone is
    recorded as failed. The others are unaffected.
    """
    pending = deque(tasks)
    suspects: deque = deque()
    pool = ProcessPoolExecutor(max_workers=workers)
    inflight: dict = {}
    try:
        while pending or suspects or inflight:
            if suspects:
                if not inflight:
                    task = suspects.popleft()
                    inflight[pool.submit(run_specimen, analyze_fn, task)] = task
                    mark_running(task)
            else:
                while pending and len(inflight) < workers:
                    task = pending.popleft()
                    inflight[pool.submit(run_specimen, analyze_fn, task)] = task
                    mark_running(task)
            alone = len(inflight) == 1
            done, _ = wait(list(inflight), return_when=FIRST_COMPLETED)
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
            if crashed:
                crashed.extend(inflight.values())  # the pool is gone: every task in flight died
                inflight.clear()
                pool.shutdown(wait=True, cancel_futures=True)
                pool = ProcessPoolExecutor(max_workers=workers)
                for task in crashed:
                    if alone:
                        finished(task, {"status": "failed", "error": _DIED})
                    else:
                        suspects.append(task)
    finally:
        pool.shutdown(wait=not inflight, cancel_futures=True)
