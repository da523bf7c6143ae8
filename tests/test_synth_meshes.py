"""The forward model as real scans make it: meander statistics, photogrammetric and CT meshes, truth planes.

Each test checks one outcome against an analytic value or a general-purpose reference library
(trimesh for mesh topology and volume); sources are named beside the checks.
"""
import json
import subprocess
import sys

import numpy as np
import pytest
import trimesh

from bandgeo.synth import SynthParams, simulate, simulate_laminae, write_specimen
from test_synth_truth import count_grooves, lamina_coordinates

#: A small column: 1.5 mm radius, 0.25 mm laminae, 60 laminae (a few hundred thousand faces at most).
SMALL = dict(days_per_year=60, years=1.0, radius_mm=1.5, pose="identity", seed=4)


def _specimen_frame(spec):
    m = np.linalg.inv(spec.file_from_specimen)
    return spec.vertices @ m[:3, :3].T + m[:3, 3]


def _phase(spec, heights=False):
    """Position of each vertex within its lamina (0 at the boundary below, 1 at the one above), from
    the truth's boundary planes (the test_synth_truth reading), for side-wall vertices only."""
    b = spec.truth["boundaries"]
    h = np.asarray(b["heights_mm"])
    s, r = lamina_coordinates(_specimen_frame(spec), np.asarray(b["centres_mm"]), np.asarray(b["normals"]), h)
    wall = (s > h[1]) & (s < h[-2]) & (r > 0.8 * spec.record.params.radius_mm)
    s = s[wall]
    if heights:
        return s
    k = np.clip(np.searchsorted(h, s, side="right") - 1, 0, h.size - 2)
    return (s - h[k]) / (h[k + 1] - h[k])


# ----------------------------------------------------------------------------- meander
def test_meander_is_ar1_with_the_given_variance_and_correlation():
    """Each meander component is a stationary AR(1) series with variance A^2 and autocorrelation
    phi^k, phi = exp(-1/L) (Box & Jenkins, Time Series Analysis, AR(1) autocorrelation rho_k = phi^k;
    an Ornstein-Uhlenbeck process sampled at unit steps is AR(1) with phi = exp(-dt / tau), Gillespie
    1996, Phys. Rev. E 54, 2084)."""
    amp, length = 2.0, 25.0
    phi = np.exp(-1.0 / length)
    var, r1, r10 = [], [], []
    for seed in range(12):
        p = SynthParams(days_per_year=400, years=40, annual_amplitude=0.0, sway_amplitude_deg=0.0,
                        meander_amplitude_deg=amp, meander_correlation_laminae=length, seed=seed)
        rec = simulate_laminae(p)
        for x in (rec.meander_east_deg, rec.meander_north_deg):
            x = x - x.mean()
            c0 = (x * x).mean()
            var.append(c0)
            r1.append((x[1:] * x[:-1]).mean() / c0)
            r10.append((x[10:] * x[:-10]).mean() / c0)
    # 24 series of 16000 laminae: the standard error of the pooled variance is about 2 %
    # (Bartlett: var(s^2) ~ 2 sigma^4 (1 + phi^2) / (n (1 - phi^2))).
    assert np.mean(var) == pytest.approx(amp ** 2, rel=0.06)
    assert np.mean(r1) == pytest.approx(phi, abs=0.005)
    assert np.mean(r10) == pytest.approx(phi ** 10, abs=0.03)


