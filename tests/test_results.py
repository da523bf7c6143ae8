"""The result folder (bandgeo.results) and the one path through the pipeline (bandgeo.pipeline):
run parameters in their own record, the float64 specimen cache, outputs written on the side and
swapped in (issue 15 F5), recovery after an interrupted run (F9), and the review page's in-memory
re-run. The forward model (bandgeo.synth) makes the specimen; its truth is not needed here."""
from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from bandgeo import pipeline
from bandgeo.results import ResultFolder, ResultSummary, RunParams, load_specimen
from bandgeo.synth import SynthParams, simulate, write_specimen

SMALL = dict(days_per_year=30.0, years=3.0, mean_thickness_mm=0.25, sampling="anisotropic", ring_vertices=32,
             rings_per_lamina=3.0, seed=11)


def _snapshot(folder: Path) -> dict:
    """Every entry of a folder (hidden ones too) with its bytes."""
    return {p.relative_to(folder).as_posix(): (p.read_bytes() if p.is_file() else None)
            for p in sorted(folder.rglob("*"))}


@pytest.fixture(scope="module")
def analysed(tmp_path_factory):
    root = tmp_path_factory.mktemp("results")
    scan = root / "KRB-41.ply"
    write_specimen(simulate(SynthParams(**SMALL)), scan)
    out = root / "out"
    analysis = pipeline.analyze(scan, out, n_sim=99, seed=4)
    return scan, out, analysis


def _copy(out: Path, tmp_path: Path) -> Path:
    target = tmp_path / "copy"
    shutil.copytree(out, target)
    return target


def _review(analysis, edits):
    from bandgeo.review.basis import check_review  # noqa: F401  (the review stage's own check)
    from bandgeo.review.basis import basis_of

    spec = analysis.specimen
    meta = {"scan_sha256": spec.scan_sha256, "scan_path": spec.scan_path, "specimen_id": spec.specimen_id,
            "units": spec.units, "mm_per_unit": spec.mm_per_unit,
            "scan_to_specimen": np.asarray(spec.scan_to_specimen).tolist()}
    return {"schema": "bandgeo.review/1", "specimen_id": spec.specimen_id, "scan_sha256": spec.scan_sha256,
            "basis": basis_of(meta, analysis.auto_segmentation), "edits": edits, "notes": "", "stretches": []}


def test_run_parameters_have_their_own_record(analysed):
    _, out, analysis = analysed
    saved = ResultFolder(out).load_params()
    assert saved == analysis.params
    assert (saved.seed, saved.n_sim) == (4, 99)
    assert RunParams.from_json(saved.to_json()) == saved
    assert json.loads((out / "run.json").read_text())["schema"] == "bandgeo.run/1"


def test_specimen_cache_keeps_the_measured_float64_vertices(analysed):
    _, out, analysis = analysed
    cached = load_specimen(out)
    assert cached.vertices_mm.dtype == np.float64
    np.testing.assert_array_equal(cached.vertices_mm, analysis.specimen.vertices_mm)


def test_reload_from_the_folder_gives_the_same_findings(analysed):
    _, out, analysis = analysed
    again = pipeline.load_state(out)
    for key in ("days_per_year", "bands", "daily_test", "length_of_day_hours"):
        assert again.result[key] == analysis.result[key], key


def test_summary_never_turns_no_cycle_into_an_estimate():
    # common practice: a non-significant test gives no estimate, whatever numbers the block holds
    result = {"specimen": {"id": "x"}, "bands": {"count": 40},
              "days_per_year": {"significant": False, "estimate": 371.0, "ci95": [300.0, 420.0]},
              "length_of_day_hours": {"estimate": 23.6, "ci95": [20.0, 29.0]}}
    s = ResultSummary.from_json(result)
    assert s.days_per_year is None and s.length_of_day_hours is None and not s.annual_significant


def test_summary_derives_length_of_day_from_days_per_year():
    # LOD = Y / N, Y = 365.24219 d (standard almanac year)
    result = {"days_per_year": {"significant": True, "estimate": 400.0, "ci95": [393.0, 407.0]}}
    lod = ResultSummary.from_json(result).length_of_day_hours
    assert lod.estimate == pytest.approx(365.24219 * 24 / 400.0, rel=1e-12)
    assert lod.ci95 == pytest.approx((365.24219 * 24 / 407.0, 365.24219 * 24 / 393.0), rel=1e-12)


def test_a_failed_analyze_leaves_the_folder_exactly_as_it_was(analysed, tmp_path, monkeypatch):
    scan, out, _ = analysed
    folder = _copy(out, tmp_path)
    before = _snapshot(folder)

    def broken_report(analysis, target, **kwargs):
        (Path(target) / "report.html").write_text("half a report")
        raise RuntimeError("the report failed half-way")

    import bandgeo.report

    monkeypatch.setattr(bandgeo.report, "write_report", broken_report)
    with pytest.raises(RuntimeError, match="half-way"):
        pipeline.analyze(scan, folder, n_sim=99, seed=5)
    assert _snapshot(folder) == before


def test_no_report_leaves_no_older_report_beside_the_new_result(analysed, tmp_path):
    scan, out, _ = analysed
    folder = _copy(out, tmp_path)
    assert (folder / "report.html").is_file()
    pipeline.analyze(scan, folder, n_sim=99, seed=6, report=False)
    names = {p.name for p in folder.iterdir()}
    assert {"result.json", "bands.csv", "run.json", "specimen.npz"} <= names
    assert not names & {"report.html", "report.pdf", "labelled_mesh.ply", "spectra.csv"}
    assert not [n for n in names if n.startswith(".")]
    assert json.loads((folder / "result.json").read_text())["provenance"]["seed"] == 6


