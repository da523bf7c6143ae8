"""Segmentation data objects, save/load, band assignment, repair rules and the estimator's conventions."""
import json
from types import SimpleNamespace

import numpy as np
import pytest

from bandgeo.constants import SEGMENTATION_SCHEMA
from bandgeo.errors import InputError, ParameterError
from bandgeo.segment import (BandSegmenter, Boundary, Centreline, Segmentation, assign_bands,
                             fit_centreline, plane_height)
from bandgeo.segment import repair as rp
from bandgeo.segment.axis import circle_centres


def tilted_axis(tilt_deg=10.0, az_deg=30.0, length=20.0):
    t = np.array([np.sin(np.radians(tilt_deg)) * np.sin(np.radians(az_deg)),
                  np.sin(np.radians(tilt_deg)) * np.cos(np.radians(az_deg)), np.cos(np.radians(tilt_deg))])
    s = np.linspace(0.0, length, 50)
    return Centreline(s, s[:, None] * t[None, :], np.repeat(t[None, :], 50, axis=0)), t


def cylinder_points(axis, t, radius=3.0, n=20000, length=20.0, seed=0):
    rng = np.random.default_rng(seed)
    s = rng.uniform(0, length, n)
    th = rng.uniform(0, 2 * np.pi, n)
    e1 = np.cross(t, [1.0, 0, 0])
    e1 /= np.linalg.norm(e1)
    e2 = np.cross(t, e1)
    return s, s[:, None] * t + radius * (np.cos(th)[:, None] * e1 + np.sin(th)[:, None] * e2)


def make_segmentation(heights=(2.0, 4.0, 7.0, 9.5)):
    axis, t = tilted_axis()
    s, v = cylinder_points(axis, t)
    bs = [Boundary.from_height(h, axis, id=i, origin="auto") for i, h in enumerate(heights)]
    band = assign_bands(v, bs, axis)
    seg = Segmentation(boundaries=bs, axis=axis, vertex_class=np.zeros(len(v), np.int8),
                       class_names=["groove", "flank", "ridge"], vertex_band=band,
                       resolution={"sampling_along_mm": 0.05, "flagged": [[4.0, 7.0, "test stretch"]]},
                       warnings=["a warning"], params={"n_classes": "bic"})
    return seg, SimpleNamespace(vertices_mm=v, faces=np.zeros((0, 3), int)), s


def test_centreline_at_and_project_on_a_straight_tilted_line():
    axis, t = tilted_axis()
    p, tan = axis.at(5.0)
    assert np.allclose(p, 5.0 * t) and np.allclose(tan, t)
    s, v = cylinder_points(axis, t, n=1000)
    s_hat, radial = axis.project(v)
    # construction: each point is s * t plus a radial offset of 3 mm
    assert np.allclose(s_hat, s, atol=1e-9)
    assert np.allclose(np.linalg.norm(radial, axis=1), 3.0)
    # beyond the ends the curve goes on straight
    assert np.allclose(axis.at(-1.0)[0], -t) and np.allclose(axis.at(25.0)[0], 25.0 * t)


def test_circle_fit_recovers_centre_of_a_partial_arc():
    # Kasa (1976) algebraic circle fit: exact on noise-free points, also on a 90-degree arc
    th = np.linspace(0, np.pi / 2, 50)
    x, y = 1.5 + 2.0 * np.cos(th), -0.5 + 2.0 * np.sin(th)
    cx, cy, r = circle_centres(np.zeros(50, dtype=np.int64), x, y, 1)
    assert cx[0] == pytest.approx(1.5) and cy[0] == pytest.approx(-0.5) and r[0] == pytest.approx(2.0)


