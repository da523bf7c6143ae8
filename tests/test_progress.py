"""Progress bars: the time-left estimates (fake clock, no timing), the stage timer's plumbing, silence
off a terminal.

The expected figures are worked by hand from the estimates' definitions in ``bandgeo.progress``
(cost model ``fixed + per_mface * M``, speed ``(actual + prior) / (model + prior)``, linear
extrapolation ``t / f``); they check the arithmetic and the event plumbing, not any machine's speed.
"""
import io
import sys
import types

import numpy as np
import pytest

from bandgeo import progress
from bandgeo.pipeline import STAGES, _Timer


class Clock:
    def __init__(self, t=0.0):
        self.t = t

    def __call__(self):
        return self.t


COSTS = {"a": (0.0, 1.0), "b": (0.0, 2.0), "c": (1.0, 0.0)}  # seconds = fixed + per_mface * M


def test_stage_estimate_needs_the_mesh_size_then_uses_the_cost_model():
    clock = Clock()
    est = progress.StageEstimate(["a", "b", "c"], costs=COSTS, clock=clock)
    est.stage("start", "a")
    assert est.remaining() is None  # faces unknown: no guess
    clock.t = 2.0
    est.stage("end", "a", faces=1_000_000, seconds=2.0)
    # a took 2 s against 1 model second: speed (2 + 3) / (1 + 3) = 1.25 (prior 3 model seconds)
    assert progress.PRIOR_SECONDS == 3.0
    assert est.speed() == pytest.approx(1.25)
    # b (2 s) and c (1 s) at that speed
    assert est.remaining() == pytest.approx(3.75)


def test_stage_estimate_refines_the_running_stage_with_its_own_reports():
    clock = Clock()
    est = progress.StageEstimate(["a", "b", "c"], costs=COSTS, faces=1_000_000, clock=clock)
    est.stage("start", "a")
    clock.t = 2.0
    est.stage("end", "a", seconds=2.0)
    est.stage("start", "b")
    clock.t = 3.0
    # b has run 1 s of an expected 2 * 1.25 = 2.5 s and says nothing: 1.5 s left, then c's 1.25 s
    assert est.remaining() == pytest.approx(2.75)
    est.stage("step", "b", fraction=0.5)
    # half done after 1 s: extrapolation 1 s left; blended with the model's 1.5 s by the fraction 0.5
    assert est.remaining() == pytest.approx(0.5 * 1.5 + 0.5 * 1.0 + 1.25)


def test_a_stage_past_its_expected_time_slows_the_whole_estimate_and_never_reads_zero():
    clock = Clock()
    est = progress.StageEstimate(["a", "b", "c"], costs=COSTS, faces=1_000_000, clock=clock)
    est.stage("start", "a")
    clock.t = 2.0
    est.stage("end", "a", seconds=2.0)
    est.stage("start", "b")
    clock.t = 12.0
    # b has run 10 s against 2 model seconds: speed (2 + 10 + 3) / (1 + 2 + 3) = 2.5
    assert est.speed() == pytest.approx(2.5)
    # b: max(2 * 2.5 - 10, 0.1 * 10) = 1 s; c: 1 * 2.5 s
    assert progress.OVERRUN_SHARE == 0.1
    assert est.remaining() == pytest.approx(3.5)
    assert est.remaining() > 0


def test_stage_estimate_fraction_never_goes_back_and_reaches_one():
    clock = Clock()
    est = progress.StageEstimate(["a", "b"], costs=COSTS, faces=2_000_000, clock=clock)
    seen = []
    for name, spent in (("a", 1.0), ("b", 30.0)):
        est.stage("start", name)
        for _ in range(5):
            clock.t += spent / 5
            seen.append(est.fraction())
        est.stage("end", name, seconds=spent)
    seen.append(est.fraction())
    assert all(b >= a for a, b in zip(seen, seen[1:]))
    assert seen[-1] == pytest.approx(1.0)
    assert est.remaining() == pytest.approx(0.0)


