"""The review session behind the page: folder data, the edits in progress, saving, and the re-run
worker that refreshes the analysis after each save (one run at a time; the last good result stays)."""
from __future__ import annotations

import sys
import threading
import traceback
from pathlib import Path

from ..errors import BandgeoError, ReviewError
from .data import FolderData
from .edits import ReviewSession, utc_now
from .pagestate import page_state, result_summary
from .store import read_review, save_review


def _default_rerun(folder):
    from ..pipeline import rerun

    return rerun(folder)


class ReviewApp:
    """State shared by the request threads: folder data, the edit session and the re-run worker."""

    def __init__(self, folder, token, rerun=None, segmentation=None):
        self.folder = Path(folder)
        self.token = token
        self.rerun = rerun or _default_rerun
        self.data = FolderData(self.folder, segmentation=segmentation)
        review = read_review(self.folder) or {}
        base = [(b.id, b.height_mm) for b in self.data.segmentation.boundaries]
        try:
            self.session = ReviewSession(base, self.data.span, review.get("edits", []))
        except ReviewError as exc:
            raise ReviewError(f"{self.folder / 'review.json'} does not fit the segmentation in the folder "
                              f"({exc}); move the file aside and review again") from None
        self.saved_utc = review.get("updated_utc")
        self._lock = threading.Lock()
        self._worker: threading.Thread | None = None
        self._pending = False
        self.last_result = result_summary(self.data.result())
        self.status = {"state": "idle", "error": None, "started_utc": None, "finished_utc": None,
                       "runs": 0}

    def state(self) -> dict:
        with self._lock:
            status = dict(self.status)
            summary = self.last_result
        return page_state(self, status, summary)

    def save(self) -> dict:
        edits = self.session.edits
        state = self.session.state
        review = {"specimen_id": self.data.specimen_id, "scan_sha256": self.data.scan_sha256,
                  "edits": edits,
                  "notes": "\n".join(n["text"] for n in state.notes),
                  "stretches": [[m["s0_mm"], m["s1_mm"], m["kind"], m["note"]]
                                for m in sorted(state.marks.values(), key=lambda m: m["s0_mm"])]}
        written = save_review(self.folder, review)
        self.session.mark_saved(edits)
        self.saved_utc = written["updated_utc"]
        self.schedule_rerun()
        return written

    def schedule_rerun(self) -> None:
        """Start the re-run worker, or ask the running one to go again when it finishes."""
        with self._lock:
            if self._worker is not None and self._worker.is_alive():
                self._pending = True
                return
            self._worker = threading.Thread(target=self._work, name="bandgeo-review-rerun", daemon=True)
            self.status.update(state="running", started_utc=utc_now(), error=None)
            self._worker.start()

    def _work(self) -> None:
        while True:
            try:
                state = self.rerun(self.folder)
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
                self.status.update(finished_utc=utc_now(), runs=self.status["runs"] + 1)
                if not self._pending:
                    self._worker = None
                    return
                self._pending = False
                self.status.update(state="running", started_utc=utc_now())

    def wait(self, timeout=None) -> None:
        """Block until the re-run worker (if any) is done."""
        worker = self._worker
        if worker is not None:
            worker.join(timeout)
