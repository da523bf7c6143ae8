"""Batch runs: manifests, resuming, failures, interruption, and Dask against local processes.

The runner is tested with small stand-in analysis functions (module level, so worker processes can
import them) that read the scan with trimesh and write a result.json, as ``bandgeo.pipeline.analyze``
does; tests/test_batch_pipeline.py runs the real pipeline.
"""
import csv
import json
import os
import signal
import subprocess
import sys
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

from bandgeo.atomic import write_json
from bandgeo.batch import read_manifest, run_batch
from bandgeo.batch.manifest import file_sha256
from bandgeo.errors import InputError, ParameterError

HERE = Path(__file__).resolve().parent


def _calls(out_dir: Path) -> list[str]:
    log = Path(out_dir) / "calls.log"
    return log.read_text().split() if log.exists() else []


def fake_analyze(scan_path, out_dir, *, units=None, up=None, north=None, strike_dip=None, sheet=None,
                 seed=0, keep_review=True, report=True, progress=None):
    """Stand-in for bandgeo.pipeline.analyze: reads the mesh with trimesh, writes result.json."""
    import trimesh

    out_dir = Path(out_dir)
    with open(out_dir.parent / "calls.log", "a") as fh:  # one short line per call (O_APPEND)
        fh.write(out_dir.name + "\n")
    try:
        mesh = trimesh.load(scan_path, process=False, force="mesh")
        n_faces = len(mesh.faces)
    except Exception as exc:
        raise InputError(f"cannot read the scan {Path(scan_path).name!r} ({type(exc).__name__}); re-export it")
    if n_faces == 0:
        raise InputError(f"the scan {Path(scan_path).name!r} has no faces; re-export it")
    rng = np.random.default_rng([seed, n_faces])
    est = 400.0 + rng.normal(0.0, 3.0)
    result = {"schema": "bandgeo.result/1",
              "specimen": {"id": out_dir.name, "scan": {"sha256": file_sha256(scan_path)}, "sheet": {}},
              "days_per_year": {"estimate": est, "ci95": [est - 6.0, est + 6.0], "significant": True,
                                "p_value": 0.001, "method": "stand-in"},
              "provenance": {"input_sha256": file_sha256(scan_path), "seed": seed,
                             "units": units, "sheet": sheet}}
    write_json(out_dir / "result.json", result)
    return SimpleNamespace(result=result, folder=out_dir)


def interrupting_analyze(scan_path, out_dir, **kwargs):
    """Raises KeyboardInterrupt (as Ctrl-C would) on the third call of a batch."""
    if len(_calls(Path(out_dir).parent)) >= 2:
        with open(Path(out_dir).parent / "calls.log", "a") as fh:
            fh.write(Path(out_dir).name + "\n")
        raise KeyboardInterrupt
    return fake_analyze(scan_path, out_dir, **kwargs)


def killing_analyze(scan_path, out_dir, **kwargs):
    """SIGKILLs its own process (a power cut, the OOM killer) on the fourth call."""
    if len(_calls(Path(out_dir).parent)) >= 3:
        os.kill(os.getpid(), signal.SIGKILL)
    return fake_analyze(scan_path, out_dir, **kwargs)


def crashing_analyze(scan_path, out_dir, **kwargs):
    """Kills its worker process (as a segfault in native code would) for scans named *crash*."""
    if "crash" in Path(scan_path).name:
        os._exit(11)
    return fake_analyze(scan_path, out_dir, **kwargs)


def _write_box(path: Path, n: int) -> None:
    import trimesh

    mesh = trimesh.creation.icosphere(subdivisions=1)
    mesh = trimesh.util.concatenate([mesh.copy().apply_translation([3.0 * k, 0, 0]) for k in range(n)])
    mesh.export(path)


@pytest.fixture
def scans(tmp_path):
    folder = tmp_path / "scans in here"  # a space in the path, upper-case extensions
    folder.mkdir()
    for k, name in enumerate(["KRB-07.PLY", "KRB-12.ply", "KRB-31.Ply", "KRB-40.stl", "KRB-41.ply"]):
        _write_box(folder / name, k + 1)
    (folder / "KRB-12.sheet.toml").write_text('specimen_id = "KRB-12"\nage_ma = 1100.0\nage_err_ma = 20.0\n'
                                              'horizon = "Karrabin lower"\n')
    (folder / "notes.txt").write_text("not a scan")
    return folder


def test_folder_manifest_finds_scans_and_sheets(scans):
    jobs = read_manifest(scans)
    assert [j.specimen_id for j in jobs] == ["KRB-07", "KRB-12", "KRB-31", "KRB-40", "KRB-41"]
    sheet_job = jobs[1]
    assert sheet_job.sheet_path.name == "KRB-12.sheet.toml"
    assert (sheet_job.age_ma, sheet_job.age_err_ma, sheet_job.horizon) == (1100.0, 20.0, "Karrabin lower")
    assert all(j.sheet_path is None for j in jobs if j.specimen_id != "KRB-12")