def test_unplanned_stages_are_added_and_the_default_model_covers_every_pipeline_stage():
    est = progress.StageEstimate(["a"], costs=COSTS, faces=1_000_000, clock=Clock())
    est.stage("start", "zzz")
    assert est.plan == ["a", "zzz"]
    assert est.expected("zzz") == 0.0  # no cost known: no time assumed
    # every stage the pipeline times (astronomy runs inside periodicity) has a cost
    assert set(progress.PIPELINE_STAGES) == set(STAGES) - {"astronomy"}
    assert set(progress.STAGE_COST) == set(progress.PIPELINE_STAGES)
    assert all(fixed >= 0 and per >= 0 for fixed, per in progress.STAGE_COST.values())


def test_linear_estimate_extrapolates_and_counts_down_between_reports():
    clock = Clock()
    est = progress.LinearEstimate(clock)
    clock.t = 0.5
    est.update("x", 1, 10)
    assert est.remaining() is None  # under a second in: no figure yet
    clock.t = 2.0
    est.update("x", 1, 4)  # a quarter in 2 s: 8 s in all
    assert est.remaining() == pytest.approx(6.0)
    clock.t = 4.0  # no report since: count down
    assert est.remaining() == pytest.approx(4.0)
    clock.t = 20.0
    assert est.remaining() == 0.0
    est.update("x", 0, 0)  # a nonsense total is ignored, not a crash
    assert est.fraction() == 0.0


def test_format_seconds():
    assert progress.format_seconds(None) == "estimating time left"
    assert progress.format_seconds(0.4) == "< 1 s left"
    assert progress.format_seconds(12.4) == "~12 s left"
    assert progress.format_seconds(65) == "~1 min 05 s left"
    assert progress.format_seconds(3 * 3600 + 120) == "~3 h 02 min left"


# ----------------------------------------------------------------------------------------------------
# the stage timer's plumbing


class Recorder:
    def __init__(self):
        self.calls, self.events = [], []

    def __call__(self, description, done, total):
        self.calls.append((description, done, total))

    def stage(self, event, name, **info):
        self.events.append((event, name, info))


def test_timer_forwards_a_stage_s_own_reports_and_tells_the_display_the_mesh_size():
    rec = Recorder()
    timer = _Timer(rec)
    specimen = types.SimpleNamespace(faces=np.zeros((7, 3), dtype=np.int64))

    def features(spec, progress=None):
        progress("one ring", 1, 4)
        progress("scales", 2, 4)
        return "feats"

    assert timer.run("features", features, specimen) == "feats"
    index, total = STAGES.index("features"), len(STAGES)
    assert rec.calls == [("features", index, total), ("features: one ring", index + 0.25, total),
                         ("features: scales", index + 0.5, total), ("features done", index + 1, total)]
    kinds = [(e, n, i.get("fraction")) for e, n, i in rec.events]
    assert kinds == [("start", "features", None), ("step", "features", 0.25), ("step", "features", 0.5),
                     ("end", "features", None)]
    assert rec.events[0][2]["faces"] == 7
    assert rec.events[-1][2]["seconds"] >= 0.0
    assert "features" in timer.seconds


def test_timer_learns_the_size_from_a_stage_s_result_and_leaves_other_functions_alone():
    rec = Recorder()
    timer = _Timer(rec)
    scan = types.SimpleNamespace(faces=np.zeros((11, 3)))
    timer.run("load", lambda path: scan, "file.ply")
    assert rec.events[0][2]["faces"] is None and rec.events[-1][2]["faces"] == 11

    given = []
    timer.run("orient", lambda s, progress=None: given.append(progress), scan, progress="mine")
    assert given == ["mine"]  # a progress argument given by the caller is kept
    timer.run("measure", lambda s: None, scan)  # no progress parameter: called as before
    analysis = types.SimpleNamespace(specimen=types.SimpleNamespace(faces=np.zeros((5, 3))))
    assert progress.face_count([analysis]) == 5


def test_timer_without_progress_or_with_a_plain_callback():
    calls = []
    timer = _Timer(None)
    assert timer.run("segment", lambda progress=None: progress, ) is None  # nothing injected
    timer = _Timer(lambda d, done, total: calls.append((d, done, total)))  # a plain function: no events
    timer.run("segment", lambda progress=None: progress("clustering", 1, 2))
    i = STAGES.index("segment")
    assert calls[1] == ("segment: clustering", i + 0.5, len(STAGES))


