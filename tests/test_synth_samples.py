"""The bundled sample specimens: small, regenerable (to float tolerance), loadable, and consistent with
their truth files and specimen sheets."""
import json
import math
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
    assert all(size <= 15 * 2**20 for size in sizes.values())
    assert sum(sizes.values()) <= 50 * 2**20


def _sample_sets():
    sys.path.insert(0, str(SAMPLES))
    try:
        import make_samples
    finally:
        sys.path.remove(str(SAMPLES))
    return {"default": make_samples.SAMPLES, "legacy": make_samples.LEGACY_SAMPLES}


def _same(a, b, path="", rel=1e-6):
    """Compare the committed value ``a`` with the regenerated ``b``: every key of ``a`` (extra keys in
    ``b`` are new fields), numbers to a relative tolerance (floats need not agree to the last bit
    across machines), lists element by element."""
    if isinstance(a, dict):
        assert isinstance(b, dict), path
        for k in a:
            assert k in b, f"{path}/{k} missing"
            _same(a[k], b[k], f"{path}/{k}", rel)
    elif isinstance(a, list):
        assert isinstance(b, list) and len(a) == len(b), path
        if a and all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in a):
            np.testing.assert_allclose(np.asarray(b, float), np.asarray(a, float), rtol=rel,
                                       atol=rel * max(1.0, float(np.abs(np.asarray(a, float)).max())),
                                       err_msg=path)
        else:
            for i, (x, y) in enumerate(zip(a, b)):
                _same(x, y, f"{path}[{i}]", rel)
    elif isinstance(a, float) or isinstance(b, float):
        assert b is not None and math.isclose(a, b, rel_tol=rel, abs_tol=rel), (path, a, b)
    else:
        assert a == b, (path, a, b)


def _oriented_triangles(faces):
    """The faces as a sorted list of triangles, each turned (cyclically, which keeps its orientation)
    to start at its smallest vertex index: equal for two meshes with the same oriented triangles in any
    order."""
    f = np.asarray(faces, dtype=np.int64)
    k = np.argmin(f, axis=1)[:, None]
    f = np.take_along_axis(f, (k + np.arange(3)) % 3, axis=1)
    return f[np.lexsort(f.T[::-1])]


def test_make_samples_regenerates_the_samples(tmp_path):
    """make_samples.py rebuilds the committed files (whichever of its sets they come from): same
    faces, vertices and colours within float tolerance, same truth and sheet values."""
    sets = _sample_sets()
    committed = _truth("KRB-07_annual")["params"]
    chosen = None
    for name, samples in sets.items():
        params = dict(samples[0]["params"])
        if all(k in committed and (committed[k] == v or (isinstance(v, float) and math.isclose(committed[k], v)))
               for k, v in params.items()):
            chosen = name
    assert chosen is not None, "the committed samples match no set of make_samples.py; regenerate them"
    args = [sys.executable, str(SAMPLES / "make_samples.py"), "--out", str(tmp_path)]
    proc = subprocess.run(args + (["--legacy"] if chosen == "legacy" else []), capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    if sys.version_info >= (3, 11):
        import tomllib
    else:  # pragma: no cover - tomli is a dependency below 3.11
        import tomli as tomllib
    for path in sorted(tmp_path.iterdir()):
        ref = SAMPLES / path.name
        if path.suffix == ".ply":
            a, b = trimesh.load(ref, process=False), trimesh.load(path, process=False)
            # The same triangles, each with the same orientation; their order may differ: the end caps'
            # triangles come out in another order where numpy's SIMD paths differ in the last bit (a CPU
            # without AVX-512; seen with NPY_DISABLE_CPU_FEATURES="X86_V4 AVX512_ICL"), same surface.
            np.testing.assert_array_equal(_oriented_triangles(a.faces), _oriented_triangles(b.faces))
            va, vb = np.asarray(a.vertices), np.asarray(b.vertices)
            np.testing.assert_allclose(vb, va, rtol=0, atol=1e-5 * np.abs(va).max())
            ca = np.asarray(a.visual.vertex_colors, int)[:, :3]
            cb = np.asarray(b.visual.vertex_colors, int)[:, :3]
            assert np.abs(ca - cb).max() <= 1
        elif path.name.endswith(".json"):
            _same(json.loads(ref.read_text()), json.loads(path.read_text()))
        else:
            _same(tomllib.loads(ref.read_text()), tomllib.loads(path.read_text()))


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
    from bandgeo import scan
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
    # No annual sway (the meander, red noise, may still turn the growth direction).
    annual = null["laminae"].get("annual_sway_deg", null["laminae"]["sway_deg"])
    assert null["params"]["sway_amplitude_deg"] == 0 and np.ptp(annual) == 0


@pytest.mark.parametrize("stem", sorted(STEMS))
def test_sample_grooves_match_its_truth(stem):
    """Grooves counted on the re-read sample (see test_synth_truth.py) per mm = 1 / mean thickness, 5%."""
    from test_synth_truth import count_grooves

    truth = _truth(stem)
    found, length, _, _, _ = count_grooves(SAMPLES / f"{stem}.ply", truth)
    assert found / length == pytest.approx(1.0 / np.mean(truth["laminae"]["thickness_mm"]), rel=0.05)
