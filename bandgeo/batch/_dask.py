"""Run specimens on a Dask distributed cluster (the cluster is the engine; this only submits and collects)."""
from __future__ import annotations

from collections import deque
from typing import Callable, Optional

from ..errors import InputError
from ._worker import one_line_error, run_specimen


def connect(scheduler):
    """A ``dask.distributed.Client`` for an address, a cluster object or a client; and whether we own it."""
    from dask.distributed import Client

    if isinstance(scheduler, Client):
        return scheduler, False
    address = scheduler if isinstance(scheduler, str) else getattr(scheduler, "scheduler_address", None)
    if not address:
        raise InputError(f"expected a Dask scheduler address like tcp://host:8786 but got {scheduler!r}")
    try:  # check the form first: a malformed address would leave a half-built client behind
        from distributed.comm.addressing import parse_address, parse_host_port

        scheme, location = parse_address(address)
        if scheme in ("tcp", "tls"):
            parse_host_port(location)
    except ValueError as exc:
        raise InputError(f"expected a Dask scheduler address like tcp://host:8786 but got {address!r} "
                         f"({exc})") from None
    try:
        return Client(address, timeout="20s", set_as_default=False), True
    except (OSError, TimeoutError, ValueError) as exc:
        raise InputError(f"cannot reach the Dask scheduler at {address} ({exc}); start it with "
                         "'dask scheduler' and check the address") from None


def run_dask(analyze_fn: Callable, tasks: list, scheduler, workers: Optional[int],
             finished: Callable) -> None:
    """Submit one Dask task per specimen and call ``finished(task, answer)`` as each returns.

    ``workers`` limits the number of specimens in flight (None: all at once; the cluster's workers
    decide the concurrency). A task whose Dask worker dies repeatedly ends as ``KilledWorker`` and is
    recorded as failed; the rest of the batch goes on. The folder ``out_dir`` must be on a file
    system every worker sees.
    """
    from dask.distributed import as_completed

    client, owned = connect(scheduler)
    pending = deque(tasks)
    limit = workers or len(tasks)
    futures: dict = {}

    def submit():
        task = pending.popleft()
        future = client.submit(run_specimen, analyze_fn, task, pure=False, retries=0,
                               key=f"bandgeo-specimen-{task['specimen_id']}-{task['job_key'][:12]}")
        futures[future.key] = (future, task)
        return future

    try:
        first = [submit() for _ in range(min(limit, len(pending)))]
        queue = as_completed(first, loop=client.loop)
        for future in queue:
            task = futures.pop(future.key)[1]
            try:
                answer = future.result()
            except Exception as exc:  # KilledWorker, CommClosedError, a worker-side failure
                error = one_line_error(exc)
                if type(exc).__name__ == "KilledWorker":
                    error = ("every Dask worker that tried this specimen died (a crash in native code "
                             "or out of memory); check the scan, or run it alone with 'bandgeo analyze'")
                answer = {"status": "failed", "error": error}
            finally:
                future.release()
            finished(task, answer)
            if pending:
                queue.add(submit())
    finally:
        if futures:  # interrupted: do not leave specimens running on the cluster
            client.cancel([f for f, _ in futures.values()])
        if owned:
            client.close()
