"""A batch of forward-model specimens through the real pipeline, on local processes and on a Dask
LocalCluster: the two give the same results, equal to single-specimen runs, and compile.

The forward model (bandgeo.synth) supplies the specimens; its truth files give each specimen's
paleo-up direction, handed over through the CSV manifest as a lab would from field notes. Accuracy
against the forward model's truth is the pipeline's own test (tests/test_pipeline.py); here the check
is that a batch reproduces single-specimen runs exactly, wherever it runs.
"""
import json

import pytest

from bandgeo import pipeline
from bandgeo.batch import compile_results, read_manifest, run_batch
from bandgeo.synth import SynthParams, simulate, write_specimen

PARAMS = {"n_sim": 199, "report": False}
SEED = 17
KW = dict(days_per_year=30.0, years=4.0, radius_mm=1.0, mean_thickness_mm=0.3, rings_per_lamina=3,
          annual_amplitude=0.35, noise_cv=0.12, ar1_phi=0.4)


@pytest.fixture(scope="module")
def collection(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("collection")
    scans = tmp / "scans"
    scans.mkdir()
    lines = ["scan,specimen_id,units,up,age_ma,age_err_ma,horizon,locality"]
    for k, (sid, seed) in enumerate([("KRB-07", 31), ("KRB-12", 32)]):
        spec = simulate(SynthParams(**KW, seed=seed))
        write_specimen(spec, scans / f"{sid}.ply")
        truth = json.loads((scans / f"{sid}.truth.json").read_text())
        up = ",".join(f"{v:.9f}" for v in truth["frames"]["paleo_up_file"])
        lines.append(f'scans/{sid}.ply,{sid},{truth["units"]},"{up}",{1100 + k},15,Karrabin lower,'
                     '"Tallow Creek, Mirrin Ranges"')
    (scans / "KRB-40.ply").write_bytes(b"ply\nformat ascii 1.0\nelement vertex 3\nend_header\n1 2\n")
    lines.append("scans/KRB-40.ply,KRB-40,mm,,1101,15,Karrabin lower,")
    (tmp / "batch.csv").write_text("\n".join(lines) + "\n")
    return tmp


@pytest.fixture(scope="module")
def local_run(collection):
    jobs = read_manifest(collection / "batch.csv")
    summary = run_batch(jobs, collection / "local", workers=2, params=PARAMS, seed=SEED)
    return jobs, summary


def _dpy(folder):
    return {p.parent.name: json.loads(p.read_text())["days_per_year"] for p in sorted(folder.glob("*/result.json"))}


def test_local_batch_finishes_and_reports_the_corrupt_scan(local_run):
    _, summary = local_run
    assert [o.status for o in summary.outcomes] == ["done", "done", "failed"]
    assert "KRB-40" == summary.failed[0].specimen_id and "\n" not in summary.failed[0].error


def test_batch_equals_a_single_specimen_run(local_run, collection):
    jobs, _ = local_run
    job = jobs[0]
    alone = pipeline.analyze(job.scan_path, collection / "alone", units=job.units, up=job.up, seed=SEED,
                             **PARAMS)
    assert _dpy(collection / "local")["KRB-07"] == alone.result["days_per_year"]


def test_dask_local_cluster_gives_the_same_results(local_run, collection):
    from dask.distributed import LocalCluster

    jobs, local = local_run
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                      host="127.0.0.1") as cluster:
        remote = run_batch(jobs, collection / "dask", scheduler=cluster.scheduler_address, params=PARAMS,
                           seed=SEED)
    assert [o.status for o in remote.outcomes] == [o.status for o in local.outcomes]
    assert _dpy(collection / "dask") == _dpy(collection / "local")
    # Resume on the local runner: everything finished is skipped, only the corrupt scan is retried.
    again = run_batch(jobs, collection / "dask", workers=2, params=PARAMS, seed=SEED)
    assert again.n_skipped == 2 and again.n_done == 0 and again.n_failed == 1


def test_compilation_of_the_real_results(local_run, collection):
    _, summary = local_run
    comp = compile_results(collection / "local")
    assert [r["specimen_id"] for r in comp.rows] == ["KRB-07", "KRB-12", "KRB-40"]
    assert comp.rows[0]["age_ma"] == 1100 and comp.rows[0]["horizon"] == "Karrabin lower"
    assert comp.rows[-1]["status"] == "failed"
    for row, outcome in zip(comp.rows[:2], summary.outcomes[:2]):
        assert row["days_per_year"] == outcome.digest["days_per_year"]
        if row["days_per_year"] is not None:  # LOD = Y / N, Y = 365.24219 d (standard almanac value)
            assert row["length_of_day_h"] == pytest.approx(365.24219 * 24.0 / row["days_per_year"], rel=1e-6)
    assert comp.files["html"].is_file() and comp.files["pdf"].is_file()
    # At least one estimate, so that the local/Dask comparison above compared numbers, not only nulls.
    assert any(r["days_per_year"] is not None for r in comp.rows[:2])