def test_a_bad_sheet_does_not_stop_reading_the_batch(scans):
    # The analysis re-reads the sheet and fails that specimen alone (bandgeo.scan.read_sheet's message).
    (scans / "KRB-31.sheet.toml").write_text('colour = "red"\n')
    jobs = {j.specimen_id: j for j in read_manifest(scans)}
    assert jobs["KRB-31"].sheet_path.name == "KRB-31.sheet.toml" and jobs["KRB-31"].age_ma is None
    assert jobs["KRB-12"].age_ma == 1100.0


def test_csv_manifest_relative_paths_and_fields(scans, tmp_path):
    manifest = tmp_path / "batch.csv"
    manifest.write_text("scan,specimen_id,units,up,strike_deg,dip_deg,age_ma,horizon,locality\n"
                        '"scans in here/KRB-07.PLY",K7,cm,"0,0,1",120,15,1100,lower,"Tallow Creek, Mirrin Ranges"\n'
                        "scans in here/KRB-31.Ply,,,,,,,,\n")
    jobs = read_manifest(manifest)
    assert [j.specimen_id for j in jobs] == ["K7", "KRB-31"]
    assert jobs[0].units == "cm" and jobs[0].strike_dip == (120.0, 15.0)
    np.testing.assert_allclose(jobs[0].up, [0, 0, 1])
    assert jobs[0].locality == "Tallow Creek, Mirrin Ranges"
    assert jobs[0].scan_path == (scans / "KRB-07.PLY").resolve()


@pytest.mark.parametrize("body, fragment", [
    ("scan,age_ma\nmissing.ply,1\n", "row 2"),
    ("scan,age_ma\n{scan},old\n", "age_ma"),
    ("scan,up\n{scan},\"0,1\"\n", "up"),
    ("scan,dip_deg\n{scan},95\n", "give both strike_deg and dip_deg"),
    ("scan,colour\n{scan},red\n", "unknown column"),
    ("specimen_id\nK7\n", "no 'scan' column"),
    ("scan,specimen_id\n{scan},A\n{scan},a\n", "share the id"),
    ("scan,specimen_id\n{scan},../up\n", "cannot name a folder"),
])
def test_bad_manifest_is_one_line_input_error(scans, tmp_path, body, fragment):
    manifest = tmp_path / "bad.csv"
    manifest.write_text(body.format(scan=scans / "KRB-07.PLY"))
    with pytest.raises(InputError) as info:
        read_manifest(manifest)
    assert fragment in str(info.value) and "\n" not in str(info.value)


