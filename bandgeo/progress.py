"""Progress display: a bar with the time left on a terminal, silence otherwise (pipes, CI, ``--quiet``).

Stage functions accept an optional ``progress`` callable ``progress(description, done, total)``; the CLI
passes one made here by :func:`bar`, a notebook user passes nothing. The API stays free of any display
code.

The time left is estimated two ways:

* **From the reports** (any long step): the fraction ``done / total`` against the time spent so far,
  counted down between reports (:class:`LinearEstimate`).
* **From a cost model of the pipeline's stages** (``bandgeo analyze`` and every caller of
  ``bandgeo.pipeline``): the stage timer (``bandgeo.pipeline._Timer``) tells the bar when each stage
  starts and ends and how many faces the mesh has (:func:`stage_event`). Each stage's expected seconds
  come from :data:`STAGE_COST` (measured, seconds per million faces), scaled by how fast this machine
  ran the stages already finished, and refined by the stage's own reports where it makes them
  (:class:`StageEstimate`). So the estimate is meaningful even during a stage that reports nothing.
"""
from __future__ import annotations

import contextlib
import inspect
import math
import sys
import threading
import time
from typing import Callable, Iterable, Iterator, Optional

#: Signature of the callback stages call: ``progress(description, done, total)``.
ProgressCallback = Callable[[str, float, float], None]

_state = {"quiet": False}

#: The pipeline stages the bar expects, in order (``astronomy`` is timed inside ``periodicity``).
PIPELINE_STAGES = ("load", "orient", "features", "segment", "review", "measure", "series", "periodicity",
                   "report")

#: Cost model of the pipeline's stages: ``(fixed seconds, seconds per million faces)``, so that a stage
#: is expected to take ``fixed + per_mface * faces / 1e6`` seconds before the run's own speed is known.
#: Fitted (least squares on relative error) through the median CPU seconds of each stage (steadier than
#: wall seconds on a shared machine; on a quiet one they are within a few % of them) measured by
#: ``benchmarks/bench_pipeline.py --sizes 0.5,2,10 --repeat 2`` on 0.50, 1.98 and 9.95 M-face
#: photogrammetric forward-model scans (sway 7 deg) on this project's 2-core machine, 2026-12-02 11:00
#: UTC, code 1203cd7, 2 BLAS threads, load average 1-3. Only the ratios matter: the estimate rescales
#: them by the speed of the stages already run. Re-fit when a stage gets much faster or slower.
STAGE_COST: dict[str, tuple[float, float]] = {
    "load": (0.0, 0.09),          # 0.03, 0.24, 1.86 s CPU at 0.50, 1.98, 9.95 M faces
    "orient": (0.03, 0.83),       # 0.45, 1.69, 8.32 s
    "features": (0.24, 1.45),     # 1.01, 2.70, 17.43 s
    "segment": (2.46, 4.09),      # 4.71, 9.49, 47.40 s
    "review": (0.01, 0.0),        # 0.01, 0.01, 0.01 s
    "measure": (0.0, 0.05),       # 0.02, 0.09, 0.73 s
    "series": (0.62, 0.17),       # 0.63, 1.28, 2.11 s
    "periodicity": (0.41, 0.55),  # 0.74, 1.31, 6.74 s
    "report": (4.51, 0.37),       # 4.96, 4.95, 8.37 s (all four formats)
}

#: Weight (model seconds) of the prior belief that this machine runs at the model's speed; the
#: measured speed takes over once stages of more expected seconds than this have finished.
PRIOR_SECONDS = 3.0
#: A stage running past its expected time with no report of its own is given this share of the time it
#: has run so far as its remaining time (it is not "done in 0 s" while it still runs).
OVERRUN_SHARE = 0.1
#: The linear estimate waits this long (seconds) before showing a time left.
MIN_ELAPSED = 1.0


def set_quiet(quiet: bool) -> None:
    """Silence every progress display in this process (the CLI's ``--quiet``)."""
    _state["quiet"] = bool(quiet)


def enabled() -> bool:
    """True when progress should be drawn: stderr is a terminal and the user did not ask for quiet."""
    return (not _state["quiet"]) and sys.stderr.isatty()


def report(progress: Optional[ProgressCallback], description: str, done: float, total: float) -> None:
    """Call ``progress`` if given; stages use this so that ``None`` means no display."""
    if progress is not None:
        progress(description, done, total)


# ----------------------------------------------------------------------------------------------------
# Plumbing used by the pipeline's stage timer


