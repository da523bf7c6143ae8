"""The review session behind the page: folder data, the edits in progress, saving, and the re-run
worker that refreshes the analysis after each save (one run at a time; the last good result stays).

A ``review.json`` that does not fit the folder (another scan, other units or scale, another
segmentation, or edits that name boundaries this segmentation lacks) is never shown or applied: the
session starts empty, the page says which scan the file belongs to, and saving is refused until the
user sets the file aside (renamed, never deleted).
"""
from __future__ import annotations

import datetime as _dt
import inspect
import os
import sys
import threading
import time
import traceback
from pathlib import Path

from ..errors import BandgeoError, ReviewError
from .basis import check_fit, describe
from .data import FolderData
from .edits import ReviewSession, utc_now
from .pagedata import page_state
from .pagestate import result_summary
from .store import REVIEW_FILE, clean_temp_files, inside, read_review, save_review


class PipelineRerun:
    """The pipeline's re-run of what a review edit changes (measurement, series, periodicity, report).

    Uses ``bandgeo.pipeline.Rerunner`` when the pipeline has it, which reads the specimen, the automatic
    segmentation and the run parameters once and keeps them in memory for every later save; otherwise
    ``bandgeo.pipeline.rerun(folder)``.
    """

    def __init__(self, report: bool = True):
        self.report = report
        self._runner = None
        self._lock = threading.Lock()

    def warm(self, folder) -> None:
        """Load the inputs ahead of the first save (called from a background thread)."""
        from .. import pipeline

        with self._lock:
            if self._runner is None and hasattr(pipeline, "Rerunner"):
                self._runner = pipeline.Rerunner(folder)
                fresh = True
            else:
                fresh = False
        if fresh and hasattr(self._runner, "warm"):
            try:  # projection, bands, unrolled mesh and one analysis, so that every save is incremental
                self._runner.warm()
            except BandgeoError:  # the save that needs it reports the problem
                pass
        import importlib

        names = ("measure", "series", "spectral", "uncertainty", "astro") + (("report",) if self.report else ())
        for name in names:
            try:  # the stages' first import costs seconds; pay it now rather than on the first save
                importlib.import_module(f"bandgeo.{name}")
            except ImportError:
                pass

    def __call__(self, folder, progress=None, partial=None):
        """Re-run; with ``partial`` given, the analysis is handed to ``partial(analysis)`` as soon as
        result.json and bands.csv are written, and the report is written after (so the page shows the
        new figures without waiting for the report)."""
        from .. import pipeline

        if hasattr(pipeline, "Rerunner"):
            self.warm(folder)
            if partial is not None and self.report and hasattr(pipeline, "write_analysis_report"):
                analysis = self._runner(report=False, progress=progress)
                partial(analysis)
                pipeline.write_analysis_report(analysis, folder, progress=progress)
                return analysis
            return self._runner(report=self.report, progress=progress)
        kwargs = {"report": self.report}
        if _takes_progress(pipeline.rerun):
            kwargs["progress"] = progress
        return pipeline.rerun(folder, **kwargs)


