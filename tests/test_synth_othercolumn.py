"""benchmarks/othercolumn.py, the independent check generator: sound meshes, the thickness model it
claims, and truth planes that agree with its grooves (read the same way as bandgeo.synth's)."""
import json
import sys
from pathlib import Path

import numpy as np
import pytest
import trimesh

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "benchmarks"))
import othercolumn  # noqa: E402

from test_synth_truth import count_grooves  # noqa: E402

SMALL = dict(years=0.25, semi_axes_mm=(2.0, 1.5), seed=3)


@pytest.fixture(scope="module")
def column():
    return othercolumn.make_column(**SMALL)


def test_mesh_is_closed_outward_and_has_the_elliptical_volume(column):
    """trimesh (reference library): watertight, consistently wound, and the volume of a stack of
    horizontal ellipses, the integral of pi a(z) b(z) dz (analytic, trapezoid rule), within 2 %."""
    v, f, truth = column
    mesh = trimesh.Trimesh(v, f, process=False)
    assert mesh.is_watertight and mesh.is_winding_consistent
    p = dict(othercolumn.DEFAULTS, **SMALL)
    z1 = truth["mesh"]["column_height_z_mm"]
    zf = np.linspace(0.0, 1.0, 2001)
    a0, b0 = p["semi_axes_mm"]
    a = a0 * (1.0 + p["semi_axis_drift"] * np.sin(2 * np.pi * (0.7 * zf + 0.1)))
    b = b0 * (1.0 + p["semi_axis_drift"] * np.sin(2 * np.pi * (1.1 * zf + 0.6)))
    area = np.pi * a * b
    expected = float(np.sum(0.5 * (area[1:] + area[:-1]) * np.diff(zf)) * z1)
    assert mesh.volume == pytest.approx(expected, rel=0.02)


def test_gamma_renewal_counts_and_mean_thickness():
    """Renewal theory (Cox 1962, Renewal Theory, ch. 4): with intervals of mean 1 day and variance
    1/k, the count in t days has mean ~ t and variance ~ t / k; the mean thickness is the expected
    thickness, because the seasonal rate averages to 1 over whole years and the interval is
    independent of it (analytic)."""
    years, dpy, k = 3.0, 380.0, 6.0
    counts, means = [], []
    for seed in range(40):
        t, h = othercolumn._record(dict(othercolumn.DEFAULTS, years=years, days_per_year=dpy, gamma_shape=k),
                                   np.random.default_rng(seed))
        counts.append(t.size)
        means.append(h.mean())
    t_days = years * dpy
    assert np.mean(counts) == pytest.approx(t_days, abs=4 * np.sqrt(t_days / k / len(counts)) + 1)
    assert np.var(counts, ddof=1) == pytest.approx(t_days / k, rel=0.6)
    se = np.std(means, ddof=1) / np.sqrt(len(means))
    assert abs(np.mean(means) - othercolumn.DEFAULTS["mean_thickness_mm"]) < 4 * se + 1e-3


def test_truth_planes_match_the_grooves(tmp_path):
    """Grooves counted along the truth's boundary planes (the reading test_synth_truth applies to
    bandgeo.synth): one per lamina, within 5 % (analytic: N boundaries over N mean thicknesses).
    A circular section here, because that reading averages the radius around the column."""
    v, f, truth = othercolumn.make_column(**dict(SMALL, semi_axes_mm=(1.8, 1.8), semi_axis_drift=0.0))
    mesh, tpath = othercolumn.write_column(tmp_path / "other col.ply", v, f, truth)
    truth = json.loads(tpath.read_text())
    found, length, positions, (s0, s1), _ = count_grooves(mesh, truth)
    thickness = np.asarray(truth["laminae"]["thickness_mm"])
    assert found / length == pytest.approx(1.0 / thickness.mean(), rel=0.05)
    h = np.asarray(truth["boundaries"]["heights_mm"])
    h = h[(h > s0) & (h < s1)]
    assert np.median(np.abs(positions[:, None] - h[None, :]).min(axis=1)) < 0.15 * thickness.mean()


def test_truth_has_the_synth_schema_fields(column):
    _, _, truth = column
    n = truth["laminae"]["n_recorded"]
    b = truth["boundaries"]
    for key in ("heights_mm", "centres_mm", "normals", "centres_file", "normals_file", "inclination_deg",
                "azimuth_deg", "thickness_above_mm"):
        assert len(b[key]) == n + 1, key
    assert truth["schema"] == "bandgeo.synth-truth/1"
    n_ = np.asarray(b["normals"])
    np.testing.assert_allclose(np.linalg.norm(n_, axis=1), 1.0, atol=1e-12)
    # Heights are arc lengths along the axis polyline through the centres (analytic).
    c = np.asarray(b["centres_mm"])
    arc = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(c, axis=0), axis=1))])
    np.testing.assert_allclose(b["heights_mm"], arc, rtol=1e-9, atol=1e-9)
    with pytest.raises(TypeError):
        othercolumn.make_column(radius_mm=3.0)


def test_random_pose_frames_map_the_file_back_to_the_specimen():
    """In a random pose the truth's specimen_from_file takes the file back to the specimen frame: the
    base centre to the origin and the top plane's centre to its specimen position (analytic)."""
    v, f, truth = othercolumn.make_column(**dict(SMALL, pose="random", years=0.1))
    m = np.asarray(truth["frames"]["specimen_from_file"])
    c_file = np.asarray(truth["boundaries"]["centres_file"])
    c_mm = np.asarray(truth["boundaries"]["centres_mm"])
    np.testing.assert_allclose(c_file @ m[:3, :3].T + m[:3, 3], c_mm, atol=1e-9)
    up = np.asarray(truth["frames"]["paleo_up_file"])
    spec = v @ m[:3, :3].T + m[:3, 3]
    assert spec[:, 2].min() == pytest.approx(0.0, abs=0.1)  # the base cut at z = 0 (noise 0.016 mm)
    assert np.linalg.norm(up) == pytest.approx(1.0)