# ----------------------------------------------------------------------------------------------------
# the bar


class FakeStderr(io.StringIO):
    def __init__(self, tty):
        super().__init__()
        self.tty = tty

    def isatty(self):
        return self.tty


def test_bar_is_silent_off_a_terminal_and_when_quiet(monkeypatch):
    monkeypatch.setattr(sys, "stderr", FakeStderr(tty=False))
    with progress.bar("x") as cb:
        assert cb is None
    assert sys.stderr.getvalue() == ""
    monkeypatch.setattr(sys, "stderr", FakeStderr(tty=True))
    assert progress.enabled()
    progress.set_quiet(True)
    try:
        with progress.bar("x", stages=progress.PIPELINE_STAGES) as cb:
            assert cb is None
    finally:
        progress.set_quiet(False)
    assert sys.stderr.getvalue() == ""


def test_bar_on_a_terminal_shows_the_stage_and_the_time_left():
    from rich.console import Console

    out = io.StringIO()
    console = Console(file=out, force_terminal=True, width=120)
    with progress.bar("analysing", stages=["load", "orient"], console=console) as cb:
        assert cb is not None and cb.by_stage
        timer = _Timer(cb)
        timer.run("load", lambda p: types.SimpleNamespace(faces=np.zeros((1000, 3))), "f.ply")
        timer.run("orient", lambda s, progress=None: progress("cleaning", 1, 2), object())
        assert cb.estimate.faces == 1000
        assert cb.remaining() == pytest.approx(0.0, abs=1e-9)
        console.print(cb.text())
    assert "analysing" in out.getvalue()


def test_a_plain_bar_switches_to_the_cost_model_when_the_pipeline_reports_stages():
    clock = Clock()
    cb = progress.BarCallback("loading", clock=clock)
    cb("reading", 1, 2)
    assert not cb.by_stage
    cb.stage("start", "review", faces=2_000_000)
    assert cb.by_stage and cb.estimate.plan == ["review", "measure", "series", "periodicity"]
    cb("review", 4, 10)
    assert cb.text() == f"review (1/{len(cb.estimate.plan)})"
    cb("review: checking", 4.5, 10)
    assert cb.text().endswith(": checking")
    cb("review: review: replay", 4.6, 10)  # a stage that names itself is not named twice
    assert cb.text() == f"review (1/{len(cb.estimate.plan)}): replay"
    assert cb.remaining() > 0
    cb.stage("start", "report")  # not planned: added when it comes
    assert cb.estimate.plan[-1] == "report"


def test_periodicity_stage_reports_its_tests_to_the_stage_timer():
    """The periodicity stage passes the tests' own reports (daily test, Monte Carlo searches, intervals,
    tidal test) to the pipeline's progress callback, as one fraction that never goes back, and the
    numbers are those of a run without a callback."""
    from types import SimpleNamespace

    from bandgeo import pipeline
    from bandgeo.series import series_from_thickness

    rng = np.random.default_rng(4)
    n = 600
    h = 0.05 * (1 + 0.3 * np.sin(2 * np.pi * np.arange(n) / 40.0) + 0.1 * rng.standard_normal(n))
    series = series_from_thickness(h, source="test")
    seg = SimpleNamespace(boundaries=[SimpleNamespace(confidence=0.9, origin="auto") for _ in range(n + 1)],
                          resolution={}, warnings=[])
    table = SimpleNamespace(flags=[""] * n)
    params = SimpleNamespace(min_period_bands=None, max_period_bands=None, n_sim=99, seed=3)
    heard = []
    timer = _Timer(lambda d, done, total: heard.append((str(d), float(done), float(total))), stages=STAGES)
    per, blocks, _ = timer.run("periodicity", pipeline._periodicity, series, params, seg, table)
    index = STAGES.index("periodicity")
    inner = [(d, done) for d, done, _ in heard if d.startswith("periodicity: ")]
    assert len(inner) >= 3
    fractions = [done - index for _, done in inner]
    assert all(0.0 <= f <= 1.0 for f in fractions) and fractions == sorted(fractions)
    assert fractions[-1] == pytest.approx(1.0)
    _, quiet, _ = pipeline._periodicity(series, params, seg, table)
    assert quiet["days_per_year"] == blocks["days_per_year"]