def stage_event(progress, event: str, name: str, *, fraction: Optional[float] = None,
                faces: Optional[int] = None, seconds: Optional[float] = None) -> None:
    """Tell a progress object that understands stages (one made by :func:`bar`) that stage ``name``
    has started (``event="start"``), reported ``fraction`` of its own work (``"step"``) or ended
    (``"end"``, with its ``seconds``). Plain callables are left alone."""
    hook = getattr(progress, "stage", None)
    if callable(hook):
        hook(event, name, fraction=fraction, faces=faces, seconds=seconds)


def takes_progress(fn) -> bool:
    """True when ``fn`` has a parameter named ``progress`` (so the stage timer may pass one)."""
    try:
        return "progress" in inspect.signature(fn).parameters
    except (TypeError, ValueError):
        return False


def face_count(objects: Iterable, default: Optional[int] = None) -> Optional[int]:
    """The number of faces of the first mesh-like object in ``objects`` (a Scan, a Specimen, or an
    object holding one as ``.specimen``); ``default`` when there is none."""
    for obj in objects:
        for candidate in (obj, getattr(obj, "specimen", None)):
            faces = getattr(candidate, "faces", None)
            shape = getattr(faces, "shape", None)
            if shape is not None and len(shape) == 2 and shape[1] == 3:
                return int(shape[0])
    return default


def inner_callback(progress, name: str, index: int, total: int) -> ProgressCallback:
    """The callback handed to a stage's function: its reports become ``"name: what"`` at
    ``index + fraction`` of ``total`` stages, and a ``"step"`` event for a stage-aware display."""

    def callback(description: str, done: float, of: float) -> None:
        fraction = _fraction(done, of)
        stage_event(progress, "step", name, fraction=fraction)
        report(progress, f"{name}: {description}", index + fraction, total)

    return callback


def in_phases(progress: Optional[ProgressCallback], phases: int,
              final: Optional[str] = None) -> Optional[ProgressCallback]:
    """A callback for a step made of about ``phases`` sub-steps that each report from 0 to their own
    total (the periodicity tests: the daily test, a Monte Carlo search per series, the intervals, the
    tidal test). A new description starts the next phase; the report ``final`` (if given) is the end.
    The fraction passed on runs once from 0 to 1 and never goes back. None stays None."""
    if progress is None:
        return None
    state = {"label": None, "phase": -1, "last": 0.0}

    def callback(description: str, done: float, total: float) -> None:
        label = str(description)
        if label != state["label"]:
            state["label"] = label
            state["phase"] += 1
        if final is not None and label == final:
            whole = 1.0
        else:
            whole = min(1.0, (min(state["phase"], phases - 1) + _fraction(done, total)) / phases)
        state["last"] = max(state["last"], whole)
        progress(description, state["last"], 1.0)

    return callback


def _fraction(done, total) -> float:
    try:
        done, total = float(done), float(total)
    except (TypeError, ValueError):
        return 0.0
    if not (math.isfinite(done) and math.isfinite(total)) or total <= 0:
        return 0.0
    return min(max(done / total, 0.0), 1.0)


# ----------------------------------------------------------------------------------------------------
# Estimates of the time left (pure: a clock is passed in, so they are tested without waiting)


class LinearEstimate:
    """Time left from the reported fraction: the run is expected to take ``t / f`` seconds in all,
    where ``f`` is the fraction reported at time ``t``; counted down between reports."""

    def __init__(self, clock: Callable[[], float] = time.monotonic):
        self.clock = clock
        self.start = clock()
        self._fraction = 0.0
        self._at = self.start

    def update(self, description: str, done: float, total: float) -> None:
        self._fraction = _fraction(done, total)
        self._at = self.clock()

    def fraction(self) -> float:
        return self._fraction

    def remaining(self) -> Optional[float]:
        """Seconds left, or None while there is too little to go on."""
        now = self.clock()
        spent = self._at - self.start
        if self._fraction <= 0.0 or now - self.start < MIN_ELAPSED or spent <= 0:
            return None
        return max(spent / self._fraction - (now - self.start), 0.0)