class ProcessRerun:
    """The same re-run as :class:`PipelineRerun`, in a worker process of its own (started when the page
    opens, kept for every save), so that the page's request threads never wait for the analysis: the
    two share no interpreter lock. The worker (``python -m bandgeo.review.worker``, a fresh interpreter
    that does not re-run the caller's script) holds the folder's inputs in memory
    (``bandgeo.pipeline.Rerunner``, warmed once), reads the saved ``review.json`` on each request, sends
    progress as it goes, the new figures as soon as result.json and bands.csv are swapped in, and then
    writes the report. A worker that dies during a save (e.g. out of memory) makes that save fail with one
    line, and the next save starts a new one; a worker found dead when a save begins is replaced at once.
    The worker exits when its pipe closes (the page's process ended).
    """

    #: The module run as the worker (``python -m worker_module FD FOLDER report|figures``).
    worker_module = "bandgeo.review.worker"

    def __init__(self, report: bool = True):
        self.report = report
        self._proc = None
        self._conn = None
        self._ready = False
        self._closed = False  # after close(), warm() starts nothing (a save still starts a worker)
        self._lock = threading.Lock()  # one request at a time through the pipe

    @property
    def pid(self):
        """The worker's process id (None when none is running)."""
        return None if self._proc is None else self._proc.pid

    def _start(self, folder) -> None:
        if self._proc is not None and self._proc.poll() is None:
            return
        import socket
        import subprocess
        from multiprocessing.connection import Connection

        self._stop(wait=0)
        ours, theirs = socket.socketpair()
        package_root = str(Path(__file__).resolve().parents[2])  # this bandgeo, importable in the worker
        env = dict(os.environ)
        env["PYTHONPATH"] = os.pathsep.join([package_root, *filter(None, [env.get("PYTHONPATH")])])
        try:
            proc = subprocess.Popen(
                [sys.executable, "-m", self.worker_module, str(theirs.fileno()), str(folder),
                 "report" if self.report else "figures"],
                pass_fds=(theirs.fileno(),), stdin=subprocess.DEVNULL, env=env)
        finally:
            theirs.close()
        self._proc, self._conn, self._ready = proc, Connection(ours.detach()), False

    def warm(self, folder) -> None:
        """Start the worker, which loads and warms the inputs at once (returns without waiting); after
        :meth:`close` it does nothing (a warm-up thread that comes late leaves no worker behind)."""
        with self._lock:
            if not self._closed:
                self._start(folder)

    def wait_ready(self, timeout: float = 120.0, progress=None) -> bool:
        """Wait until the worker has loaded and warmed the inputs; True when it has. ``progress``
        (``(description, done, total)``, e.g. a ``bandgeo.progress.bar()``) hears the warm-up's steps."""
        deadline = time.monotonic() + timeout
        with self._lock:
            while self._conn is not None and not self._ready:
                left = deadline - time.monotonic()
                if left <= 0 or not self._conn.poll(left):
                    break
                try:
                    kind, payload = self._conn.recv()
                except (EOFError, OSError):
                    break
                if kind == "progress" and progress is not None:
                    progress(*payload)
                self._ready = self._ready or kind == "ready"
            return bool(self._ready)

    def __call__(self, folder, progress=None, partial=None):
        with self._lock:
            self._closed = False
            for attempt in (0, 1):
                heard = []
                try:
                    return self._request(folder, progress, partial, heard)
                except (EOFError, OSError):
                    self._stop(wait=1.0)
                    # A worker that had died before it heard this request (e.g. killed while idle) is
                    # replaced once, quietly; one that dies during the save fails that save.
                    if heard or attempt:
                        raise BandgeoError("the re-run worker process stopped unexpectedly (out of memory?); the "
                                           "last good result is shown; save again to start a new one") from None

    def _request(self, folder, progress, partial, heard):
        from types import SimpleNamespace

        self._start(folder)
        if not self._ready and progress is not None:
            progress("loading the specimen for re-runs", 0, 1)
        self._conn.send(("run", partial is not None))
        while True:
            kind, payload = self._conn.recv()
            if kind != "ready" or self._ready:
                heard.append(kind)
            if kind == "progress":
                if progress is not None:
                    progress(*payload)
            elif kind == "partial":
                if partial is not None:
                    partial(SimpleNamespace(**payload))
            elif kind == "ready":
                self._ready = True
            elif kind == "done":
                return SimpleNamespace(**payload)
            elif kind == "error":
                message, known = payload
                raise (BandgeoError if known else RuntimeError)(message)

    def _stop(self, wait: float = 5.0) -> None:
        proc, conn = self._proc, self._conn
        self._proc = self._conn = None
        self._ready = False
        if conn is not None:
            try:
                conn.send(("stop", None))
            except (OSError, ValueError):
                pass
            conn.close()  # the worker also stops when its end of the pipe closes
        if proc is not None:
            import subprocess

            try:
                proc.wait(wait)
            except subprocess.TimeoutExpired:
                proc.terminate()
                try:
                    proc.wait(2.0)
                except subprocess.TimeoutExpired:
                    proc.kill()
                    proc.wait()

    def close(self, wait: float = 5.0) -> None:
        """Stop the worker (after the save in progress, if any, up to ``wait`` seconds)."""
        got = self._lock.acquire(timeout=wait)
        try:
            self._closed = True
            self._stop(wait=wait)
        finally:
            if got:
                self._lock.release()