def test_missing_or_empty_input(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        read_manifest(tmp_path / "nope")
    (tmp_path / "empty").mkdir()
    with pytest.raises(InputError, match="no specimens"):
        read_manifest(tmp_path / "empty")
    (tmp_path / "only_header.csv").write_text("scan\n")
    with pytest.raises(InputError, match="no specimens"):
        read_manifest(tmp_path / "only_header.csv")


def test_resume_skips_finished_and_reruns_changed(scans, tmp_path):
    out = tmp_path / "out"
    jobs = read_manifest(scans)
    first = run_batch(jobs, out, scheduler="inline", analyze_fn=fake_analyze)
    assert first.n_done == 5 and len(_calls(out)) == 5
    again = run_batch(jobs, out, scheduler="inline", analyze_fn=fake_analyze)
    assert again.n_skipped == 5 and again.n_done == 0 and len(_calls(out)) == 5  # nothing repeated
    # A new seed is a new job key: every specimen runs again (common practice: keyed caches).
    other = run_batch(jobs, out, scheduler="inline", analyze_fn=fake_analyze, seed=7)
    assert other.n_done == 5 and len(_calls(out)) == 10
    # A changed scan re-runs that specimen only (its SHA-256 changed).
    _write_box(scans / "KRB-31.Ply", 9)
    changed = run_batch(jobs, out, scheduler="inline", analyze_fn=fake_analyze, seed=7)
    assert [o.specimen_id for o in changed.outcomes if o.status == "done"] == ["KRB-31"]
    inputs_untouched = {p.name: file_sha256(p) for p in scans.iterdir()}
    run_batch(jobs, out, scheduler="inline", analyze_fn=fake_analyze, params={"report": False})
    assert inputs_untouched == {p.name: file_sha256(p) for p in scans.iterdir()}  # inputs never modified


def test_corrupt_file_is_reported_and_the_rest_finish(scans, tmp_path):
    (scans / "KRB-50.ply").write_bytes(b"ply\nformat binary_little_endian 1.0\nelement vertex 99\n\x00\x01")
    out = tmp_path / "out"
    summary = run_batch(read_manifest(scans), out, workers=2, analyze_fn=fake_analyze)
    assert summary.n_done == 5 and summary.n_failed == 1
    bad = summary.failed[0]
    assert bad.specimen_id == "KRB-50" and "re-export" in bad.error and "\n" not in bad.error
    with open(out / "batch_summary.csv", newline="") as fh:
        rows = {r["specimen_id"]: r for r in csv.DictReader(fh)}
    assert rows["KRB-50"]["status"] == "failed" and rows["KRB-07"]["status"] == "done"
    assert "days_per_year" in rows["KRB-07"] and "length_of_day_h" in rows["KRB-07"]


def test_a_worker_that_dies_fails_only_its_specimen(scans, tmp_path):
    _write_box(scans / "KRB-99-crash.ply", 1)
    summary = run_batch(read_manifest(scans), tmp_path / "out", workers=2, analyze_fn=crashing_analyze)
    assert [o.specimen_id for o in summary.failed] == ["KRB-99-crash"]
    assert "worker process died" in summary.failed[0].error
    assert summary.n_done == 5


def test_interrupt_loses_nothing_and_repeats_nothing(scans, tmp_path):
    out = tmp_path / "out"
    jobs = read_manifest(scans)
    with pytest.raises(KeyboardInterrupt):
        run_batch(jobs, out, scheduler="inline", analyze_fn=interrupting_analyze)
    saved = json.loads((out / "batch_summary.json").read_text())
    assert saved["interrupted"] is True
    assert [s["status"] for s in saved["specimens"]] == ["done", "done", "pending", "pending", "pending"]
    (out / "calls.log").unlink()
    resumed = run_batch(jobs, out, scheduler="inline", analyze_fn=fake_analyze)
    assert sorted(_calls(out)) == ["KRB-31", "KRB-40", "KRB-41"]  # only the ones not finished
    assert resumed.n_skipped == 2 and resumed.n_done == 3


def test_process_kill_loses_nothing_and_repeats_nothing(scans, tmp_path):
    out = tmp_path / "out"
    script = (f"import sys; sys.path.insert(0, {str(HERE)!r}); import test_batch as t; "
              "from bandgeo.batch import read_manifest, run_batch; "
              f"run_batch(read_manifest({str(scans)!r}), {str(out)!r}, scheduler='inline', "
              "analyze_fn=t.killing_analyze)")
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=120)
    assert proc.returncode == -signal.SIGKILL
    saved = json.loads((out / "batch_summary.json").read_text())  # written atomically: complete JSON
    done = [s["specimen_id"] for s in saved["specimens"] if s["status"] == "done"]
    assert done == ["KRB-07", "KRB-12", "KRB-31"]
    (out / "calls.log").unlink()
    resumed = run_batch(read_manifest(scans), out, workers=2, analyze_fn=fake_analyze)
    assert sorted(_calls(out)) == ["KRB-40", "KRB-41"]
    assert resumed.n_skipped == 3 and resumed.n_done == 2 and resumed.n_failed == 0


def test_progress_covers_the_whole_batch(scans, tmp_path):
    seen = []
    run_batch(read_manifest(scans), tmp_path / "out", scheduler="inline", analyze_fn=fake_analyze,
              progress=lambda desc, done, total: seen.append((done, total)))
    assert seen[0] == (0, 5) and seen[-1] == (5, 5)
    assert [d for d, _ in seen] == sorted(d for d, _ in seen)


def test_bad_parameters(scans, tmp_path):
    jobs = read_manifest(scans)
    with pytest.raises(ParameterError, match="unknown batch parameter"):
        run_batch(jobs, tmp_path / "o", params={"colour": 1}, analyze_fn=fake_analyze)
    with pytest.raises(ParameterError, match="workers"):
        run_batch(jobs, tmp_path / "o", workers=0, analyze_fn=fake_analyze)


def _results(out: Path) -> dict:
    return {p.parent.name: json.loads(p.read_text())["days_per_year"] for p in sorted(out.glob("*/result.json"))}


def test_dask_local_cluster_matches_local_processes(scans, tmp_path):
    """The same batch on a Dask LocalCluster and on local processes gives the same results."""
    import cloudpickle
    from dask.distributed import LocalCluster

    cloudpickle.register_pickle_by_value(sys.modules[__name__])  # workers need not import this file
    (scans / "KRB-60.ply").write_bytes(b"not a mesh at all")
    local = run_batch(read_manifest(scans), tmp_path / "local", workers=2, analyze_fn=fake_analyze)
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                      host="127.0.0.1") as cluster:
        remote = run_batch(read_manifest(scans), tmp_path / "dask", scheduler=cluster.scheduler_address,
                           analyze_fn=fake_analyze)
    assert remote.scheduler.startswith("dask tcp://127.0.0.1")
    assert [o.status for o in remote.outcomes] == [o.status for o in local.outcomes]
    assert [o.error for o in remote.outcomes] == [o.error for o in local.outcomes]
    assert _results(tmp_path / "dask") == _results(tmp_path / "local")
    assert len(_results(tmp_path / "dask")) == 5
