"""A batch's workers live and die with it (issue 15 F7), and Ctrl-C says truthfully what was left and a
rerun completes it (F8). Each test runs a real batch in a child process with two local workers whose
analysis only sleeps, so no mesh work is involved."""
import json
import os
import signal
import subprocess
import sys
import textwrap
import time

import pytest

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="POSIX signals and process groups")

SCRIPT = textwrap.dedent('''
    import os, sys, time
    from pathlib import Path

    def slow(scan_path, out_dir, **kwargs):
        Path(out_dir).mkdir(parents=True, exist_ok=True)
        (Path(out_dir) / "worker.pid").write_text(str(os.getpid()))
        time.sleep(600)

    def fast(scan_path, out_dir, **kwargs):
        from bandgeo.atomic import write_json
        write_json(Path(out_dir) / "result.json", {"schema": "bandgeo.result/1",
                                                    "days_per_year": {"significant": False}})

    if __name__ == "__main__":
        import slowmod
        import bandgeo.batch.runner as runner
        from bandgeo.cli import main
        runner.default_analyze = lambda: getattr(slowmod, sys.argv[1])
        sys.exit(main(["batch", sys.argv[2], "--out", sys.argv[3], "--workers", "2", "--no-compile"]))
''')


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    try:  # a zombie (exited, not yet reaped by init) counts as gone
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().split(")")[-1].split()[0] != "Z"
    except OSError:
        return True


def _wait_for(predicate, limit_s=90.0):
    end = time.monotonic() + limit_s
    while time.monotonic() < end:
        if predicate():
            return True
        time.sleep(0.2)
    return predicate()


@pytest.fixture()
def batch(tmp_path):
    (tmp_path / "slowmod.py").write_text(SCRIPT)
    scans = tmp_path / "scans"
    scans.mkdir()
    for name in ("A", "B", "C"):
        (scans / f"{name}.ply").write_text(f"not read: the analysis is replaced ({name})\n")
    out = tmp_path / "out"
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(tmp_path), os.environ.get("PYTHONPATH", "")]),
               OMP_NUM_THREADS="1")

    def start(mode):
        return subprocess.Popen([sys.executable, str(tmp_path / "slowmod.py"), mode, str(scans), str(out)],
                                env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                                start_new_session=True)

    def worker_pids():
        return [int(p.read_text()) for p in out.glob("*/worker.pid") if p.read_text().strip()]

    return start, worker_pids, out


def test_workers_die_when_the_batch_is_killed(batch):
    start, worker_pids, _ = batch
    proc = start("slow")
    assert _wait_for(lambda: len(worker_pids()) == 2)
    pids = worker_pids()
    os.kill(proc.pid, signal.SIGKILL)              # as 'kill -9' of the main process
    proc.wait()
    try:
        assert _wait_for(lambda: not any(_alive(p) for p in pids)), "workers outlived the batch"
    finally:  # never leave a sleeping worker behind, even when the check failed
        for pid in pids:
            if _alive(pid):
                os.kill(pid, signal.SIGKILL)


def test_ctrl_c_says_what_was_left_and_a_rerun_completes_it(batch):
    start, worker_pids, out = batch
    proc = start("slow")
    assert _wait_for(lambda: len(worker_pids()) == 2)
    pids = worker_pids()
    os.killpg(proc.pid, signal.SIGINT)             # Ctrl-C in a terminal reaches the whole group
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 130
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err and "release unlocked lock" not in err
    assert "0 of 3 specimens finished, 3 left to do" in lines[0] and "run the same command again" in lines[0]
    assert _wait_for(lambda: not any(_alive(p) for p in pids), 30)
    summary = json.loads((out / "batch_summary.json").read_text())
    assert summary["interrupted"] is True and summary["counts"]["pending"] == 3
    assert not list(out.glob("*/result.json"))   # nothing half-done passes for a result
    again = start("fast")
    _, err = again.communicate(timeout=300)
    assert again.returncode == 0, err
    summary = json.loads((out / "batch_summary.json").read_text())
    assert summary["counts"]["done"] == 3 and summary["counts"]["pending"] == 0
