"""Forward-model specimens: same seed same bytes, files readable by trimesh and open3d, sound geometry,
one-line errors for bad parameters."""
import json
import subprocess
import sys

import numpy as np
import open3d as o3d
import pytest
import trimesh

from bandgeo.errors import ParameterError
from bandgeo.synth import SynthParams, simulate, truth_path, write_specimen

SMALL = dict(days_per_year=60, years=1.2, radius_mm=1.2, mean_thickness_mm=0.3, rings_per_lamina=3)


def _write(tmp_path, name, **kw):
    params = SynthParams(**{**SMALL, **kw})
    return write_specimen(simulate(params), tmp_path / name)


def test_same_seed_same_bytes_and_different_seed_differs(tmp_path):
    a = _write(tmp_path / "a", "s.ply", seed=7, holes=2, hiatus_rate_per_year=5)
    b = _write(tmp_path / "b", "s.ply", seed=7, holes=2, hiatus_rate_per_year=5)
    c = _write(tmp_path / "c", "s.ply", seed=8, holes=2, hiatus_rate_per_year=5)
    assert a["mesh"].read_bytes() == b["mesh"].read_bytes()
    assert a["truth"].read_bytes() == b["truth"].read_bytes()
    assert a["mesh"].read_bytes() != c["mesh"].read_bytes()
    assert json.loads(a["truth"].read_text())["seed"] == 7


@pytest.mark.parametrize("ext", ["ply", "PLY", "obj", "stl"])
def test_files_load_in_trimesh_and_open3d(tmp_path, ext):
    spec = simulate(SynthParams(**SMALL, seed=3))
    out = write_specimen(spec, tmp_path / f"with space.{ext}")
    assert out["truth"] == tmp_path / "with space.truth.json"
    tm = trimesh.load(out["mesh"], process=False)
    om = o3d.io.read_triangle_mesh(str(out["mesh"]))
    if ext.lower() == "stl":
        # STL stores every triangle's corners separately; the face counts must still agree.
        assert len(tm.faces) == len(om.triangles) == spec.n_faces
        return
    assert len(tm.vertices) == len(om.vertices) == spec.n_vertices
    assert len(tm.faces) == len(om.triangles) == spec.n_faces
    np.testing.assert_array_equal(np.asarray(tm.faces), spec.faces)
    tol = 1e-6 * np.abs(spec.vertices).max()
    np.testing.assert_allclose(np.asarray(tm.vertices), spec.vertices, rtol=0, atol=tol)
    ov = np.asarray(om.vertices)
    if ext.lower() == "obj":
        # open3d renumbers OBJ vertices in order of first use by a face: compare the corners of each face.
        np.testing.assert_allclose(ov[np.asarray(om.triangles)], spec.vertices[spec.faces], rtol=0, atol=tol)
    else:
        np.testing.assert_allclose(ov, spec.vertices, rtol=0, atol=tol)
    assert om.has_vertex_colors()
    rgb = np.asarray(tm.visual.vertex_colors)[:, :3]
    assert np.abs(rgb.astype(int) - spec.colors.astype(int)).max() <= 1


def test_closed_column_is_watertight_with_outward_normals(tmp_path):
    p = SynthParams(**SMALL, pose="random", units="cm", seed=4, radius_variation=0.0, dome_height_mm=0.0,
                    top="flat", groove_depth_mm=0.0, scanner_noise_mm=0.0)
    out = write_specimen(simulate(p), tmp_path / "c.ply")
    mesh = trimesh.load(out["mesh"], process=False)
    truth = json.loads(out["truth"].read_text())
    # trimesh's own checks: closed, consistently wound, and positive signed volume (outward normals).
    assert mesh.is_watertight and mesh.is_winding_consistent
    length = truth["mesh"]["column_length_mm"]
    # A straight-ish cylinder: volume pi R^2 L (analytic), file in cm so volume in cm^3.
    expected = np.pi * p.radius_mm ** 2 * length / 1000.0
    assert mesh.volume == pytest.approx(expected, rel=0.03)


def test_holes_open_the_wall_and_the_base_can_be_open(tmp_path):
    out = _write(tmp_path, "h.ply", holes=3, seed=9, pose="identity")
    mesh = trimesh.load(out["mesh"], process=False)
    assert not mesh.is_watertight
    # trimesh.outline() gives one closed curve per boundary loop: three holes, nothing else.
    assert len(mesh.outline().entities) == 3
    opened = trimesh.load(_write(tmp_path, "o.ply", base="open", top="open")["mesh"], process=False)
    assert len(opened.outline().entities) == 2


def test_truth_frame_matches_the_mesh(tmp_path):
    """The paleo-up and growth direction in the truth file agree with the mesh's long axis."""
    p = SynthParams(days_per_year=80, years=1.5, radius_mm=1.0, pose="random", units="in",
                    sway_amplitude_deg=0.0, mean_tilt_deg=0.0, meander_amplitude_deg=0.0, radius_variation=0.0,
                    seed=21)
    out = write_specimen(simulate(p), tmp_path / "f.ply")
    truth = json.loads(out["truth"].read_text())
    v = np.asarray(trimesh.load(out["mesh"], process=False).vertices)
    # Principal axis by SVD (numpy, analytic): the long axis of a slender cylinder.
    axis = np.linalg.svd(v - v.mean(axis=0), full_matrices=False)[2][0]
    up = np.array(truth["frames"]["paleo_up_file"])
    assert abs(axis @ up) > np.cos(np.radians(0.5))
    # Extent along the axis, converted with the truth's units, is the column length (+ dome).
    along = (v - v.mean(axis=0)) @ up * truth["mm_per_unit"]
    span = along.max() - along.min()
    assert truth["mm_per_unit"] == 25.4  # inch, by definition (common practice)
    assert span == pytest.approx(truth["mesh"]["column_length_mm"] + p.dome_height_mm, rel=0.02)
    m = np.array(truth["frames"]["file_from_specimen"])
    np.testing.assert_allclose(m @ np.array(truth["frames"]["specimen_from_file"]), np.eye(4), atol=1e-9)