def test_realised_tilt_is_lean_plus_sway_plus_meander_and_in_the_truth():
    """The truth file's per-lamina tilt is the sum of its parts (analytic), and the boundary normals
    point along the growth direction that the meander turns (the inclination of each normal agrees
    with the lamina tilts about it, within the interpolation between laminae)."""
    p = SynthParams(**SMALL, sway_amplitude_deg=4.0, meander_amplitude_deg=1.5, mesh_kind="rings",
                    sampling="anisotropic")
    spec = simulate(p)
    lam = spec.truth["laminae"]
    az_u, az_m = np.radians(p.sway_azimuth_deg), np.radians(p.mean_tilt_azimuth_deg)
    east = (p.mean_tilt_deg * np.sin(az_m) + np.asarray(lam["annual_sway_deg"]) * np.sin(az_u)
            + np.asarray(lam["meander_east_deg"]))
    north = (p.mean_tilt_deg * np.cos(az_m) + np.asarray(lam["annual_sway_deg"]) * np.cos(az_u)
             + np.asarray(lam["meander_north_deg"]))
    np.testing.assert_allclose(lam["tilt_east_deg"], east, atol=1e-9)
    np.testing.assert_allclose(lam["inclination_deg"], np.hypot(east, north), atol=1e-9)
    b = spec.truth["boundaries"]
    n = np.asarray(b["normals"])
    np.testing.assert_allclose(np.linalg.norm(n, axis=1), 1.0, atol=1e-9)
    inc = np.degrees(np.arccos(n[:, 2]))
    np.testing.assert_allclose(b["inclination_deg"], inc, atol=1e-9)
    # Interior boundary i lies between laminae i-1 and i: its tilt is between theirs (+ slack).
    lo = np.minimum(lam["inclination_deg"][:-1], lam["inclination_deg"][1:])
    hi = np.maximum(lam["inclination_deg"][:-1], lam["inclination_deg"][1:])
    assert np.all((inc[1:-1] >= lo - 0.05) & (inc[1:-1] <= hi + 0.05))


# ----------------------------------------------------------------------------- photogrammetric
def test_photogrammetric_vertices_ignore_the_laminae():
    """Vertices placed without regard to the laminae sit at a uniform position within their lamina:
    within 1 % of a lamina of either boundary for 2 % of them (analytic, uniform distribution), and no
    two share a height along the axis. The ring mesh puts its vertices on rings parallel to the
    laminae: a few hundred distinct heights for tens of thousands of vertices."""
    spec = simulate(SynthParams(**SMALL, scanner_noise_mm=0.0))
    assert spec.truth["mesh"]["mesh_kind"] == "photogrammetric"
    phase = _phase(spec)
    near = np.mean((phase < 0.01) | (phase > 0.99))
    assert phase.size > 20000
    assert near == pytest.approx(0.02, abs=0.005)
    # Uniform overall: a Kolmogorov-Smirnov distance under 0.02 (scipy.stats reference distribution).
    from scipy import stats
    assert stats.kstest(phase, "uniform").statistic < 0.02
    # On a straight column (boundary planes all horizontal) a ring mesh has one height per ring.
    straight = dict(SMALL, scanner_noise_mm=0.0, sway_amplitude_deg=0.0, mean_tilt_deg=0.0,
                    meander_amplitude_deg=0.0)
    distinct = lambda s: np.unique(np.round(s / 1e-6)).size / s.size  # noqa: E731
    assert distinct(_phase(simulate(SynthParams(**straight)), heights=True)) > 0.9
    assert distinct(_phase(simulate(SynthParams(**straight, mesh_kind="rings")), heights=True)) < 0.05


def test_photogrammetric_edges_are_isotropic_and_near_the_target_length():
    """Near-isotropic triangles: edge directions in the wall's tangent plane show no preferred angle to
    the axis, mean cos^2 = 1/2 (analytic for uniform directions, and exactly so for any equilateral
    lattice: three directions 60 degrees apart), and edge lengths near the target."""
    p = SynthParams(**SMALL, scanner_noise_mm=0.0, smoothing_iterations=0, mean_tilt_deg=0.0,
                    sway_amplitude_deg=0.0, meander_amplitude_deg=0.0, groove_depth_mm=0.0,
                    radius_variation=0.0, base="open", top="open")
    spec = simulate(p)
    v = _specimen_frame(spec)
    e = v[spec.faces[:, [1, 2, 0]]] - v[spec.faces]
    e = e.reshape(-1, 3)
    length = np.linalg.norm(e, axis=1)
    cos2 = (e[:, 2] / length) ** 2
    assert cos2.mean() == pytest.approx(0.5, abs=0.03)
    assert np.median(length) == pytest.approx(p.edge_length_mm, rel=0.1)
    # The anisotropic ring mesh fails the same check (its edges are mostly around the column).
    ring = simulate(p.replace(mesh_kind="rings", sampling="anisotropic"))
    vr = _specimen_frame(ring)
    er = (vr[ring.faces[:, [1, 2, 0]]] - vr[ring.faces]).reshape(-1, 3)
    assert ((er[:, 2] / np.linalg.norm(er, axis=1)) ** 2).mean() < 0.4