class StageEstimate:
    """Time left of a run of pipeline stages from the cost model, the speed measured so far and the
    running stage's own reports.

    Parameters
    ----------
    stages : sequence of str
        The stages expected to run, in order (stages seen that are not listed are added as they come).
    costs : dict
        ``{stage: (fixed_s, per_million_faces_s)}``; :data:`STAGE_COST` by default.
    faces : int, optional
        The mesh's face count, if known before the first stage reports it.
    clock : callable
        Seconds (monotonic); tests pass a fake one.
    """

    def __init__(self, stages: Iterable[str] = PIPELINE_STAGES, costs: Optional[dict] = None,
                 faces: Optional[int] = None, clock: Callable[[], float] = time.monotonic):
        self.plan = list(stages)
        self.costs = dict(STAGE_COST if costs is None else costs)
        self.faces = faces
        self.clock = clock
        self.start = clock()
        self.finished: dict[str, float] = {}
        self.current: Optional[str] = None
        self.current_start = self.start
        self.inner: Optional[float] = None
        self._shown = 0.0
        self._lock = threading.RLock()  # the display reads from its own thread

    # -- events ------------------------------------------------------------------------------------
    def stage(self, event: str, name: str, *, fraction=None, faces=None, seconds=None) -> None:
        with self._lock:
            self._stage(event, name, fraction, faces, seconds)

    def _stage(self, event, name, fraction, faces, seconds) -> None:
        if faces:
            self.faces = int(faces)
        if name not in self.plan:
            self.plan.append(name)
        if event == "start":
            self.current, self.current_start, self.inner = name, self.clock(), None
        elif event == "step" and name == self.current and fraction is not None:
            self.inner = min(max(float(fraction), 0.0), 1.0)
        elif event == "end":
            spent = seconds if seconds is not None else (
                self.clock() - self.current_start if name == self.current else 0.0)
            self.finished[name] = self.finished.get(name, 0.0) + float(spent)
            if name == self.current:
                self.current, self.inner = None, None

    # -- model -------------------------------------------------------------------------------------
    def expected(self, name: str) -> Optional[float]:
        """Model seconds of stage ``name`` at this mesh size (None while the size is unknown)."""
        if self.faces is None:
            return None
        fixed, per = self.costs.get(name, (0.0, 0.0))
        return fixed + per * self.faces / 1e6

    def speed(self) -> float:
        """Measured seconds per model second so far (1 before anything is known), pulled towards 1 by
        :data:`PRIOR_SECONDS` of model time; a running stage past its expected time counts as well."""
        with self._lock:
            return self._speed()

    def _speed(self) -> float:
        if self.faces is None:
            return 1.0
        actual = sum(self.finished.values())
        model = sum(self.expected(name) for name in self.finished)
        if self.current is not None:
            spent, e = self.clock() - self.current_start, self.expected(self.current)
            if spent > e:
                actual, model = actual + spent, model + e
        return (actual + PRIOR_SECONDS) / (model + PRIOR_SECONDS)

    def remaining(self) -> Optional[float]:
        """Seconds left for the stages planned, or None while the mesh size is unknown."""
        with self._lock:
            return self._remaining()

    def _remaining(self) -> Optional[float]:
        if self.faces is None:
            return None
        k = self._speed()
        left = 0.0
        if self.current is not None:
            spent = self.clock() - self.current_start
            e = self.expected(self.current) * k
            model_left = max(e - spent, OVERRUN_SHARE * spent)
            f = self.inner
            if f is not None and f > 0.0:
                extrapolated = spent * (1.0 - f) / f
                left += (1.0 - f) * model_left + f * extrapolated
            else:
                left += model_left
        for name in self.plan:
            if name != self.current and name not in self.finished:
                left += self.expected(name) * k
        return left

    def fraction(self) -> float:
        """Share of the run done, for the bar (never goes backwards)."""
        with self._lock:
            left = self._remaining()
            spent = self.clock() - self.start
            if left is None:
                done = len(self.finished) / max(len(self.plan), 1)
            else:
                done = spent / (spent + left) if spent + left > 0 else 0.0
            self._shown = max(self._shown, min(done, 1.0))
            return self._shown


# ----------------------------------------------------------------------------------------------------
# The bar


def format_seconds(seconds: Optional[float]) -> str:
    """``"~1 min 05 s left"``, ``"~12 s left"``, ``"< 1 s left"``, or ``"estimating time left"``."""
    if seconds is None:
        return "estimating time left"
    if seconds < 1.0:
        return "< 1 s left"
    s = int(round(seconds))
    if s < 60:
        return f"~{s} s left"
    if s < 3600:
        return f"~{s // 60} min {s % 60:02d} s left"
    return f"~{s // 3600} h {(s % 3600) // 60:02d} min left"