def test_sway_plane_direction_is_horizontal_in_the_file_frame(tmp_path):
    spec = simulate(SynthParams(**SMALL, sway_azimuth_deg=70.0, seed=2))
    f = spec.truth["frames"]
    up, sway, north = (np.array(f[k]) for k in ("paleo_up_file", "sway_plane_direction_file", "north_file"))
    assert abs(up @ sway) < 1e-12 and np.linalg.norm(sway) == pytest.approx(1.0)
    # Angle from north in the horizontal plane, clockwise seen from above (atan2(x, y), DEVELOPERS.md).
    east = np.array(f["east_file"])
    assert np.degrees(np.arctan2(sway @ east, sway @ north)) == pytest.approx(70.0)


def test_anisotropic_sampling_has_few_vertices_per_ring():
    spec = simulate(SynthParams(**{**SMALL, "radius_mm": 4.0}, sampling="anisotropic", base="open", top="open"))
    info = spec.truth["mesh"]
    assert info["ring_vertices"] == 24 and info["n_rings"] * 24 == spec.n_vertices
    assert info["edge_around_mm"] > 5 * info["ring_spacing_mm"]
    iso = simulate(SynthParams(**SMALL)).truth["mesh"]
    # Near-equilateral: the edge around a ring is 2/sqrt(3) of the ring spacing (analytic).
    assert iso["edge_around_mm"] / iso["ring_spacing_mm"] == pytest.approx(2 / np.sqrt(3), rel=0.05)


@pytest.mark.parametrize("kw, word", [
    (dict(annual_amplitude=1.0), "annual_amplitude"),
    (dict(days_per_year=-4), "days_per_year"),
    (dict(years=0), "years"),
    (dict(ar1_phi=1.0), "ar1_phi"),
    (dict(units="furlong"), "units"),
    (dict(sampling="random"), "sampling"),
    (dict(tidal_amplitude=0.2), "days_per_synodic_month"),
    (dict(holes=1.5), "holes"),
    (dict(mean_thickness_mm=float("nan")), "mean_thickness_mm"),
    (dict(years=1e6), "years"),
])
def test_bad_parameters_give_one_line_errors(kw, word):
    with pytest.raises(ParameterError) as info:
        SynthParams(**kw)
    message = str(info.value)
    assert word in message and "\n" not in message and "but got" in message or "give" in message


def test_oversized_mesh_is_refused_before_any_work():
    p = SynthParams(years=50, radius_mm=40.0)
    assert p.estimated_faces > 80_000_000
    with pytest.raises(ParameterError, match="faces"):
        simulate(p)
    # The estimate is close to what is built (analytic ring count; caps add a little).
    small = SynthParams(**SMALL)
    assert simulate(small).n_faces == pytest.approx(small.estimated_faces, rel=0.1)


def test_unknown_extension_is_refused(tmp_path):
    spec = simulate(SynthParams(**SMALL))
    with pytest.raises(ParameterError, match="ply"):
        write_specimen(spec, tmp_path / "x.vtk")
    assert truth_path(tmp_path / "a.b.PLY").name == "a.b.truth.json"


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "bandgeo.cli", *args], capture_output=True, text=True)


def test_cli_writes_mesh_and_truth(tmp_path):
    out = tmp_path / "out dir"
    proc = _cli("synth", "--days-per-year", "50", "--years", "1", "--radius-mm", "1", "--out", str(out),
                "--name", "KRB-test", "--seed", "3", "--units", "cm", "--no-color-banding")
    assert proc.returncode == 0, proc.stderr
    assert (out / "KRB-test.ply").exists() and (out / "KRB-test.truth.json").exists()
    assert "MB" in proc.stdout or "kB" in proc.stdout
    assert "units cm" in proc.stdout
    truth = json.loads((out / "KRB-test.truth.json").read_text())
    assert truth["params"]["days_per_year"] == 50 and truth["seed"] == 3
    assert truth["params"]["color_banding"] is False


@pytest.mark.parametrize("args", [
    ["--annual-amplitude", "1.5"],
    ["--years", "abc"],
    ["--sampling", "sideways"],
    ["--tidal-amplitude", "0.2"],
    ["--name", "../up"],
])
def test_cli_bad_parameters_exit_2_with_one_line(tmp_path, args):
    proc = _cli("synth", "--out", str(tmp_path), *args)
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1 and "Traceback" not in proc.stderr
    assert proc.stderr.startswith("bandgeo: error:")
    assert not list(tmp_path.iterdir())


def test_truth_parameters_rebuild_the_same_specimen(tmp_path):
    """Every parameter and the seed are in the truth file: rebuilding from them gives the same bytes."""
    a = _write(tmp_path / "a", "s.ply", seed=12, hiatus_rate_per_year=3, days_per_synodic_month=29.5,
               tidal_amplitude=0.2)
    params = SynthParams.from_dict(json.loads(a["truth"].read_text())["params"])
    b = write_specimen(simulate(params), tmp_path / "b" / "s.ply")
    assert a["mesh"].read_bytes() == b["mesh"].read_bytes()
    with pytest.raises(ParameterError, match="unknown"):
        SynthParams.from_dict({"days_per_yr": 400})