def test_fit_centreline_follows_a_curved_column():
    # a column whose axis bends along a circle of radius 200 mm: the tangent turns by length / 200 rad
    rho, length, r = 200.0, 20.0, 3.0
    rng = np.random.default_rng(1)
    s = rng.uniform(0, length, 60000)
    th = rng.uniform(0, 2 * np.pi, 60000)
    phi = s / rho
    c = np.stack([rho * (1 - np.cos(phi)), np.zeros_like(s), rho * np.sin(phi)], 1)
    t = np.stack([np.sin(phi), np.zeros_like(s), np.cos(phi)], 1)
    e1 = np.stack([np.cos(phi), np.zeros_like(s), -np.sin(phi)], 1)
    e2 = np.array([0.0, 1.0, 0.0])
    v = c + r * (np.cos(th)[:, None] * e1 + np.sin(th)[:, None] * e2)
    axis = fit_centreline(v, np.ones(len(v), bool), np.array([0.0, 0.0, 1.0]), slab_mm=0.5, smooth_mm=1.0)
    _, tan = axis.at(np.array([5.0, 15.0]))
    expected = np.stack([np.sin([5 / rho, 15 / rho]), [0, 0], np.cos([5 / rho, 15 / rho])], 1)
    ang = np.degrees(np.arccos(np.clip(np.einsum("ij,ij->i", tan, expected), -1, 1)))
    assert np.all(ang < 0.1)
    s_hat, radial = axis.project(v)
    assert np.median(np.abs(np.linalg.norm(radial, axis=1) - r)) < 0.01
    assert np.median(np.abs(s_hat - s)) < 0.02


def test_boundary_from_height_lies_across_the_local_axis():
    axis, t = tilted_axis()
    b = Boundary.from_height(6.0, axis, id=9)
    assert b.origin == "review" and np.allclose(b.normal, t) and np.allclose(b.center_mm, 6.0 * t)
    assert plane_height(b.center_mm, b.normal, axis) == pytest.approx(6.0)
    with pytest.raises(ParameterError):
        Boundary.from_height("high", axis, id=1)
    with pytest.raises(ParameterError):
        Boundary(id=1, height_mm=1.0, center_mm=[0, 0, 0], normal=[0, 0, 0])


def test_assign_bands_matches_heights():
    seg, spec, s = make_segmentation()
    h = seg.heights_mm()
    expected = np.searchsorted(h, s, side="right") - 1
    expected[(expected < 0) | (expected >= len(h) - 1)] = -1
    assert np.array_equal(seg.vertex_band, expected)


def test_assign_bands_uses_tilted_planes():
    # two planes tilted against the axis: a point's band follows the planes, not its height
    axis, t = Centreline(np.array([0.0, 10.0]), np.array([[0, 0, 0.0], [0, 0, 10.0]]),
                         np.array([[0, 0, 1.0], [0, 0, 1.0]])), None
    n = np.array([np.sin(0.3), 0.0, np.cos(0.3)])
    bs = [Boundary(0, 2.0, [0, 0, 2.0], n), Boundary(1, 4.0, [0, 0, 4.0], n), Boundary(2, 6.0, [0, 0, 6.0], n)]
    pts = np.array([[3.0, 0, 3.2], [-3.0, 0, 2.8], [0, 0, 3.2]])
    # construction: the plane through (0, 0, h) with normal n sits at z = h - x tan(0.3) (tan 0.3 = 0.309),
    # so at x = 3 the second plane is at z = 3.07 (below the first point: band 1), and at x = -3 the
    # first plane is at z = 2.93 (above the second point: below the banded stretch, -1)
    band = assign_bands(pts, bs, axis)
    assert band.tolist() == [1, -1, 0]


