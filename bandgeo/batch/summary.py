"""The record of a batch: one outcome per specimen, written atomically as JSON and CSV."""
from __future__ import annotations

import csv
import io
import os
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional

from .. import __version__
from ..atomic import write_json, write_text

SUMMARY_SCHEMA = "bandgeo.batch-summary/1"
SUMMARY_JSON = "batch_summary.json"
SUMMARY_CSV = "batch_summary.csv"

#: CSV columns (units in the headers) and the digest keys they come from.
_CSV = [("specimen_id", "specimen_id"), ("status", "status"), ("days_per_year", "days_per_year"),
        ("days_per_year_ci95_low", "dpy_low"), ("days_per_year_ci95_high", "dpy_high"),
        ("significant", "significant"), ("p_value", "p_value"), ("method", "method"),
        ("length_of_day_h", "length_of_day_h"), ("length_of_day_ci95_low_h", "lod_low"),
        ("length_of_day_ci95_high_h", "lod_high"), ("seconds_s", "seconds"), ("error", "error"),
        ("scan", "scan_path"), ("folder", "folder"), ("job_key", "job_key")]


@dataclass
class SpecimenOutcome:
    """What happened to one specimen: ``pending``, ``running``, ``done``, ``skipped`` or ``failed``."""

    specimen_id: str
    scan_path: str
    folder: str
    job_key: str
    status: str = "pending"
    error: Optional[str] = None
    seconds: Optional[float] = None
    digest: dict = field(default_factory=dict)
    sheet: dict = field(default_factory=dict)

    @classmethod
    def from_task(cls, task: dict) -> "SpecimenOutcome":
        return cls(specimen_id=task["specimen_id"], scan_path=task["scan_path"], folder=task["folder"],
                   job_key=task["job_key"], sheet=dict(task.get("sheet") or {}))

    def update(self, answer: dict) -> None:
        """Take a worker's answer (``status``, ``error``, ``seconds``, ``digest``)."""
        self.status = answer["status"]
        self.error = answer.get("error")
        self.seconds = answer.get("seconds")
        self.digest = dict(answer.get("digest") or {})

    def to_dict(self) -> dict:
        return {"specimen_id": self.specimen_id, "status": self.status, "error": self.error,
                "seconds": self.seconds, "scan_path": self.scan_path, "folder": self.folder,
                "job_key": self.job_key, "sheet": self.sheet, **self.digest}


@dataclass
class BatchSummary:
    """Outcomes of a batch run, in manifest order.

    Attributes
    ----------
    outcomes : list of SpecimenOutcome
    interrupted : bool
        True when the run stopped early (Ctrl-C); the ``pending`` specimens run on the next call.
    """

    out_dir: Path
    seed: int
    params: dict
    scheduler: str
    workers: Optional[int]
    threads_per_worker: Optional[int]
    outcomes: list = field(default_factory=list)
    interrupted: bool = False
    started_utc: str = field(default_factory=lambda: time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()))
    finished_utc: Optional[str] = None
    _t0: float = field(default_factory=time.perf_counter, repr=False)
    wall_seconds: Optional[float] = None

    def _count(self, *status: str) -> int:
        return sum(o.status in status for o in self.outcomes)

    @property
    def n_done(self) -> int:
        """Specimens analysed in this run."""
        return self._count("done")

    @property
    def n_skipped(self) -> int:
        """Specimens already analysed under the same job key (not re-run)."""
        return self._count("skipped")

    @property
    def n_failed(self) -> int:
        return self._count("failed")

    @property
    def n_finished(self) -> int:
        return self._count("done", "skipped", "failed")

    @property
    def failed(self) -> list:
        return [o for o in self.outcomes if o.status == "failed"]

    def finish(self) -> None:
        self.finished_utc = time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())
        self.wall_seconds = time.perf_counter() - self._t0

    def to_dict(self) -> dict:
        return {"schema": SUMMARY_SCHEMA, "bandgeo_version": __version__,
                "out_dir": os.fspath(self.out_dir), "scheduler": self.scheduler, "workers": self.workers,
                "threads_per_worker": self.threads_per_worker, "seed": self.seed, "params": self.params,
                "started_utc": self.started_utc, "finished_utc": self.finished_utc,
                "wall_seconds": self.wall_seconds, "interrupted": self.interrupted,
                "counts": {"total": len(self.outcomes), "done": self.n_done, "skipped": self.n_skipped,
                           "failed": self.n_failed,
                           "pending": len(self.outcomes) - self.n_finished},
                "specimens": [o.to_dict() for o in self.outcomes]}

    def to_csv(self) -> str:
        buf = io.StringIO()
        writer = csv.writer(buf, lineterminator="\n")
        writer.writerow([name for name, _ in _CSV])
        for outcome in self.outcomes:
            row = outcome.to_dict()
            writer.writerow(["" if row.get(key) is None else
                             (f"{row[key]:.6g}" if isinstance(row[key], float) else row[key])
                             for _, key in _CSV])
        return buf.getvalue()

    def write(self) -> None:
        """Rewrite ``batch_summary.json`` and ``batch_summary.csv`` atomically."""
        write_json(Path(self.out_dir) / SUMMARY_JSON, self.to_dict())
        write_text(Path(self.out_dir) / SUMMARY_CSV, self.to_csv())

    def table(self) -> str:
        """A plain-text table for the terminal (units in the headers)."""
        head = f"{'specimen':<16} {'status':<8} {'days/yr [95% CI]':<26} {'LOD h [95% CI]':<24} {'time s':>7}"
        lines = [head, "-" * len(head)]
        for o in self.outcomes:
            d = o.digest
            if o.status == "failed":
                dpy, lod = "-", ""
            elif o.status == "pending":
                dpy, lod = "not run", ""
            elif d.get("days_per_year") is None:
                dpy, lod = "no annual cycle", "-"
            else:
                dpy = _fmt(d["days_per_year"], d.get("dpy_low"), d.get("dpy_high"), 1)
                lod = _fmt(d.get("length_of_day_h"), d.get("lod_low"), d.get("lod_high"), 2)
            secs = "" if o.seconds is None else f"{o.seconds:7.1f}"
            lines.append(f"{o.specimen_id:<16} {o.status:<8} {dpy:<26} {lod:<24} {secs:>7}")
            if o.status == "failed":
                lines.append(f"    error: {o.error}")
        c = self.to_dict()["counts"]
        lines.append(f"{c['total']} specimens: {c['done']} analysed, {c['skipped']} already done "
                     f"(skipped), {c['failed']} failed, {c['pending']} not run"
                     + (f"; wall time {self.wall_seconds:.1f} s" if self.wall_seconds else ""))
        return "\n".join(lines)


def _fmt(value, low, high, digits: int) -> str:
    if value is None:
        return "-"
    ci = "" if low is None or high is None else f" [{low:.{digits}f}, {high:.{digits}f}]"
    return f"{value:.{digits}f}{ci}"
