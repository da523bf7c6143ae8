"""The bundled sample specimens: small, regenerable byte for byte, loadable, and consistent with their
truth files and specimen sheets."""
import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import open3d as o3d
import pytest
import trimesh
from astropy.timeseries import LombScargle

from bandgeo.constants import TRUTH_SCHEMA

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "sample_meshes"
STEMS = {"KRB-07_annual": "KRB-07", "KRB-12_null": "KRB-12", "KRB-31_anisotropic": "KRB-31"}


def _truth(stem):
    return json.loads((SAMPLES / f"{stem}.truth.json").read_text())


def test_samples_are_small():
    sizes = {p.name: p.stat().st_size for p in SAMPLES.iterdir() if p.is_file()}
    assert all(size <= 10 * 2**20 for size in sizes.values())
    assert sum(sizes.values()) <= 25 * 2**20


def test_make_samples_regenerates_the_same_bytes(tmp_path):
    proc = subprocess.run([sys.executable, str(SAMPLES / "make_samples.py"), "--out", str(tmp_path)],
                          capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    for path in tmp_path.iterdir():
        assert path.read_bytes() == (SAMPLES / path.name).read_bytes(), path.name


@pytest.mark.parametrize("stem", sorted(STEMS))
def test_sample_loads_and_matches_its_truth(stem):
    truth = _truth(stem)
    assert truth["schema"] == TRUTH_SCHEMA
    path = SAMPLES / f"{stem}.ply"
    tm = trimesh.load(path, process=False)
    om = o3d.io.read_triangle_mesh(str(path))
    assert len(tm.vertices) == len(om.vertices) == truth["mesh"]["n_vertices"]
    assert len(tm.faces) == len(om.triangles) == truth["mesh"]["n_faces"]
    lam = truth["laminae"]
    assert len(truth["boundaries"]["heights_mm"]) == lam["n_recorded"] + 1
    assert lam["recorded_laminae_per_year"] == pytest.approx(lam["n_recorded"] / lam["years"])


@pytest.mark.parametrize("stem", sorted(STEMS))
def test_sheet_gives_the_truth_paleo_up_after_bedding_correction(stem):
    """The scan stage (bandgeo.scan) reading each sheet recovers the truth's paleo-vertical."""
    scan = pytest.importorskip("bandgeo.scan")
    sheet = scan.read_sheet(SAMPLES / f"{STEMS[stem]}.sheet.toml")
    truth = _truth(stem)
    assert sheet.specimen_id == STEMS[stem] and sheet.units == truth["units"]
    assert sheet.formation == "Karrabin Formation" and sheet.collector == "A. Okonkwo-Reyes"
    specimen = scan.prepare(scan.load_scan(SAMPLES / f"{stem}.ply"), sheet=sheet)
    rot = specimen.scan_to_specimen[:3, :3] / specimen.mm_per_unit
    up = np.array(truth["frames"]["paleo_up_file"])
    assert rot[2] @ up > np.cos(np.radians(0.01))
    if sheet.north is not None:
        assert rot[1] @ np.array(truth["frames"]["north_file"]) > np.cos(np.radians(0.01))


def _annual_amplitude(truth):
    lam = truth["laminae"]
    ls = LombScargle(np.array(lam["day_index"], float), np.array(lam["thickness_mm"]), center_data=False)
    offset, s, c = ls.model_parameters(1.0 / truth["params"]["days_per_year"])
    return np.hypot(s, c) / offset


def test_annual_sample_has_a_cycle_and_null_sample_has_none():
    # Least-squares sinusoid at the annual period (astropy LombScargle.model_parameters).
    assert _annual_amplitude(_truth("KRB-07_annual")) == pytest.approx(0.35, abs=0.04)
    assert _annual_amplitude(_truth("KRB-12_null")) < 0.05
    null = _truth("KRB-12_null")
    assert null["params"]["sway_amplitude_deg"] == 0 and np.ptp(null["laminae"]["sway_deg"]) == 0


@pytest.mark.parametrize("stem", sorted(STEMS))
def test_sample_grooves_match_its_truth(stem):
    """Grooves counted on the re-read sample (see test_synth_truth.py) per mm = 1 / mean thickness, 5%."""
    from test_synth_truth import count_grooves

    truth = _truth(stem)
    found, length, _, _, _ = count_grooves(SAMPLES / f"{stem}.ply", truth)
    assert found / length == pytest.approx(1.0 / np.mean(truth["laminae"]["thickness_mm"]), rel=0.05)