def test_save_load_round_trip(tmp_path):
    seg, spec, _ = make_segmentation()
    folder = tmp_path / "out folder"
    seg.save(folder)
    doc = json.loads((folder / "segmentation.json").read_text())
    assert doc["schema"] == SEGMENTATION_SCHEMA and doc["n_bands"] == 3
    back = Segmentation.load(folder)
    assert np.allclose(back.heights_mm(), seg.heights_mm())
    assert np.array_equal(back.vertex_band, seg.vertex_band)
    assert back.class_names == seg.class_names and back.warnings == seg.warnings
    assert back.resolution["flagged"] == [[4.0, 7.0, "test stretch"]]
    assert np.allclose(back.axis.points_mm, seg.axis.points_mm)
    assert [b.origin for b in back.boundaries] == ["auto"] * 4
    # a reload reproduces the run bit for bit (JSON floats round-trip exactly; unit vectors are kept)
    assert all(np.array_equal(a.normal, b.normal) and np.array_equal(a.center_mm, b.center_mm)
               for a, b in zip(seg.boundaries, back.boundaries))
    assert np.array_equal(back.axis.tangents, seg.axis.tangents)


@pytest.mark.parametrize("damage", ["schema", "json", "labels", "missing", "count"])
def test_load_malformed_is_one_line_input_error(tmp_path, damage):
    seg, spec, _ = make_segmentation()
    seg.save(tmp_path)
    j, npz = tmp_path / "segmentation.json", tmp_path / "segmentation_labels.npz"
    if damage == "schema":
        doc = json.loads(j.read_text())
        doc["schema"] = "other/1"
        j.write_text(json.dumps(doc))
    elif damage == "json":
        j.write_text("{not json")
    elif damage == "labels":
        npz.write_bytes(b"garbage")
    elif damage == "missing":
        npz.unlink()
    elif damage == "count":
        doc = json.loads(j.read_text())
        doc["n_vertices"] = 5
        j.write_text(json.dumps(doc))
    with pytest.raises(InputError) as exc:
        Segmentation.load(tmp_path)
    assert "\n" not in str(exc.value)


def test_with_boundaries_reassigns_bands_and_keeps_the_original():
    seg, spec, s = make_segmentation()
    before = seg.vertex_band.copy()
    added = Boundary.from_height(5.5, seg.axis, id=100)
    new = seg.with_boundaries([*seg.boundaries[:3], added], spec)  # drop the top one, add one
    assert np.allclose(new.heights_mm(), [2.0, 4.0, 5.5, 7.0])
    assert np.array_equal(seg.vertex_band, before)  # the original is untouched
    assert np.all(new.vertex_band[(s > 4.0) & (s < 5.5)] == 1)
    assert np.all(new.vertex_band[(s > 5.5) & (s < 7.0)] == 2)
    assert np.all(new.vertex_band[s > 7.0] == -1)
    with pytest.raises(ParameterError):
        seg.with_boundaries([seg.boundaries[0], seg.boundaries[0]], spec)
    with pytest.raises(InputError):
        seg.with_boundaries(seg.boundaries, SimpleNamespace(vertices_mm=np.zeros((3, 3))))
    # dicts (as a review file holds them) are accepted too
    again = seg.with_boundaries([b.to_dict() for b in seg.boundaries], spec)
    assert np.array_equal(again.vertex_band, seg.vertex_band)


def ring(h, cov=1.0, rms=0.01, prom=0.5):
    return {"height": h, "coverage": cov, "rms_mm": rms, "prominence": prom, "flags": []}