_default_rerun = PipelineRerun()  # kept for callers of the old name


def _takes(fn, name) -> bool:
    try:
        params = inspect.signature(fn).parameters
    except (TypeError, ValueError):
        return False
    return name in params or any(p.kind is p.VAR_KEYWORD for p in params.values())


def _takes_progress(fn) -> bool:
    return _takes(fn, "progress")


class ReviewApp:
    """State shared by the request threads: folder data, the edit session and the re-run worker."""

    def __init__(self, folder, token, rerun=None, segmentation=None):
        self.folder = Path(folder)
        self.token = token
        self.rerun = rerun or (ProcessRerun() if os.name == "posix" else PipelineRerun())
        self.removed_temp = clean_temp_files(self.folder)
        self.data = FolderData(self.folder, segmentation=segmentation)
        base = [(b.id, b.height_mm) for b in self.data.segmentation.boundaries]
        #: A review file kept out of the session because it does not fit (dict for the page) or None.
        self.set_apart = None
        #: A line the page shows once about the review file (e.g. a review from an older version).
        self.notice = None
        review = self._read_fitting(base)
        self.session = ReviewSession(base, self.data.span, (review or {}).get("edits", []))
        self.saved_utc = (review or {}).get("updated_utc")
        self._lock = threading.Lock()
        self._save_lock = threading.Lock()
        self._worker: threading.Thread | None = None
        self._pending = False
        self.last_result = result_summary(self.data.result())
        self.status = {"state": "idle", "error": None, "started_utc": None, "finished_utc": None,
                       "runs": 0, "stage": None, "done": 0, "total": 0, "seconds": None, "result_utc": None}

    # -- the review file -------------------------------------------------------------------------
    def _read_fitting(self, base):
        """The folder's review if it fits this folder's scan, frame and segmentation; else None, with
        ``set_apart`` saying why."""
        inside(self.folder, REVIEW_FILE)  # a link out of the folder is refused outright
        try:
            review = read_review(self.folder)
        except ReviewError as exc:
            self.set_apart = {"reasons": [str(exc)], "belongs_to": "unknown (the file cannot be read)"}
            return None
        if review is None:
            return None
        reasons = check_fit(review, self.data.basis)
        if not reasons:
            try:
                ReviewSession(base, self.data.span, review.get("edits", []))
            except ReviewError as exc:
                reasons.append(f"its edits do not fit this segmentation ({exc})")
        if reasons:
            self.set_apart = {"reasons": reasons, "belongs_to": describe(review.get("basis"), review),
                              "n_edits": len(review.get("edits", [])),
                              "updated_utc": review.get("updated_utc")}
            return None
        if not isinstance(review.get("basis"), dict) and review.get("edits"):
            self.notice = ("review.json predates recorded units and segmentation ids; its scan matches and "
                           "its edits fit, so they are shown; saving records the basis")
        return review

    def set_aside(self) -> str:
        """Rename the folder's ``review.json`` to ``review.set-aside-<UTC>.json``; return the new name."""
        path = inside(self.folder, REVIEW_FILE)
        if not path.exists():
            self.set_apart = None
            raise ReviewError("there is no review.json to set aside")
        stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
        target = inside(self.folder, f"review.set-aside-{stamp}.json")
        n = 1
        while target.exists():
            target = inside(self.folder, f"review.set-aside-{stamp}-{n}.json")
            n += 1
        os.replace(path, target)
        self.set_apart = None
        self.notice = f"the review that did not fit was renamed to {target.name}"
        return target.name

    # -- state, save, re-run ---------------------------------------------------------------------
    def state(self) -> dict:
        with self._lock:
            status = dict(self.status)
            summary = self.last_result
        return page_state(self, status, summary)

    def rerun_status(self) -> dict:
        with self._lock:
            return dict(self.status)

    def save(self) -> dict:
        if self.set_apart is not None:
            raise ReviewError(f"review.json in this folder belongs to {self.set_apart['belongs_to']} and "
                              f"does not fit this one; set it aside before saving")
        # One save at a time, each writing the edits as they are when it begins: two saves from two
        # request threads could otherwise take their copies in one order and write in the other, and
        # the older copy would be the file that stays.
        with self._save_lock:
            state = self.session.state  # one consistent copy: edits, notes and marks together
            edits = [dict(e) for e in state.edits]
            review = {"specimen_id": self.data.specimen_id, "scan_sha256": self.data.scan_sha256,
                      "basis": self.data.basis,
                      "edits": edits,
                      "notes": "\n".join(n["text"] for n in state.notes),
                      "stretches": [[m["s0_mm"], m["s1_mm"], m["kind"], m["note"]]
                                    for m in sorted(state.marks.values(), key=lambda m: m["s0_mm"])]}
            written = save_review(self.folder, review)
            self.session.mark_saved(edits)
            self.saved_utc = written["updated_utc"]
            self.notice = None
            self.schedule_rerun()
        return written

    def schedule_rerun(self) -> None:
        """Start the re-run worker, or ask the running one to go again when it finishes."""
        with self._lock:
            if self._worker is not None and self._worker.is_alive():
                self._pending = True
                return
            self._worker = threading.Thread(target=self._work, name="bandgeo-review-rerun", daemon=True)
            self.status.update(state="running", started_utc=utc_now(), error=None, stage="starting",
                               done=0, total=0, seconds=None)
            self._worker.start()

    def _progress(self, description, done, total) -> None:
        with self._lock:
            self.status.update(stage=str(description)[:80], done=int(done or 0), total=int(total or 0))

    def _partial(self, analysis) -> None:
        """The new figures are written (the report follows): show them at once."""
        summary = result_summary(getattr(analysis, "result", None), getattr(analysis, "band_table", None))
        with self._lock:
            self.last_result = summary or self.last_result
            self.status.update(result_utc=utc_now(), stage="report")

    def _work(self) -> None:
        while True:
            start = time.perf_counter()
            try:
                kwargs = {}
                if _takes(self.rerun, "progress"):
                    kwargs["progress"] = self._progress
                if _takes(self.rerun, "partial"):
                    kwargs["partial"] = self._partial
                state = self.rerun(self.folder, **kwargs)
                summary = result_summary(getattr(state, "result", None), getattr(state, "band_table", None))
                with self._lock:
                    self.last_result = summary or self.last_result
                    self.status.update(state="done", error=None)
            except Exception as exc:  # keep the last good result and show the error line
                line = str(exc) if isinstance(exc, BandgeoError) else f"{type(exc).__name__}: {exc}"
                with self._lock:
                    self.status.update(state="failed", error=" ".join(line.split())[:500])
                if not isinstance(exc, BandgeoError):
                    traceback.print_exc(file=sys.stderr)
            with self._lock:
                self.status.update(finished_utc=utc_now(), runs=self.status["runs"] + 1,
                                   seconds=round(time.perf_counter() - start, 3), stage=None)
                if not self._pending:
                    self._worker = None
                    return
                self._pending = False
                self.status.update(state="running", started_utc=utc_now(), stage="starting", done=0, total=0)

    def wait(self, timeout=None) -> None:
        """Block until the re-run worker (if any) is done."""
        worker = self._worker
        if worker is not None:
            worker.join(timeout)