def test_in_phases_runs_once_from_zero_to_one():
    heard = []
    cb = progress.in_phases(lambda d, done, total: heard.append(done / total), 3)
    for label in ("a", "b", "c"):
        for k in range(5):
            cb(f"{label}: step", k, 4)
    cb("d", 1, 1)                      # more phases than planned: stays at 1
    assert heard == sorted(heard) and heard[0] == 0.0 and heard[-1] == 1.0
    heard.clear()
    cb = progress.in_phases(lambda d, done, total: heard.append(done / total), 5, final="end")
    cb("a", 0, 1), cb("a", 1, 1), cb("end", 1, 1)
    assert heard == [0.0, 0.2, 1.0]
    assert progress.in_phases(None, 3) is None


class _FakeRerunner:
    """Stands in for ``bandgeo.pipeline.Rerunner`` in the review worker: four warm-up steps, then ready."""

    def __init__(self, folder):
        self.folder = folder

    def warm(self, progress=None):
        for k, what in enumerate(("bands", "projection", "unrolled", "analysis")):
            progress(what, k, 4)
        progress("ready", 4, 4)


def test_review_worker_reports_its_warm_up_and_the_page_can_show_it(monkeypatch):
    """The review page's re-run worker sends its warm-up steps (loading, bands, projection, unrolling,
    one analysis) before it says it is ready; ``ProcessRerun.wait_ready(progress=...)`` hands them to a
    progress display (a terminal bar in the page's process)."""
    import threading
    from multiprocessing import Pipe

    from bandgeo import pipeline
    from bandgeo.review import app as app_mod
    from bandgeo.review import worker

    monkeypatch.setattr(pipeline, "Rerunner", _FakeRerunner)
    page_end, worker_end = Pipe()
    t = threading.Thread(target=worker.serve_requests, args=(worker_end, "folder", False), daemon=True)
    t.start()
    rerun = app_mod.ProcessRerun(report=False)
    rerun._conn = page_end
    heard = []
    assert rerun.wait_ready(timeout=30, progress=lambda d, done, total: heard.append((d, done / total)))
    page_end.send(("stop", None))
    t.join(10)
    assert heard[0][0] == "warm-up: loading the specimen" and heard[0][1] == 0.0
    assert heard[-1][1] == 1.0 and [f for _, f in heard] == sorted(f for _, f in heard)
    assert all(d.startswith("warm-up: ") for d, _ in heard) and len(heard) == 6
    rerun._conn = None


# ---------------------------------------------------------------------------------------------------
# `bandgeo review` in a terminal: the re-run worker's warm-up is drawn (bandgeo.review.server.run)


def _no_idle_loop(monkeypatch, server_mod):
    """run()'s serving loop fails the test at once instead of waiting for a Ctrl-C that never comes
    (the Ctrl-C in these tests arrives during the warm-up)."""
    import threading

    class NoIdle(threading.Event):
        def wait(self, timeout=None):
            raise AssertionError("run() went on serving: the warm-up did not hear the Ctrl-C")

    monkeypatch.setattr(server_mod, "threading", types.SimpleNamespace(**{**vars(threading), "Event": NoIdle}))


def _review_folder(tmp_path):
    sys.path.insert(0, str(__import__("pathlib").Path(__file__).parent))
    from test_review_support import make_folder

    return make_folder(tmp_path / "KRB-07 warm")