def test_repair_rules():
    log = []
    rings = [ring(0.0), ring(1.0), ring(1.2, prom=0.2), ring(2.0), ring(3.0, rms=0.9), ring(3.05, cov=0.1),
             ring(4.0), ring(7.0), ring(8.0), ring(9.0)]

    def trace_weak(lo, hi):
        # one weak groove hides in the 4..7 gap at 5.5; nothing else
        return ring(5.5, prom=0.1) if lo < 5.5 < hi else None

    out, gaps = rp.repair(rings, 1.0, trace_weak, log)
    h = [r["height"] for r in out]
    # R1: 1.0 and 1.2 are doubled (0.2 < 0.4 x 1.0): the stronger (1.0) is kept
    assert 1.0 in h and 1.2 not in h
    # R2 drops the poor fit at 3.0, R3 the short arc at 3.05
    assert 3.0 not in h and 3.05 not in h
    # R4 fills 4..7 with the weak ring at 5.5, and flags the 2..4 gap? (2 mm = 2 x spacing > 1.75)
    assert 5.5 in h and any("gap filled" in r["flags"] for r in out)
    assert [2.0, 4.0, "possible missed boundary"] in gaps
    assert all(0.0 <= r["confidence"] <= 1.0 for r in out)
    gap_filled = next(r for r in out if r["height"] == 5.5)
    assert gap_filled["confidence"] < min(r["confidence"] for r in out if r["height"] != 5.5)
    assert any(line.startswith("R1") for line in log) and any(line.startswith("R2") for line in log)
    assert any(line.startswith("R3") for line in log) and any(line.startswith("R4") for line in log)


def test_estimator_convention_and_parameter_errors():
    est = BandSegmenter(n_classes=3, max_classes=4)
    assert est.get_params()["n_classes"] == 3
    assert est.set_params(max_classes=5) is est and est.max_classes == 5
    with pytest.raises(ParameterError):
        est.set_params(bogus=1)
    spec = SimpleNamespace(vertices_mm=np.zeros((10, 3)), faces=np.zeros((2, 3), int))
    feats = SimpleNamespace(mean=np.zeros((10, 3)))
    for bad in (dict(n_classes="many"), dict(max_classes=0), dict(subsample=10), dict(covariance_type="x")):
        with pytest.raises(ParameterError):
            BandSegmenter(**bad).fit(spec, feats)
    with pytest.raises(InputError):
        BandSegmenter().fit(spec, SimpleNamespace(mean=np.zeros((5, 3))))


def test_non_column_shapes_report_no_bands():
    # a sphere has no periodic relief along any axis: no boundaries, and the result says why
    import trimesh

    from bandgeo.features import compute_features

    m = trimesh.creation.icosphere(subdivisions=4, radius=5.0)
    spec = SimpleNamespace(vertices_mm=np.asarray(m.vertices), faces=np.asarray(m.faces), colors=None)
    seg = BandSegmenter().fit(spec, compute_features(spec)).segmentation_
    assert seg.boundaries == [] and seg.warnings[0].startswith("bands not resolved")
    assert np.all(seg.vertex_band == -1)
    tiny = trimesh.creation.icosphere(subdivisions=1, radius=5.0)
    spec = SimpleNamespace(vertices_mm=np.asarray(tiny.vertices), faces=np.asarray(tiny.faces), colors=None)
    with pytest.raises(InputError):
        BandSegmenter().fit(spec, compute_features(spec))


def test_mixture_posterior_matches_scikit_learn():
    # the segmenter's float32 posterior against scikit-learn's GaussianMixture.predict_proba (the
    # reference implementation of Bishop 2006, eq. 9.23), full and diagonal covariances
    from sklearn.mixture import GaussianMixture

    from bandgeo.segment import cluster

    rng = np.random.default_rng(0)
    X = np.r_[rng.normal(0, 1, (3000, 5)), rng.normal(2, 0.5, (2000, 5))].astype(np.float32)
    for kind in ("full", "diag"):
        gm = GaussianMixture(3, covariance_type=kind, random_state=0).fit(X.astype(float))
        np.testing.assert_allclose(cluster.predict_proba(gm, X), gm.predict_proba(X.astype(float)), atol=1e-4)


