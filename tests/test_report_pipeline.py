"""End to end: a forward-model specimen (bandgeo.synth) through 'bandgeo analyze', then the report
rebuilt from the saved folder by 'bandgeo report DIR'.

The specimen has no annual cycle at all (annual and sway amplitudes zero in the forward model, the
oracle), so the one right outcome is "no significant annual cycle" and a report that gives no
days-per-year number."""
from __future__ import annotations

import json
import re
import subprocess
import sys

import numpy as np
import pytest

from bandgeo.pipeline import analyze
from bandgeo.synth import SynthParams, simulate, write_specimen


@pytest.fixture(scope="module")
def analysed(tmp_path_factory):
    root = tmp_path_factory.mktemp("e2e")
    params = SynthParams(days_per_year=30.0, years=3.0, mean_thickness_mm=0.25, sampling="anisotropic",
                         ring_vertices=32, rings_per_lamina=3.0, seed=11, annual_amplitude=0.0,
                         sway_amplitude_deg=0.0)
    scan = root / "KRB-31 scan.PLY"                 # a space and an upper-case extension on purpose
    write_specimen(simulate(params), scan)
    out = root / "KRB-31 out"
    state = analyze(scan, out, n_sim=99, seed=4)
    return scan, out, state


def test_analyze_writes_the_report_outputs(analysed):
    _, out, state = analysed
    for name in ("report.html", "report.pdf", "bands.csv", "spectra.csv", "labelled_mesh.ply", "result.json"):
        assert (out / name).is_file() and (out / name).stat().st_size > 0, name
    html = (out / "report.html").read_text(encoding="utf-8")
    result = json.loads((out / "result.json").read_text())
    assert result["schema"] == "bandgeo.result/1"
    assert result["provenance"]["input_sha256"] in html


def test_report_of_a_record_with_no_annual_cycle_gives_no_estimate(analysed):
    _, out, _ = analysed
    html = (out / "report.html").read_text(encoding="utf-8")
    dpy = json.loads((out / "result.json").read_text())["days_per_year"]
    # the forward model put no annual cycle in: claiming one would be a false positive
    assert dpy["significant"] is False and dpy["estimate"] is None
    assert "No significant annual cycle" in html


def test_labelled_mesh_matches_the_saved_segmentation(analysed):
    import trimesh

    _, out, state = analysed
    mesh = trimesh.load(out / "labelled_mesh.ply", process=False)   # reference reader: trimesh
    band = mesh.metadata["_ply_raw"]["vertex"]["data"]["band"]
    np.testing.assert_array_equal(band, state.segmentation.vertex_band)
    # every band found by the segmentation appears in the mesh, with -1 for the unbanded rest
    assert set(np.unique(band)) - {-1} == set(np.unique(state.segmentation.vertex_band)) - {-1}


def test_cli_rebuilds_the_report_from_the_folder(analysed):
    scan, out, _ = analysed
    scan_bytes = scan.read_bytes()
    result_before = json.loads((out / "result.json").read_text())
    (out / "report.html").unlink()
    proc = subprocess.run([sys.executable, "-m", "bandgeo.cli", "report", str(out), "--format", "html"], capture_output=True,
                          text=True)
    assert proc.returncode == 0, proc.stderr
    assert re.search(r"wrote .*report\.html", proc.stdout)
    assert (out / "report.html").is_file()
    assert scan.read_bytes() == scan_bytes
    # result.json is rewritten beside the report so that the two agree; with no review edits in between
    # every finding is the same (only the timings and creation time in provenance may differ).
    result_after = json.loads((out / "result.json").read_text())
    for key in ("days_per_year", "bands", "daily_test", "length_of_day_hours", "warnings"):
        assert result_after[key] == result_before[key], key