def test_review_run_off_a_terminal_waits_for_the_warm_up_without_a_bar_and_stops_on_ctrl_c(
        tmp_path, monkeypatch):
    """No tty: no bar is drawn (nothing on stderr), the worker is still started and waited for with
    ``progress=None``, and a Ctrl-C during the warm-up stops the server cleanly (run returns 0 and
    says so)."""
    from bandgeo.review import server as server_mod

    folder, seg, _ = _review_folder(tmp_path)
    monkeypatch.setattr(sys, "stderr", FakeStderr(tty=False))
    _no_idle_loop(monkeypatch, server_mod)
    seen = {"warm": 0, "progress": "unset"}

    class WaitableRerun:
        def __call__(self, folder):  # never called: no save in this test
            raise AssertionError("no save was asked for")

        def warm(self, folder):
            seen["warm"] += 1

        def wait_ready(self, timeout=120.0, progress=None):
            seen["progress"] = progress
            raise KeyboardInterrupt  # Ctrl-C while the worker warms up

    lines = []
    code = server_mod.run(folder, open_browser=False, segmentation=seg, rerun=WaitableRerun(),
                          echo=lines.append)
    assert code == 0
    assert seen["warm"] >= 1 and seen["progress"] is None
    assert any("Press Ctrl-C" in line for line in lines)
    assert lines[-1].startswith("Review server stopped")
    assert sys.stderr.getvalue() == ""


def test_review_run_on_a_terminal_draws_the_worker_s_warm_up_steps(tmp_path, monkeypatch):
    """On a tty the bar's callback hears every warm-up step the worker sends (through
    ``ProcessRerun.wait_ready(progress=...)``), in order, up to the whole; a Ctrl-C once it is ready
    still stops the server cleanly. The worker's loop runs in a thread on a pipe, its Rerunner faked."""
    import threading
    from multiprocessing import Pipe

    from bandgeo import pipeline
    from bandgeo.review import app as app_mod
    from bandgeo.review import server as server_mod
    from bandgeo.review import worker

    folder, seg, _ = _review_folder(tmp_path)

    monkeypatch.setattr(pipeline, "Rerunner", _FakeRerunner)
    page_end, worker_end = Pipe()
    t = threading.Thread(target=worker.serve_requests, args=(worker_end, str(folder), False), daemon=True)
    t.start()

    class PipedRerun(app_mod.ProcessRerun):
        def warm(self, folder):  # the worker is the thread above, not a process
            pass

    rerun = PipedRerun(report=False)
    rerun._conn = page_end
    heard = []
    real_call = progress.BarCallback.__call__

    def hear(self, description, done, total):
        heard.append((description, done / total, self.title))
        real_call(self, description, done, total)
        if done == total:
            raise KeyboardInterrupt  # Ctrl-C once the warm-up is complete

    monkeypatch.setattr(progress.BarCallback, "__call__", hear)
    monkeypatch.setattr(sys, "stderr", FakeStderr(tty=True))
    _no_idle_loop(monkeypatch, server_mod)
    lines = []
    try:
        code = server_mod.run(folder, open_browser=False, segmentation=seg, rerun=rerun, echo=lines.append)
    finally:
        t.join(10)
    assert code == 0 and lines[-1].startswith("Review server stopped")
    assert not t.is_alive()  # the server's stop closed the worker's pipe
    assert [d for d, _, _ in heard] == ["warm-up: loading the specimen", "warm-up: bands", "warm-up: projection",
                                        "warm-up: unrolled", "warm-up: analysis", "warm-up: ready"]
    fractions = [f for _, f, _ in heard]
    assert fractions == sorted(fractions) and fractions[0] == 0.0 and fractions[-1] == 1.0
    assert {title for _, _, title in heard} == {"warm-up"}


def test_warm_up_bar_returns_when_ready_and_skips_a_rerun_it_cannot_wait_for():
    import threading

    from bandgeo.review.server import _warm_up_bar

    class Ready:
        calls = 0

        def wait_ready(self, timeout=120.0, progress=None):
            Ready.calls += 1
            return True

    app = types.SimpleNamespace(rerun=Ready(), folder="unused")
    assert _warm_up_bar(app, threading.Event()) is True and Ready.calls == 1
    stopped = threading.Event()
    stopped.set()  # SIGTERM before the wait: nothing is waited for
    assert _warm_up_bar(app, stopped) is False and Ready.calls == 1
    assert _warm_up_bar(types.SimpleNamespace(rerun=lambda folder: None, folder="unused"),
                        threading.Event()) is False