def test_centreline_projection_on_a_circular_arc():
    # analytic reference: a centreline bent along a circle of radius 200 mm in the x-z plane; the normal
    # plane at angle phi holds the circle's centre, so a point's foot lies at phi = atan2(z, R - x)
    # (plane geometry; arc length R phi). The projection must find it to well under a micrometre.
    from bandgeo.segment.axis import Centreline

    R = 200.0
    phi = np.linspace(0.0, 0.4, 2001)
    pts = np.stack([R * (1 - np.cos(phi)), np.zeros_like(phi), R * np.sin(phi)], axis=1)
    tan = np.stack([np.sin(phi), np.zeros_like(phi), np.cos(phi)], axis=1)
    line = Centreline(R * phi, pts, tan)
    rng = np.random.default_rng(0)
    f = rng.uniform(0.02, 0.38, 5000)
    ang = rng.uniform(-np.pi, np.pi, 5000)
    rad = rng.uniform(1.0, 8.0, 5000)
    # points at distance rad from the curve, in the normal plane at angle f
    e1 = np.stack([np.cos(f), np.zeros_like(f), -np.sin(f)], axis=1)
    e2 = np.tile([0.0, 1.0, 0.0], (len(f), 1))
    c = np.stack([R * (1 - np.cos(f)), np.zeros_like(f), R * np.sin(f)], axis=1)
    v = c + (rad * np.cos(ang))[:, None] * e1 + (rad * np.sin(ang))[:, None] * e2
    s, radial = line.project(v)
    np.testing.assert_allclose(s, R * f, atol=5e-4)
    np.testing.assert_allclose(np.linalg.norm(radial, axis=1), rad, atol=5e-4)


def test_partial_rings_at_a_slanted_cut_are_measured_against_the_wall_that_is_there():
    """A straight cylinder (radius R) with horizontal grooves every T, cut at the top by a plane tilted
    by alpha: at height h inside the cut's reach the wall exists where z_cut(phi) = z0 + R tan(alpha)
    cos(phi) > h, on a fraction arccos((h - z0) / (R tan alpha)) / pi of the circumference (analytic).
    The traced rings' ``available`` follows it, their coverage matches it (the groove is traced wherever
    the wall is), and R3 keeps a partial ring that half a circumference would have dropped."""
    from bandgeo.segment.trace import fit_boundaries
    from bandgeo.segment.unroll import Wall

    R, T, depth, z0, alpha = 5.0, 0.2, 0.02, 8.0, np.radians(20.0)
    reach = R * np.tan(alpha)  # 1.82 mm: the cut spans z0 -/+ reach around the column
    rng = np.random.default_rng(3)
    n = 400_000
    phi = rng.uniform(-np.pi, np.pi, n)
    z = rng.uniform(0.0, z0 + reach, n)
    keep = z < z0 + reach * np.cos(phi)
    phi, z = phi[keep], z[keep]
    u = (z / T) % 1.0
    relief = -depth * np.exp(-0.5 * (np.minimum(u, 1.0 - u) / 0.08) ** 2)
    r = R + relief
    v = np.column_stack([r * np.cos(phi), r * np.sin(phi), z])
    wall = Wall(idx=np.arange(len(z)), v=v, s=z, theta=phi, r=r, relief=relief, radius_mm=R)
    s = np.linspace(-1.0, 12.0, 60)
    axis = Centreline(s, np.column_stack([np.zeros_like(s), np.zeros_like(s), s]),
                      np.repeat([[0.0, 0.0, 1.0]], len(s), axis=0))
    heights = np.arange(1, int((z0 + 0.8 * reach) / T)) * T
    fit = fit_boundaries(wall, z, heights, np.full(len(heights), T), axis)
    expect = np.arccos(np.clip((heights - z0) / reach, -1.0, 1.0)) / np.pi
    inside = (heights > z0 - 0.8 * reach) & (expect > 0.2)
    assert inside.sum() >= 10
    # available: to within about two azimuth columns of 48 and the groove width's own reach
    assert np.allclose(fit["available"][inside], expect[inside], atol=0.06)
    assert np.allclose(fit["available"][heights < z0 - reach - T], 1.0)
    assert np.allclose(fit["coverage"][inside], fit["available"][inside], atol=0.06)
    # R3 keeps the partial rings whose wall is there (>= 35% of the circumference) and flags them
    log = []
    rings = [{"height": float(h), "rms_mm": float(fit["rms_mm"][i]), "coverage": float(fit["coverage"][i]),
              "available": float(fit["available"][i]), "prominence": 1.0, "flags": []}
             for i, h in enumerate(heights)]
    out, _ = rp.repair(rings, T, lambda lo, hi: None, log)
    kept = {round(r["height"], 6) for r in out}
    for i, h in enumerate(heights):
        if expect[i] >= 0.4 and h > z0 - reach:
            assert round(float(h), 6) in kept, (h, fit["coverage"][i], fit["available"][i])
        if expect[i] < 0.3:
            assert round(float(h), 6) not in kept, (h, fit["coverage"][i], fit["available"][i])
    assert any("partial ring" in r["flags"] for r in out)
    assert any(line.startswith("R3 kept a partial ring") for line in log)