def test_photogrammetric_mesh_is_closed_and_wound_outward(tmp_path):
    """trimesh (reference library): watertight, consistent winding, positive volume near pi R^2 L."""
    p = SynthParams(**{**SMALL, "pose": "random"}, radius_variation=0.0, dome_height_mm=0.0, top="flat",
                    sway_amplitude_deg=0.0, mean_tilt_deg=0.0, meander_amplitude_deg=0.0, units="cm")
    out = write_specimen(simulate(p), tmp_path / "p.ply")
    mesh = trimesh.load(out["mesh"], process=False)
    truth = json.loads(out["truth"].read_text())
    assert mesh.is_watertight and mesh.is_winding_consistent
    expected = np.pi * p.radius_mm ** 2 * truth["mesh"]["column_length_mm"] / 1000.0  # cm^3
    assert mesh.volume == pytest.approx(expected, rel=0.03)


def test_photogrammetric_noise_and_smoothing():
    """Vertex noise along the normal: with no smoothing, the radial residual about the noise-free
    surface has the given standard deviation; Taubin smoothing lowers it (a low-pass filter, Taubin
    1995), and the truth reports what remains."""
    base = dict(SMALL, sway_amplitude_deg=0.0, mean_tilt_deg=0.0, meander_amplitude_deg=0.0,
                groove_depth_mm=0.0, radius_variation=0.0, base="open", top="open")
    clean = simulate(SynthParams(**base, scanner_noise_mm=0.0, smoothing_iterations=0))
    noisy = simulate(SynthParams(**base, scanner_noise_mm=0.02, smoothing_iterations=0))
    r0 = np.hypot(*_specimen_frame(clean)[:, :2].T)
    r1 = np.hypot(*_specimen_frame(noisy)[:, :2].T)
    assert np.std(r1 - r0) == pytest.approx(0.02, rel=0.05)
    smooth = simulate(SynthParams(**base, scanner_noise_mm=0.02, smoothing_iterations=3))
    rs = np.hypot(*_specimen_frame(smooth)[:, :2].T)
    left = smooth.truth["mesh"]["noise_mm_after_smoothing"]
    assert 0.2 * 0.02 < left < 0.8 * 0.02
    # The radius of a smoothed cylinder barely shrinks (Taubin's lambda|mu pass is non-shrinking).
    assert np.median(rs) == pytest.approx(np.median(r0), abs=0.005)


# ----------------------------------------------------------------------------- CT
def test_ct_mesh_is_watertight_and_on_the_analytic_cylinder():
    """Marching cubes of a straight cylinder (no sway, grooves or noise), chunked and welded: trimesh
    finds it watertight, and every side-wall vertex lies within half a voxel of the analytic surface
    r = R (linear interpolation of a signed distance, Lorensen & Cline 1987)."""
    p = SynthParams(**SMALL, mesh_kind="ct", voxel_size_mm=0.1, scanner_noise_mm=0.0, groove_depth_mm=0.0,
                    radius_variation=0.0, sway_amplitude_deg=0.0, mean_tilt_deg=0.0,
                    meander_amplitude_deg=0.0, top="flat")
    import bandgeo.synth.ct as ct
    old = ct.CHUNK_VOXELS
    ct.CHUNK_VOXELS = 60_000  # force several chunks (and seams) on this small column
    try:
        spec = simulate(p)
    finally:
        ct.CHUNK_VOXELS = old
    info = spec.truth["mesh"]
    assert info["chunks"] >= 3 and info["seam_vertices_unmatched"] == 0
    mesh = trimesh.Trimesh(spec.vertices, spec.faces, process=False)
    assert mesh.is_watertight and mesh.is_winding_consistent
    v = _specimen_frame(spec)
    length = info["column_length_mm"]
    wall = (v[:, 2] > 0.2) & (v[:, 2] < length - 0.2)
    r = np.hypot(v[wall, 0], v[wall, 1])
    assert np.abs(r - p.radius_mm).max() < 0.5 * p.voxel_size_mm
    assert mesh.volume == pytest.approx(np.pi * p.radius_mm ** 2 * length, rel=0.02)


