"""Run the whole analysis on many specimens: local processes or a Dask cluster, resumable, fault-tolerant."""
from __future__ import annotations

import hashlib
import json
import os
from pathlib import Path
from typing import Callable, Optional, Sequence

from ..constants import DEFAULT_SEED
from ..errors import ParameterError
from ..progress import ProgressCallback, report
from . import _result
from ._worker import one_line_error, run_specimen  # noqa: F401  (public names kept here)
from .manifest import SpecimenJob, file_sha256
from .summary import BatchSummary, SpecimenOutcome

#: Parameters of ``analyze`` a batch may set through ``params`` (the rest come from each job).
ANALYZE_PARAMS = ("keep_review", "report", "n_sim", "min_period_bands", "max_period_bands")


def default_analyze() -> Callable:
    """The lead's whole-job function, ``bandgeo.pipeline.analyze``, imported only when needed."""
    from ..pipeline import analyze

    return analyze


def job_key(scan_sha256: str, sheet_sha256: Optional[str], sheet_fields: dict, params: dict,
            seed: int) -> str:
    """Hash of everything that determines a specimen's result (hex SHA-256).

    The key covers the scan's bytes, the sheet's bytes, the manifest's sheet fields, every analysis
    parameter and the seed. A specimen whose folder holds a result.json written under the same key
    is skipped on a re-run. (The analysing function and bandgeo's version are recorded beside it in
    ``batch_job.json`` but are not part of the key.)
    """
    payload = {"scan_sha256": scan_sha256, "sheet_sha256": sheet_sha256, "sheet": sheet_fields,
               "params": params, "seed": int(seed)}
    text = json.dumps(payload, sort_keys=True, default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _analyzer_name(fn: Callable) -> str:
    return f"{getattr(fn, '__module__', '?')}.{getattr(fn, '__qualname__', repr(fn))}"


def is_done(folder: Path, key: str, scan_sha256: str) -> Optional[dict]:
    """The result of a finished specimen analysed under ``key``, or None when it must be (re)run."""
    marker = _result.read_json(folder / _result.JOB_FILE)
    result = _result.read_json(folder / _result.RESULT_FILE)
    if marker is None or result is None or marker.get("job_key") != key:
        return None
    recorded = _result.input_sha256(result)
    if recorded is not None and recorded != scan_sha256:
        return None
    return result


def _make_tasks(jobs: Sequence[SpecimenJob], out_dir: Path, params: dict, seed: int, analyzer: str,
                threads: Optional[int]) -> list[dict]:
    tasks = []
    for job in jobs:
        scan_sha = file_sha256(job.scan_path)
        sheet_sha = file_sha256(job.sheet_path) if job.sheet_path is not None else None
        fields = job.sheet_fields()
        kwargs = {"units": job.units, "up": job.up, "north": job.north, "strike_dip": job.strike_dip,
                  "sheet": None if job.sheet_path is None else os.fspath(job.sheet_path),
                  "seed": int(seed), **params}
        tasks.append({"specimen_id": job.specimen_id, "scan_path": os.fspath(job.scan_path),
                      "sheet_path": kwargs["sheet"], "folder": os.fspath(out_dir / job.specimen_id),
                      "scan_sha256": scan_sha, "sheet": fields, "params": params, "seed": int(seed),
                      "analyzer": analyzer, "threads": threads, "kwargs": kwargs,
                      "job_key": job_key(scan_sha, sheet_sha, fields, params, seed)})
    return tasks


def run_batch(jobs: Sequence[SpecimenJob], out_dir, *, workers: Optional[int] = None, scheduler=None,
              params: Optional[dict] = None, seed: int = DEFAULT_SEED,
              progress: Optional[ProgressCallback] = None, analyze_fn: Optional[Callable] = None,
              threads_per_worker: Optional[int] = None) -> BatchSummary:
    """Analyse every specimen of a batch into ``out_dir/<specimen_id>/``.

    Parameters
    ----------
    jobs : sequence of SpecimenJob
        From :func:`bandgeo.batch.read_manifest`.
    out_dir : path
        Batch folder; ``batch_summary.json`` and ``batch_summary.csv`` are rewritten atomically after
        every specimen, so an interrupted batch loses nothing.
    workers : int, optional
        Specimens analysed at once. Default: one per CPU core for local processes, no limit on a
        Dask cluster.
    scheduler : None, "inline", str or dask.distributed.Client, optional
        None: local processes (``concurrent.futures.ProcessPoolExecutor``). ``"inline"``: one after
        another in this process (debugging). An address such as ``"tcp://10.0.0.5:8786"``, a
        ``LocalCluster`` or a ``Client``: the Dask distributed cluster runs the specimens.
    params : dict, optional
        Extra keyword arguments of ``analyze`` (``keep_review``, ``report``, ``n_sim``,
        ``min_period_bands``, ``max_period_bands``); part of the job key.
    seed : int
        Seed handed to every specimen's analysis (the same seed for each, as ``bandgeo analyze``).
    progress : callable, optional
        ``progress(description, done, total)`` with ``done`` = specimens finished so far.
    analyze_fn : callable, optional
        The per-specimen function, default ``bandgeo.pipeline.analyze``; must be picklable (a
        module-level function) for process or cluster runs.
    threads_per_worker : int, optional
        BLAS/OpenMP threads for each specimen's analysis (default 1: the workers give the
        parallelism, and oversubscribed BLAS threads slow everything down).

    Returns
    -------
    BatchSummary
        One outcome per job: ``done``, ``skipped`` (already analysed under the same job key),
        ``failed`` (with its one-line error) or ``pending`` (not reached before an interruption).
    """
    out_dir = Path(os.path.expanduser(os.fspath(out_dir)))
    params = dict(params or {})
    unknown = sorted(set(params) - set(ANALYZE_PARAMS))
    if unknown:
        raise ParameterError(f"unknown batch parameter(s) {', '.join(unknown)}; expected among "
                             f"{', '.join(ANALYZE_PARAMS)}")
    if workers is not None and int(workers) < 1:
        raise ParameterError(f"expected workers >= 1 but got {workers}")
    analyze_fn = analyze_fn or default_analyze()
    local = scheduler is None or scheduler == "inline"
    n_workers = int(workers) if workers else ((os.cpu_count() or 1) if local else None)
    if scheduler == "inline":
        n_workers = 1
    client, owned = None, False
    if not local:  # connect first: an unreachable scheduler is a one-line error before anything is written
        from ._dask import connect

        client, owned = connect(scheduler)
    try:
        return _run(jobs, out_dir, analyze_fn, scheduler, client, n_workers, params, seed, progress,
                    threads_per_worker)
    finally:
        if owned:
            client.close()


def _run(jobs, out_dir, analyze_fn, scheduler, client, n_workers, params, seed, progress,
         threads_per_worker) -> BatchSummary:
    out_dir.mkdir(parents=True, exist_ok=True)
    report(progress, "batch: reading inputs (SHA-256)", 0, max(len(jobs), 1))
    # One BLAS/OpenMP thread per specimen unless told otherwise: parallelism comes from the workers.
    # Measured on the 2-core machine under load (benchmarks/bench_batch.py): one local worker with 2
    # threads ran 8x slower than with 1; unlimited threads halved a Dask LocalCluster's speed.
    threads = threads_per_worker or 1
    tasks = _make_tasks(jobs, out_dir, params, seed, _analyzer_name(analyze_fn), threads)
    summary = BatchSummary(out_dir=out_dir, seed=int(seed), params=params,
                           scheduler=_describe(scheduler, n_workers), workers=n_workers,
                           threads_per_worker=threads)
    todo = []
    for task in tasks:
        outcome = SpecimenOutcome.from_task(task)
        previous = is_done(Path(task["folder"]), task["job_key"], task["scan_sha256"])
        if previous is not None:
            outcome.status, outcome.digest = "skipped", _result.digest(previous)
        else:
            todo.append(task)
        summary.outcomes.append(outcome)
    by_id = {o.specimen_id: o for o in summary.outcomes}
    total = len(tasks)

    def finished(task: dict, answer: dict) -> None:
        outcome = by_id[task["specimen_id"]]
        outcome.update(answer)
        summary.write()
        report(progress, f"batch: {summary.n_finished}/{total} specimens ({summary.n_failed} failed)",
               summary.n_finished, total)

    summary.write()
    report(progress, f"batch: {summary.n_finished}/{total} specimens", summary.n_finished, total)
    try:
        if not todo:
            pass
        elif scheduler == "inline":
            for task in todo:
                by_id[task["specimen_id"]].status = "running"
                finished(task, run_specimen(analyze_fn, task))
        elif scheduler is None:
            from ._local import run_local

            run_local(analyze_fn, todo, n_workers, finished, mark_running=lambda t: by_id[
                t["specimen_id"]].__setattr__("status", "running"))
        else:
            from ._dask import run_dask

            run_dask(analyze_fn, todo, client, n_workers, finished)
    except BaseException:
        summary.interrupted = True
        for outcome in summary.outcomes:
            if outcome.status == "running":
                outcome.status = "pending"
        summary.write()
        raise
    summary.finish()
    summary.write()
    return summary


def _describe(scheduler, n_workers) -> str:
    if scheduler is None:
        return f"local processes ({n_workers})"
    if scheduler == "inline":
        return "inline (this process)"
    if isinstance(scheduler, str):
        return f"dask {scheduler}"
    address = getattr(scheduler, "scheduler_address", None) or getattr(
        getattr(scheduler, "scheduler", None), "address", None)
    return f"dask {address}" if address else f"dask {type(scheduler).__name__}"