def test_repair_fills_the_stretch_between_a_wall_end_and_the_first_ring():
    """R4 at the ends (common practice: a boundary missed next to the cut leaves the same gap as one
    missed inside): a weak ring inside the stretch from the wall's base to the first ring, more than
    1.5 spacings long, is added; nothing is looked for within 0.4 spacing of the cut's rim."""
    asked = []

    def trace_weak(lo, hi):
        asked.append((lo, hi))
        return ring(1.0, prom=0.1) if lo < 1.0 < hi else None

    rings = [ring(float(h)) for h in (2.0, 3.0, 4.0, 5.0, 6.0)]
    out, _ = rp.repair(rings, 1.0, trace_weak, [], ends=(0.0, 6.3))
    h = [r["height"] for r in out]
    assert h[0] == 1.0 and "gap filled" in out[0]["flags"]
    assert asked[0] == pytest.approx((0.4, 1.6))
    assert len(asked) == 1  # 0.3 mm above the last ring is no gap
    out, _ = rp.repair([ring(float(h)) for h in (2.0, 3.0, 4.0, 5.0, 6.0)], 1.0, trace_weak, [])
    assert [r["height"] for r in out][0] == 2.0  # without the wall's ends: as before


def test_repair_r7_adds_weak_rings_confirmed_in_their_own_frame():
    """R7 (common practice: a groove that stands out in its own plane is a boundary even where the
    averaged profile shows it faintly; one groove traced from both flanks is not two): the weak ring
    at 2.4 passes every test and is added; the others each fail one."""
    rings = [ring(float(h)) for h in (0.0, 1.0, 2.0, 3.0, 4.0, 5.0)]

    def weak(h, z=6.0, gz=8.0, **kw):
        r = ring(h, prom=0.1, **kw)
        r.update(z=z, groove_z=gz)
        return r

    good = weak(2.4)
    others = [weak(3.5, gz=3.0),            # its own plane shows no groove
              weak(1.5, z=2.0),             # too faint in the profile
              weak(4.1),                    # 0.1 spacing from a ring: the same groove
              weak(0.5, cov=0.2),           # a short arc (R3)
              weak(3.6),                    # no crest between it and the ring at 4.0
              weak(5.6)]                    # beyond the last ring (R4's end gaps look there)
    crests = []

    def crest(a, b):
        crests.append((a["height"], b["height"]))
        return 0.5 if a["height"] == 3.6 and b["height"] == 4.0 else 6.0

    log = []
    out, _ = rp.repair([dict(r) for r in rings], 1.0, lambda lo, hi: None, log, weak=[good] + others, crest=crest)
    h = [r["height"] for r in out]
    assert h == [0.0, 1.0, 2.0, 2.4, 3.0, 4.0, 5.0]
    assert "confirmed in its own frame" in out[3]["flags"] and 0.0 <= out[3]["confidence"] <= 1.0
    assert sum(line.startswith("R7") for line in log) == 1
    assert (3.6, 4.0) in crests and (2.4, 2.0) in crests and (2.4, 3.0) in crests
    # not within 2 spacings of the wall's ends (the cut's rim)
    out, _ = rp.repair([dict(r) for r in rings], 1.0, lambda lo, hi: None, [], ends=(-0.5, 5.3),
                       weak=[weak(2.4)], crest=crest)
    assert 2.4 in [r["height"] for r in out]
    out, _ = rp.repair([dict(r) for r in rings], 1.0, lambda lo, hi: None, [], ends=(0.5, 5.3),
                       weak=[weak(2.4)], crest=crest)
    assert 2.4 not in [r["height"] for r in out]
    # without a crest measure, R7 is not applied
    out, _ = rp.repair([dict(r) for r in rings], 1.0, lambda lo, hi: None, [], weak=[weak(2.4)])
    assert [r["height"] for r in out] == [0.0, 1.0, 2.0, 3.0, 4.0, 5.0]