def test_ct_mesh_of_a_meandering_column_lies_on_its_implicit_surface():
    """Swaying, meandering, grooved column: watertight, and every vertex within half a voxel of the
    generator's implicit surface f = 0 (f is within a few per cent of a signed distance)."""
    from bandgeo.synth.ct import _Solid
    from bandgeo.synth.surface import Centreline, RadiusFunction

    p = SynthParams(**SMALL, mesh_kind="ct", scanner_noise_mm=0.0, sway_amplitude_deg=6.0,
                    meander_amplitude_deg=1.5)
    spec = simulate(p)
    mesh = trimesh.Trimesh(spec.vertices, spec.faces, process=False)
    assert mesh.is_watertight and mesh.is_winding_consistent and mesh.volume > 0
    # Rebuild the implicit solid with the same draws as the builder (radius first from "geometry").
    from bandgeo.synth.specimen import _streams
    rec = spec.record
    vox = p.voxel_size_mm
    top = float(rec.boundary_heights_mm[-1])
    step = min(vox, p.mean_thickness_mm / 4.0) / 2.0
    cl = Centreline.from_record(rec, np.linspace(0.0, top, int(np.ceil(top / step)) + 1))
    solid = _Solid(rec, cl, RadiusFunction(p, top, _streams(p.seed)["geometry"], step), 0.5 * vox)
    v = _specimen_frame(spec)
    s, _, _ = cl.locate(v)
    f = np.concatenate([solid.f(v[k:k + 1], s[k]) for k in range(0, v.shape[0], max(1, v.shape[0] // 400))])
    assert np.abs(f).max() < 0.5 * vox


# ----------------------------------------------------------------------------- truth planes
@pytest.mark.parametrize("kind", ["photogrammetric", "ct"])
def test_truth_planes_match_the_grooves_of_unaligned_meshes(tmp_path, kind):
    """Grooves counted on the re-read mesh along the truth's boundary planes (the test_synth_truth
    reading, trimesh reader): one per lamina, within 5 % of 1 / mean thickness (analytic: N boundaries
    over N mean thicknesses), and sitting on the listed boundaries. Sampled finely (a fifth of a
    lamina), so that even the season's thinnest laminae span several steps: this checks the planes,
    not the resolution."""
    p = SynthParams(days_per_year=100, years=1.2, radius_mm=1.3, mesh_kind=kind, sway_amplitude_deg=5.0,
                    meander_amplitude_deg=1.0, mean_tilt_deg=3.0, scanner_noise_mm=0.01, units="cm", seed=6,
                    edge_length_mm=0.05, voxel_size_mm=0.05)
    written = write_specimen(simulate(p), tmp_path / f"{kind}.ply")
    truth = json.loads(written["truth"].read_text())
    found, length, positions, (s0, s1), _ = count_grooves(written["mesh"], truth)
    thickness = np.asarray(truth["laminae"]["thickness_mm"])
    assert found / length == pytest.approx(1.0 / thickness.mean(), rel=0.05)
    h = np.asarray(truth["boundaries"]["heights_mm"])
    h = h[(h > s0) & (h < s1)]
    offset = np.abs(positions[:, None] - h[None, :]).min(axis=1)
    assert np.median(offset) < 0.15 * thickness.mean()


def test_same_seed_same_photogrammetric_bytes(tmp_path):
    a = write_specimen(simulate(SynthParams(**SMALL, holes=1)), tmp_path / "a" / "s.ply")
    b = write_specimen(simulate(SynthParams(**SMALL, holes=1)), tmp_path / "b" / "s.ply")
    assert a["mesh"].read_bytes() == b["mesh"].read_bytes()
    mesh = trimesh.load(a["mesh"], process=False)
    assert len(mesh.outline().entities) == 1  # one hole, nothing else open (trimesh boundary loops)


def test_legacy_ring_options_select_the_ring_mesh_and_defaults_are_realistic():
    assert SynthParams(sampling="anisotropic").mesh_kind == "rings"
    assert SynthParams(ring_vertices=30).mesh_kind == "rings"
    d = SynthParams()
    assert d.mesh_kind == "photogrammetric"
    # Realistic defaults (issue 11; USERS.md ranges, common practice): column 10-25 mm across, sway of
    # several degrees with meander, noise ~10 % and groove relief 20-30 % of a lamina.
    assert 10.0 <= 2 * d.radius_mm <= 25.0
    assert d.sway_amplitude_deg >= 3.0 and d.meander_amplitude_deg > 0
    assert d.scanner_noise_mm == pytest.approx(0.10 * d.mean_thickness_mm)
    assert 0.2 <= d.groove_depth_mm / d.mean_thickness_mm <= 0.3


def test_cli_help_lists_the_mesh_options_with_units():
    proc = subprocess.run([sys.executable, "-m", "bandgeo.cli", "synth", "--help"], capture_output=True,
                          text=True)
    assert proc.returncode == 0
    text = " ".join(proc.stdout.split("Options:", 1)[1].split())
    for option, unit in [("--mesh-kind", "photogrammetric"), ("--edge-length-mm", "mm"),
                         ("--voxel-size-mm", "mm"), ("--meander-amplitude-deg", "degrees"),
                         ("--meander-correlation-laminae", "laminae"), ("--radius-taper", "base to top"),
                         ("--smoothing-iterations", "Taubin")]:
        assert option in text
        after = text.split(option, 1)[1][:300]
        assert unit in after, option


def test_cli_writes_a_ct_specimen(tmp_path):
    proc = subprocess.run([sys.executable, "-m", "bandgeo.cli", "synth", "--days-per-year", "40", "--years",
                           "1", "--radius-mm", "1", "--mesh-kind", "ct", "--out", str(tmp_path), "--seed", "2"],
                          capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    truth = json.loads((tmp_path / "synth.truth.json").read_text())
    assert truth["mesh"]["mesh_kind"] == "ct" and "ct mesh" in proc.stdout


def test_radius_taper_narrows_the_column():
    """radius_taper = -0.3: the radius falls linearly to 70 % at the top (analytic), read from the mesh
    as the distance of wall vertices from the truth's boundary planes' axis."""
    p = SynthParams(**SMALL, radius_taper=-0.3, radius_variation=0.0, groove_depth_mm=0.0,
                    scanner_noise_mm=0.0, top="flat", meander_amplitude_deg=0.5)
    spec = simulate(p)
    b = spec.truth["boundaries"]
    h = np.asarray(b["heights_mm"])
    s, r = lamina_coordinates(_specimen_frame(spec), np.asarray(b["centres_mm"]), np.asarray(b["normals"]), h)
    top = h[-1]
    low = (s > 0.1 * top) & (s < 0.2 * top) & (r > 0.5 * p.radius_mm)
    high = (s > 0.8 * top) & (s < 0.9 * top) & (r > 0.5 * p.radius_mm)
    expected = (1 - 0.3 * 0.85) / (1 - 0.3 * 0.15)
    assert np.median(r[high]) / np.median(r[low]) == pytest.approx(expected, rel=0.02)


@pytest.mark.parametrize("kw, word", [
    (dict(mesh_kind="laser"), "mesh_kind"),
    (dict(edge_length_mm=0.0), "edge_length_mm"),
    (dict(voxel_size_mm=-1.0), "voxel_size_mm"),
    (dict(meander_amplitude_deg=-1.0), "meander_amplitude_deg"),
    (dict(meander_correlation_laminae=0.5), "meander_correlation_laminae"),
    (dict(radius_taper=-1.0), "radius_taper"),
    (dict(edge_aspect=0.5), "edge_aspect"),
])
def test_bad_new_parameters_give_one_line_errors(kw, word):
    from bandgeo.errors import ParameterError
    with pytest.raises(ParameterError) as info:
        SynthParams(**kw)
    assert word in str(info.value) and "\n" not in str(info.value)


def test_meshes_too_coarse_or_folding_are_refused_before_meshing():
    from bandgeo.errors import ParameterError
    with pytest.raises(ParameterError, match="edge_length_mm"):
        simulate(SynthParams(**SMALL, edge_length_mm=1.4))
    with pytest.raises(ParameterError, match="fold"):
        simulate(SynthParams(**SMALL, meander_amplitude_deg=8.0, meander_correlation_laminae=2.0))


@pytest.mark.parametrize("args", [["--mesh-kind", "laser"], ["--edge-length-mm", "0"]])
def test_cli_bad_mesh_options_exit_2_with_one_line(tmp_path, args):
    proc = subprocess.run([sys.executable, "-m", "bandgeo.cli", "synth", "--out", str(tmp_path), *args],
                          capture_output=True, text=True)
    assert proc.returncode == 2 and proc.stderr.count("\n") == 1 and "Traceback" not in proc.stderr
    assert not list(tmp_path.iterdir())