class BarCallback:
    """The callback :func:`bar` yields: ``(description, done, total)`` as every stage calls it, plus
    :meth:`stage` for the pipeline's stage timer. It keeps its estimate; a display reads it."""

    def __init__(self, title: str, stages: Optional[Iterable[str]] = None,
                 clock: Callable[[], float] = time.monotonic, on_change: Optional[Callable] = None):
        self.title = title
        self.clock = clock
        self.started = clock()
        self.description = ""
        self._plan = list(stages) if stages is not None else None
        self.estimate = StageEstimate(self._plan, clock=clock) if self._plan is not None else LinearEstimate(clock)
        self._on_change = on_change

    @property
    def by_stage(self) -> bool:
        return isinstance(self.estimate, StageEstimate)

    def __call__(self, description: str, done: float, total: float) -> None:
        self.description = str(description)
        if not self.by_stage:
            self.estimate.update(description, done, total)
        self._changed()

    def stage(self, event: str, name: str, **info) -> None:
        if not self.by_stage:  # the first stage event switches a plain bar to the cost model
            # planned: the stages from this one on, the report only if it is this one (callers that
            # reload an analysis write the report under a bar of its own; a report that follows in
            # this bar is added when it starts)
            plan = list(PIPELINE_STAGES)
            plan = [s for s in plan[plan.index(name):] if s != "report" or s == name] if name in plan else [name]
            self.estimate = StageEstimate(plan, clock=self.clock)
            self.estimate.start = self.started
        self.estimate.stage(event, name, **info)
        self._changed()

    def text(self) -> str:
        """What the bar's label says: the title, the stage (k of n) and what it is doing."""
        if self.by_stage and self.estimate.current is not None:
            est = self.estimate
            k = est.plan.index(est.current) + 1
            inner = self.description.split(": ", 1)[1] if ": " in self.description else ""
            inner = inner[len(est.current) + 2:] if inner.startswith(f"{est.current}: ") else inner
            return f"{est.current} ({k}/{len(est.plan)})" + (f": {inner}" if inner else "")
        return f"{self.title}: {self.description}" if self.description else self.title

    def fraction(self) -> float:
        return self.estimate.fraction()

    def remaining(self) -> Optional[float]:
        return self.estimate.remaining()

    def _changed(self) -> None:
        if self._on_change is not None:
            self._on_change(self)


def _columns(bar_width: int = 30):
    from rich.progress import ProgressColumn, TimeElapsedColumn
    from rich.progress_bar import ProgressBar
    from rich.text import Text

    class EstimateBar(ProgressColumn):
        def render(self, task):
            cb = task.fields.get("callback")
            return ProgressBar(total=1.0, completed=cb.fraction() if cb else 0.0, width=bar_width)

    class Percent(ProgressColumn):
        def render(self, task):
            cb = task.fields.get("callback")
            return Text(f"{100 * (cb.fraction() if cb else 0.0):3.0f}%", style="progress.percentage")

    class Left(ProgressColumn):
        def render(self, task):
            cb = task.fields.get("callback")
            return Text(format_seconds(cb.remaining() if cb else None), style="progress.remaining")

    return EstimateBar(), Percent(), TimeElapsedColumn(), Left()


@contextlib.contextmanager
def bar(description: str = "working", *, stages: Optional[Iterable[str]] = None,
        console=None) -> Iterator[Optional[BarCallback]]:
    """Context manager yielding a progress callback drawn with rich on stderr, or ``None`` when
    disabled (stderr not a terminal, or quiet).

    ``stages``: the pipeline stages this run will go through (e.g. ``PIPELINE_STAGES`` without
    ``"report"``); the time left then comes from the stage cost model. Without it, the bar extrapolates
    the reported fraction, and switches to the cost model if the pipeline's stage timer reports stages.
    ``console``: a ``rich.console.Console`` to draw on (tests); stderr by default.
    """
    if console is None and not enabled():
        yield None
        return
    from rich.console import Console
    from rich.progress import Progress, TextColumn
    from rich.table import Column

    console = console or Console(stderr=True)
    bar_width = 30 if console.width >= 110 else 16
    label = TextColumn("{task.description}", table_column=Column(
        width=max(20, min(60, console.width - bar_width - 36)), no_wrap=True, overflow="ellipsis"))
    with Progress(label, *_columns(bar_width), transient=True, console=console, redirect_stdout=False,
                  redirect_stderr=False) as prog:
        task = prog.add_task(f"{description}: starting", total=1.0)

        def redraw(cb: BarCallback) -> None:
            prog.update(task, description=cb.text())

        callback = BarCallback(description, stages=stages, on_change=redraw)
        prog.update(task, callback=callback)
        yield callback