@pytest.mark.parametrize("separation_sigmas, two", [(6.0, True), (2.5, True), (1.5, False)])
def test_crest_between_two_grooves_follows_the_bimodality_of_two_gaussians(separation_sigmas, two):
    """crest_z on a wall whose relief is two equal Gaussian grooves of width sigma: analytic reference,
    an equal mixture of two normals of one sigma is bimodal (a crest between the minima) only when the
    means are more than 2 sigma apart (Schilling, Watkins & Watkins 2002, Am. Stat. 56:223; from
    memory). One groove traced at both its flanks (1.5 sigma apart) shows no crest."""
    from bandgeo.segment.trace import crest_z

    rng = np.random.default_rng(4)
    n, sigma, depth, noise = 200_000, 0.015, 0.01, 0.002
    z = rng.uniform(0.0, 2.0, n)
    th = rng.uniform(-np.pi, np.pi, n)
    v = np.column_stack([5.0 * np.cos(th), 5.0 * np.sin(th), z])
    za, zb = 1.0, 1.0 + separation_sigmas * sigma
    relief = -depth * (np.exp(-0.5 * ((z - za) / sigma) ** 2) + np.exp(-0.5 * ((z - zb) / sigma) ** 2))
    relief += rng.normal(0.0, noise, n)
    up = np.array([0.0, 0.0, 1.0])
    a = {"center": np.array([0.0, 0.0, za]), "normal": up, "height": za}
    b = {"center": np.array([0.0, 0.0, zb]), "normal": up, "height": zb}
    cz = crest_z(v, relief, z, a, b)
    if two:
        assert cz > 3.0  # the rule's threshold (repair.CONFIRM_CREST_Z); about 10 at 2.5 sigma, 95 at 6
    else:
        assert cz < 3.0  # the rule's threshold (repair.CONFIRM_CREST_Z)
    # too few vertices between the planes: no judgement
    few = np.abs(z - 1.0) > 0.2
    assert np.isnan(crest_z(v[few], relief[few], z[few], a, b))


def test_repair_r1_keeps_two_close_rings_with_a_crest_between_them():
    """R1 merges rings under 0.4 spacing apart (one groove seen twice) unless the wall rises between
    them (two grooves of a thin lamina; common practice)."""
    def rings():
        return [ring(float(h)) for h in (0.0, 1.0, 2.0, 2.2, 3.0, 4.0, 4.2, 5.0)]

    def crest(a, b):
        return 8.0 if {a["height"], b["height"]} == {2.0, 2.2} else 0.5

    log = []
    out, _ = rp.repair(rings(), 1.0, lambda lo, hi: None, log, crest=crest)
    h = [r["height"] for r in out]
    assert 2.0 in h and 2.2 in h  # a crest: two grooves
    assert (4.0 in h) != (4.2 in h)  # no crest: one groove seen twice
    assert sum(line.startswith("R1") for line in log) == 1
    out, _ = rp.repair(rings(), 1.0, lambda lo, hi: None, [])
    assert len(out) == 6  # without a crest measure, both pairs merge as before