def test_interrupted_run_is_cleaned_up_on_the_next_start(analysed, tmp_path):
    _, out, _ = analysed
    folder = _copy(out, tmp_path)
    staging = folder / ".staging-killed"
    staging.mkdir()
    (staging / "result.json").write_text("{}")
    temp = folder / ".review.k3j2h1.json"
    temp.write_text("{")
    old = (folder / "result.json").stat().st_mtime - 3600
    for path in (staging, temp, folder / "report.html", folder / "report.pdf"):
        os.utime(path, (old, old))
    done = ResultFolder(folder).recover()
    assert not staging.exists() and not temp.exists()
    # the report was older than result.json: it is marked stale, not shown as current
    assert not (folder / "report.html").exists() and (folder / "report.stale.html").is_file()
    assert any("report.stale.html" in line for line in done)


def test_a_swap_cut_half_way_is_finished_on_the_next_start(analysed, tmp_path):
    _, out, _ = analysed
    folder = _copy(out, tmp_path)
    rf = ResultFolder(folder)
    staged = folder / ".staging-cut"
    staged.mkdir()
    (staged / "bands.csv").write_text("new bands\n")
    (staged / "result.json").write_text('{"new": true}\n')
    (folder / ".swap.json").write_text(json.dumps({"staged": staged.name, "files": ["bands.csv", "result.json"],
                                                   "remove": ["report.html"], "aside": {}}))
    (folder / "bands.csv").write_text("old bands\n")   # as if the process died before the first move
    rf.recover()
    assert (folder / "bands.csv").read_text() == "new bands\n"
    assert json.loads((folder / "result.json").read_text()) == {"new": True}
    assert not (folder / "report.html").exists() and not staged.exists() and not (folder / ".swap.json").exists()


def test_a_segmentation_and_specimen_cache_are_enough_to_rerun(analysed, tmp_path):
    _, out, analysis = analysed
    folder = tmp_path / "segment only"
    folder.mkdir()
    for name in ("specimen.npz", "segmentation.json", "segmentation_labels.npz"):
        shutil.copy(out / name, folder / name)
    inputs = ResultFolder(folder).load_inputs()
    assert inputs.review is None and inputs.params == RunParams()   # defaults: no run.json
    assert len(inputs.segmentation.boundaries) == len(analysis.auto_segmentation.boundaries)


def test_review_page_rerun_uses_the_review_it_holds(analysed, tmp_path, monkeypatch):
    _, out, analysis = analysed
    folder = _copy(out, tmp_path)
    rerun = pipeline.Rerunner(folder)

    def no_reads(*args, **kwargs):
        raise AssertionError("the re-run read a file")

    monkeypatch.setattr(ResultFolder, "load_review", no_reads)
    monkeypatch.setattr(ResultFolder, "load_inputs", no_reads)
    target = analysis.auto_segmentation.boundaries[5].id
    again = rerun(review=_review(analysis, [{"op": "reject", "id": int(target)}]), report=False)
    assert len(again.segmentation.boundaries) == len(analysis.auto_segmentation.boundaries) - 1
    assert again.result["review"]["edited"] is True and again.result["review"]["n_edits"] == 1
    written = json.loads((folder / "result.json").read_text())
    assert written["bands"]["boundaries"] == len(again.segmentation.boundaries)


def test_a_review_from_another_scan_is_not_applied(analysed):
    _, _, analysis = analysed
    review = _review(analysis, [{"op": "reject", "id": int(analysis.auto_segmentation.boundaries[3].id)}])
    review["scan_sha256"] = review["basis"]["scan_sha256"] = "0" * 64
    other = pipeline.downstream(analysis.specimen, analysis.auto_segmentation, review, analysis.params)
    assert len(other.segmentation.boundaries) == len(analysis.auto_segmentation.boundaries)
    assert other.review.edited is False and other.review.ignored
    assert any("review.json does not fit" in w for w in other.result["warnings"])


def test_cli_report_rebuilds_a_stale_report(analysed, tmp_path):
    _, out, _ = analysed
    folder = _copy(out, tmp_path)
    (folder / "report.html").rename(folder / "report.stale.html")
    proc = subprocess.run([sys.executable, "-m", "bandgeo", "report", str(folder), "--format", "html"],
                          capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    assert (folder / "report.html").is_file() and not (folder / "report.stale.html").exists()


def test_cli_analyze_that_exits_2_late_leaves_the_folder_as_it_was(analysed, tmp_path):
    # issue 15 F5: an analyze that fails after the scan was read (here on an unreadable review.json)
    # must not have replaced the segmentation or the specimen cache of the folder.
    scan, out, _ = analysed
    folder = _copy(out, tmp_path)
    (folder / "review.json").write_text("{ not json")
    before = _snapshot(folder)
    proc = subprocess.run([sys.executable, "-m", "bandgeo", "analyze", str(scan), "--out", str(folder),
                           "--simulations", "99"], capture_output=True, text=True)
    assert proc.returncode == 2, proc.stderr
    assert proc.stderr.count("\n") == 1 and "review.json" in proc.stderr
    assert _snapshot(folder) == before
