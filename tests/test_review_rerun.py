"""The review page's default re-run: the pipeline in a worker process of its own, which gives what a
fresh run gives, tells its progress, survives its own death and stops with the server.

Reference: the full computation itself (common practice: the page's result must be the one a fresh
``bandgeo.pipeline.downstream`` gives with the same review).
"""
import json
import os
import shutil
import signal
import time
from pathlib import Path

import pytest

from bandgeo import pipeline
from bandgeo.results import ResultFolder
from bandgeo.review import read_review, serve
from bandgeo.review.app import ProcessRerun, ReviewApp

from test_review_server import request
from test_review_support import make_long_folder


@pytest.fixture(scope="module")
def analysed(tmp_path_factory):
    return make_long_folder(tmp_path_factory.mktemp("process") / "KRB-41", n_bands=120, days_per_year=30.0)


@pytest.fixture
def long_folder(analysed, tmp_path):
    """A copy of the analysed folder for each test: the tests save reviews into it, and none may see
    another's (each would then pass or fail by the order the tests run in)."""
    return Path(shutil.copytree(analysed, tmp_path / analysed.name))


def _wait_done(app, timeout=180):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        st = app.rerun_status()
        if st["state"] in ("done", "failed"):
            return st
        time.sleep(0.05)
    raise AssertionError("the re-run did not finish")


def _fresh(folder):
    inputs = ResultFolder(folder).load_inputs()
    return pipeline.downstream(inputs.specimen, inputs.segmentation, read_review(folder), inputs.params)


def test_default_rerun_in_a_worker_process_gives_the_fresh_result_and_the_report(long_folder):
    server = serve(long_folder, open_browser=False)
    try:
        assert isinstance(server.app.rerun, ProcessRerun)
        state = request(server, "GET", "/api/state")[1]
        rows = [b for b in state["boundaries"] if b["status"] == "auto"]
        b, nxt = rows[50], rows[51]
        request(server, "POST", "/api/edit", {"edit": {"op": "add",
                                                       "height_mm": 0.5 * (b["height_mm"] + nxt["height_mm"])}})
        request(server, "POST", "/api/edit", {"edit": {"op": "reject", "id": rows[80]["id"]}})
        seen = set()  # every stage the page heard (polling /api/status could miss a short one)
        shown = server.app._progress
        server.app._progress = lambda d, done, total: (seen.add(str(d)[:80]), shown(d, done, total))
        request(server, "POST", "/api/save", {})
        end = time.monotonic() + 300
        while time.monotonic() < end:
            st = request(server, "GET", "/api/status")[1]
            if st["state"] != "running":
                break
            time.sleep(0.02)
        assert st["state"] == "done", st
        assert server.app.rerun.pid is not None and server.app.rerun.pid != os.getpid()
        fresh = _fresh(long_folder)
        state = request(server, "GET", "/api/state")[1]
        assert state["result"]["bands"]["count"] == fresh.result["bands"]["count"] == 120  # one added, one removed
        written = json.loads((long_folder / "result.json").read_text())
        assert written["bands"] == fresh.result["bands"]
        assert written["review"]["n_edits"] == 2
        assert (long_folder / "report.html").is_file()  # the report followed the figures
        assert seen & {"review", "measure", "series", "periodicity", "report"}, seen  # progress came through
        pid = server.app.rerun.pid
    finally:
        server.stop()
    # the worker stops with the server
    end = time.monotonic() + 10
    while time.monotonic() < end:
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            break
        time.sleep(0.1)
    else:
        pytest.fail("the re-run worker outlived the server")


def _saves_with_a_new_worker(app, rerun, first, folder):
    """A save that ends done, in a worker other than ``first``, with the fresh run's band count."""
    app.save()
    st = _wait_done(app)
    assert st["state"] == "done", st
    assert rerun.pid not in (None, first)
    assert app.last_result["bands"]["count"] == _fresh(folder).result["bands"]["count"]


class _KilledMidSave(ProcessRerun):
    """Its first worker never finishes a save (tests/stalling_review_worker.py: one progress line, then
    it waits); the worker is killed when that progress line arrives, so it dies during the save, always
    (a real worker could finish a 120-band re-run before a loaded machine delivers its first line). The
    workers after it are real ones."""

    worker_module = "stalling_review_worker"

    def __init__(self, **kwargs):
        super().__init__(**kwargs)
        self.kills = 0

    def __call__(self, folder, progress=None, partial=None):
        def killing(*args):
            if self.kills == 0 and not str(args[0]).startswith("warm-up"):
                self.kills += 1
                self.worker_module = ProcessRerun.worker_module  # the next worker is a real one
                os.kill(self.pid, signal.SIGKILL)
            if progress is not None:
                progress(*args)

        return super().__call__(folder, progress=killing, partial=partial)


def test_a_worker_that_dies_during_a_save_fails_that_save_and_the_next_save_starts_a_new_one(long_folder,
                                                                                               monkeypatch):
    here = os.path.dirname(os.path.abspath(__file__))  # the stalling worker's module is beside this file
    monkeypatch.setenv("PYTHONPATH", os.pathsep.join(filter(None, [here, os.environ.get("PYTHONPATH")])))
    rerun = _KilledMidSave(report=False)
    app = ReviewApp(long_folder, "token", rerun=rerun)
    try:
        rerun.warm(long_folder)
        assert rerun.wait_ready(120)
        first = rerun.pid
        app.session.push({"op": "reject", "id": app.session.state.active()[30].id})
        app.save()
        st = _wait_done(app)
        assert rerun.kills == 1
        assert st["state"] == "failed" and "stopped unexpectedly" in st["error"] and "\n" not in st["error"]
        _saves_with_a_new_worker(app, rerun, first, long_folder)
    finally:
        app.wait(60)
        rerun.close()
    assert rerun.pid is None


def test_a_worker_that_died_while_idle_is_replaced_quietly_at_the_next_save(long_folder):
    rerun = ProcessRerun(report=False)
    app = ReviewApp(long_folder, "token", rerun=rerun)
    try:
        rerun.warm(long_folder)
        assert rerun.wait_ready(120)
        first = rerun.pid
        os.kill(first, signal.SIGKILL)  # whether or not it has been reaped when the save comes
        app.session.push({"op": "reject", "id": app.session.state.active()[31].id})
        _saves_with_a_new_worker(app, rerun, first, long_folder)
    finally:
        app.wait(60)
        rerun.close()
    assert rerun.pid is None


def test_a_script_without_a_main_guard_can_serve_the_page(long_folder, tmp_path):
    """The worker is a fresh interpreter: a user's script that starts the page at module level (no
    ``if __name__ == "__main__"``) is not run a second time in it."""
    import subprocess
    import sys
    import textwrap

    script = tmp_path / "my_review.py"
    marker = tmp_path / "runs.txt"
    script.write_text(textwrap.dedent(f"""
        from pathlib import Path
        from bandgeo.review.app import ProcessRerun
        with open({str(marker)!r}, "a") as fh:
            fh.write("run\\n")
        rerun = ProcessRerun(report=False)
        analysis = rerun({str(long_folder)!r})
        rerun.close()
        print(analysis.result["bands"]["count"])
    """))
    proc = subprocess.run([sys.executable, str(script)], capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert int(proc.stdout.strip().splitlines()[-1]) == _fresh(long_folder).result["bands"]["count"]
    assert marker.read_text().count("run") == 1
