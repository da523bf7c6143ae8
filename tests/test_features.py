"""Curvature features against analytic surfaces (do Carmo 1976) and against libigl on the same mesh."""
import json
from types import SimpleNamespace

import numpy as np
import pytest

from bandgeo.errors import InputError, ParameterError
from bandgeo.features import (CurvatureFeatures, compute_features, estimate_band_spacing,
                              luminance_from_colors, sampling_along, shape_index_curvedness)


def grid_surface(fun, nu, nv, periodic_v=False):
    """Triangulated (u, v) grid of a parametric surface, periodic in u (and optionally in v)."""
    u = np.arange(nu) / nu * 2 * np.pi
    v = np.arange(nv) / nv * 2 * np.pi if periodic_v else np.linspace(0.0, 1.0, nv)
    U, V = np.meshgrid(u, v, indexing="ij")
    P = fun(U, V).reshape(-1, 3)
    idx = np.arange(nu * nv).reshape(nu, nv)
    I, J = np.meshgrid(np.arange(nu), np.arange(nv if periodic_v else nv - 1), indexing="ij")
    a, b = idx[I, J], idx[(I + 1) % nu, J]
    c, d = idx[(I + 1) % nu, (J + 1) % nv], idx[I, (J + 1) % nv]
    F = np.concatenate([np.stack([a, b, c], -1).reshape(-1, 3), np.stack([a, c, d], -1).reshape(-1, 3)])
    return P, F.astype(np.int64), U.ravel(), V.ravel()


def specimen(v, f, colors=None):
    return SimpleNamespace(vertices_mm=v, faces=f, colors=colors)


def icosphere(radius, subdivisions=5):
    import trimesh

    m = trimesh.creation.icosphere(subdivisions=subdivisions, radius=radius)
    return np.asarray(m.vertices, dtype=float), np.asarray(m.faces, dtype=np.int64)


def grooved_column(radius=4.0, length=12.0, spacing=0.5, depth=0.03, width=0.35, n_theta=400,
                   rows_per_band=5, noise=0.0, seed=0):
    """Cylinder with a Gaussian groove every ``spacing`` mm (our own numpy fixture)."""
    nz = int(round(length / spacing * rows_per_band)) + 1

    def fun(U, V):
        z = V * length
        phase = (z / spacing) % 1.0
        dist = np.minimum(phase, 1.0 - phase) * spacing
        r = radius - depth * np.exp(-0.5 * (dist / (width * spacing / 2.355)) ** 2)
        return np.stack([r * np.cos(U), r * np.sin(U), z], -1)

    v, f, U, V = grid_surface(fun, n_theta, nz)
    if noise:
        v = v + np.random.default_rng(seed).normal(0.0, noise, v.shape)
    return v, f


def test_sphere_mean_and_gaussian_curvature():
    # sphere of radius r: H = 1/r, K = 1/r^2 (do Carmo 1976, Differential Geometry of Curves and
    # Surfaces, sec. 3-3)
    r = 2.0
    v, f = icosphere(r)
    feat = compute_features(specimen(v, f), band_spacing_mm=1.0)
    assert isinstance(feat, CurvatureFeatures)
    assert np.allclose(feat.mean, 1.0 / r, rtol=0.01)
    assert np.median(np.abs(feat.gaussian[:, 0] - 1.0 / r ** 2)) < 0.01 / r ** 2
    assert np.allclose(feat.k1[:, -1], 1.0 / r, rtol=0.02) and np.allclose(feat.k2[:, -1], 1.0 / r, rtol=0.02)
    # a convex cap has shape index +1 (Koenderink & van Doorn 1992, with outward normals)
    assert np.all(feat.shape_index[:, -1] > 0.95)
    # normals point outward: along the position vector
    assert np.all(np.einsum("ij,ij->i", feat.normals, v / r) > 0.99)


def test_inward_faces_still_give_positive_mean_curvature_on_convex_surface():
    # sign convention of DEVELOPERS.md: positive on convex parts with outward normals
    v, f = icosphere(1.5, 4)
    feat = compute_features(specimen(v, f[:, ::-1].copy()), band_spacing_mm=1.0)
    assert np.median(feat.mean[:, 0]) == pytest.approx(1 / 1.5, rel=0.01)


def test_cylinder_curvatures():
    # cylinder of radius r: H = 1/(2r), K = 0, k1 = 1/r, k2 = 0 (do Carmo 1976, sec. 3-3);
    # a ridge-like (cylindrical) shape has shape index 1/2 (Koenderink & van Doorn 1992)
    r = 3.0
    v, f, U, V = grid_surface(lambda U, V: np.stack([r * np.cos(U), r * np.sin(U), 20 * V], -1), 300, 400)
    feat = compute_features(specimen(v, f), band_spacing_mm=1.0)
    inner = (V > 0.1) & (V < 0.9)
    assert np.allclose(feat.mean[inner], 1 / (2 * r), rtol=0.01)
    assert np.abs(feat.gaussian[inner]).max() < 1e-3 / r ** 2
    assert np.allclose(feat.k1[inner, 1], 1 / r, rtol=0.02)
    assert np.abs(feat.k2[inner, 1]).max() < 0.05 / r
    assert np.allclose(feat.shape_index[inner, 1], 0.5, atol=0.02)
    assert np.allclose(feat.curvedness[inner, 1], np.sqrt(0.5) / r, rtol=0.02)
    # grid rows along z are 20/399 mm apart
    assert feat.sampling_along_mm == pytest.approx(20 / 399, rel=1e-6)


def test_torus_gaussian_and_mean_curvature():
    # torus with tube radius r, centre radius R: K = cos v / (r (R + r cos v)),
    # H = (R + 2 r cos v) / (2 r (R + r cos v)) (do Carmo 1976, sec. 3-3, example 4)
    R, r = 3.0, 1.0
    fun = lambda U, V: np.stack([(R + r * np.cos(V)) * np.cos(U), (R + r * np.cos(V)) * np.sin(U),  # noqa: E731
                                 r * np.sin(V)], -1)
    v, f, U, V = grid_surface(fun, 400, 200, periodic_v=True)
    feat = compute_features(specimen(v, f), band_spacing_mm=1.0)
    K = np.cos(V) / (r * (R + r * np.cos(V)))
    H = (R + 2 * r * np.cos(V)) / (2 * r * (R + r * np.cos(V)))
    assert np.abs(feat.gaussian[:, 0] - K).max() < 1e-3
    assert np.abs(feat.mean[:, 0] - H).max() < 1e-3
    # the saddle-shaped inner side has negative K and shape index near 0 where H ~ 0
    inner = np.cos(V) < -0.9
    assert np.all(feat.gaussian[inner, 0] < 0)


def test_agrees_with_libigl_principal_curvature_on_torus():
    # reference library: libigl principal_curvature (quadric fit on a k-ring), same mesh
    import igl  # libigl is in the test extra: a missing install must fail, not skip
    R, r = 3.0, 1.0
    fun = lambda U, V: np.stack([(R + r * np.cos(V)) * np.cos(U), (R + r * np.cos(V)) * np.sin(U),  # noqa: E731
                                 r * np.sin(V)], -1)
    v, f, U, V = grid_surface(fun, 300, 150, periodic_v=True)
    H = (R + 2 * r * np.cos(V)) / (2 * r * (R + r * np.cos(V)))  # do Carmo 1976, sec. 3-3
    pd1, pd2, pv1, pv2, _ = igl.principal_curvature(v, f, 5)
    sign = np.sign(np.median(pv1 + pv2))  # libigl's sign follows its own normal orientation
    h_igl, k_igl = 0.5 * sign * (pv1 + pv2), pv1 * pv2
    feat = compute_features(specimen(v, f), scales_mm=[0.0, 0.1])
    assert np.median(np.abs(feat.mean[:, 0] - h_igl)) < 0.01
    assert np.median(np.abs(feat.gaussian[:, 0] - k_igl)) < 0.01
    k1_igl = np.maximum(sign * pv1, sign * pv2)
    assert np.median(np.abs(feat.k1[:, 0] - k1_igl)) < 0.02
    # with scanner noise, the coarse scale stays closer to the analytic value than libigl radius 5
    vn = v + np.random.default_rng(1).normal(0, 0.002, v.shape)
    _, _, pv1, pv2, _ = igl.principal_curvature(vn, f, 5)
    err_igl = np.median(np.abs(0.5 * sign * (pv1 + pv2) - H))
    feat = compute_features(specimen(vn, f), scales_mm=[0.0, 0.1])
    assert np.median(np.abs(feat.mean[:, 1] - H)) < err_igl


def test_noise_robustness_of_coarse_scale():
    # noisy cylinder: the coarse scale stays within a few per cent of H = 1/(2r) (do Carmo 1976);
    # the one-ring estimate is much noisier, which is why scales exist (common practice)
    r = 3.0
    v, f, U, V = grid_surface(lambda U, V: np.stack([r * np.cos(U), r * np.sin(U), 20 * V], -1), 300, 400)
    v = v + np.random.default_rng(2).normal(0, 0.003, v.shape)
    feat = compute_features(specimen(v, f), scales_mm=[0.0, 0.2])
    inner = (V > 0.1) & (V < 0.9)
    spread0 = np.std(feat.mean[inner, 0])
    spread1 = np.std(feat.mean[inner, 1])
    assert spread1 < spread0 / 4
    assert abs(np.median(feat.mean[inner, 1]) - 1 / (2 * r)) < 0.03 / r
    # the noise estimate recovers the jitter's rms along the normal
    assert feat.noise_mm == pytest.approx(0.003, rel=0.35)


def test_band_spacing_estimate_on_grooved_column():
    # a column with a groove every 0.5 mm: the dominant spatial period is 0.5 mm (construction)
    v, f = grooved_column(spacing=0.5, noise=0.003)
    spacing, info = estimate_band_spacing(specimen(v, f))
    assert info["significant"]
    assert spacing == pytest.approx(0.5, rel=0.05)
    feat = compute_features(specimen(v, f))
    assert feat.band_spacing_mm == pytest.approx(0.5, rel=0.05)
    assert feat.scales_mm[0] == 0.0 and len(feat.scales_mm) == 4
    # grooves are concave along the axis: most negative mean curvature at the groove lines
    z = v[:, 2]
    at_groove = np.abs(((z / 0.5) + 0.5) % 1.0 - 0.5) < 0.03
    assert np.median(feat.mean[at_groove, 0]) < 0 < np.median(feat.mean[~at_groove, 0])


@pytest.mark.parametrize("seed", [3, 4, 5])
def test_no_spacing_on_smooth_cylinder(seed):
    # no relief at all: nothing periodic may be reported (the tool must not invent bands)
    r = 4.0
    v, f, U, V = grid_surface(lambda U, V: np.stack([r * np.cos(U), r * np.sin(U), 12 * V], -1), 300, 200)
    v = v + np.random.default_rng(seed).normal(0, 0.003, v.shape)
    spacing, info = estimate_band_spacing(specimen(v, f))
    assert not info["significant"] and np.isnan(spacing)
    feat = compute_features(specimen(v, f))
    assert feat.band_spacing_method.startswith("fallback")


def test_sampling_along_anisotropic_rings():
    # rings of 24 vertices 0.05 mm apart: the sampling interval along the axis is the ring spacing,
    # although the median edge length is ~1 mm (construction)
    r = 4.0
    v, f, U, V = grid_surface(lambda U, V: np.stack([r * np.cos(U), r * np.sin(U), 10 * V], -1), 24, 201)
    assert sampling_along(v, f, np.array([0.0, 0.0, 1.0])) == pytest.approx(0.05, rel=1e-6)
    edges = np.linalg.norm(v[f[:, 0]] - v[f[:, 1]], axis=1)
    assert np.median(edges) > 0.5


def _sampling_along_rows(vertices, faces, axis, only=None):
    """The local-tangent sampling interval written row by row (the definition in
    ``bandgeo.features.curvature.sampling_along``'s docstring, without its column and block layout)."""
    proj = np.zeros(len(vertices))
    for a_col, b_col in ((0, 1), (1, 2), (2, 0)):
        fa, fb = faces[:, a_col], faces[:, b_col]
        e = vertices[fb] - vertices[fa]
        t = axis[fa] + axis[fb]
        t /= np.sqrt(np.einsum("ij,ij->i", t, t))[:, None]
        d = np.abs(np.einsum("ij,ij->i", e, t))
        np.maximum.at(proj, fa, d)
        np.maximum.at(proj, fb, d)
    used = proj > 0
    if only is not None:
        used &= only
    return float(np.median(proj[used])), proj


def test_sampling_along_local_tangents_on_a_bent_column(monkeypatch):
    """Rings 0.05 mm apart along a bent axis (an arc of radius 40 mm): measured along the local
    tangent, the interval is the ring spacing on the axis scaled by (R + x) / R across the column
    (analytic, arc geometry); and the blocked column arithmetic gives the row-by-row numbers exactly,
    vertex for vertex (the median over every third vertex too)."""
    from bandgeo.features import curvature as C

    R, r = 40.0, 3.0

    def fun(U, V):
        ang = 10.0 * V / R                       # 10 mm of arc
        x = r * np.cos(U)
        return np.stack([R - (R + x) * np.cos(ang),
                         r * np.sin(U), (R + x) * np.sin(ang)], -1)

    v, f, U, V = grid_surface(fun, 36, 201)
    ang = 10.0 * V / R
    tang = np.stack([np.sin(ang), np.zeros_like(ang), np.cos(ang)], axis=1)
    # turned to a general direction, so that every coordinate carries part of each product
    rot, _ = np.linalg.qr(np.array([[0.8, -0.3, 0.5], [0.2, 0.9, -0.4], [-0.5, 0.3, 0.7]]))
    v, tang = v @ rot.T, tang @ rot.T
    monkeypatch.setattr(C, "SAMPLING_BLOCK", 1000)  # several blocks on a small mesh
    only = np.zeros(len(v), dtype=bool)
    only[::3] = True
    for mask in (None, only):
        got = sampling_along(v, f, tang, only=mask)
        want, _ = _sampling_along_rows(v, f, tang, only=mask)
        assert got == want
    # vertex for vertex: the median over one vertex is that vertex's own interval
    _, proj = _sampling_along_rows(v, f, tang)
    for i in range(0, len(v), 23):
        one = np.zeros(len(v), dtype=bool)
        one[i] = True
        assert sampling_along(v, f, tang, only=one) == proj[i]
    # rows 0.05 mm apart on the axis: between 0.05 (R - r) / R and 0.05 (R + r) / R across the column,
    # the median near the axis's own 0.05
    assert 0.05 * (R - r) / R - 1e-9 <= sampling_along(v, f, tang) <= 0.05 * (R + r) / R + 1e-9
    assert sampling_along(v, f, tang) == pytest.approx(0.05, rel=0.02)


def test_shape_index_of_named_shapes():
    # Koenderink & van Doorn (1992): cap +1, ridge +1/2, saddle 0, rut -1/2, cup -1
    k1 = np.array([1.0, 1.0, 1.0, 0.0, -1.0])
    k2 = np.array([1.0, 0.0, -1.0, -1.0, -1.0])
    s, c = shape_index_curvedness(k1, k2)
    assert np.allclose(s, [1.0, 0.5, 0.0, -0.5, -1.0])
    assert np.allclose(c, np.sqrt((k1 ** 2 + k2 ** 2) / 2))


def test_luminance_of_primaries():
    # ITU-R BT.709 luminance weights of the linear primaries: 0.2126, 0.7152, 0.0722; white = 1
    cols = np.array([[255, 0, 0], [0, 255, 0], [0, 0, 255], [255, 255, 255], [0, 0, 0]], dtype=np.uint8)
    assert np.allclose(luminance_from_colors(cols), [0.2126, 0.7152, 0.0722, 1.0, 0.0], atol=1e-4)
    # mid-grey sRGB 128 is 21.6% linear luminance (IEC 61966-2-1 transfer function)
    assert luminance_from_colors(np.array([[128, 128, 128]]))[0] == pytest.approx(0.2158, abs=1e-3)


def test_luminance_of_many_8_bit_colours_is_the_per_vertex_formula():
    """Large uint8 colour arrays take a 256-level table: the same numbers as IEC 61966-2-1's transfer
    function applied per channel, then the BT.709 weights (as in luminance_from_colors' docstring)."""
    rng = np.random.default_rng(4)
    for high in (2, 256):  # 0/1 channels are read as fractions already, 0..255 as 8-bit levels
        col = rng.integers(0, high, size=(5000, 4)).astype(np.uint8)
        c = col[:, :3].astype(np.float64)
        if col.max() > 1:
            c = c / 255.0
        lin = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
        assert np.array_equal(luminance_from_colors(col), lin @ np.array([0.2126, 0.7152, 0.0722]))
    white = np.full((2000, 3), 255, dtype=np.uint8)
    assert luminance_from_colors(white) == pytest.approx(np.ones(2000), abs=1e-12)


def test_matrix_and_luminance_feature():
    v, f = icosphere(1.0, 3)
    cols = np.full((len(v), 3), 200, dtype=np.uint8)
    feat = compute_features(specimen(v, f, cols), band_spacing_mm=0.5)
    # the one-ring scale is left out of the clustering matrix (noise-dominated)
    assert feat.matrix().shape == (len(v), 2 * (len(feat.scales_mm) - 1))
    assert feat.matrix(luminance=True).shape == (len(v), 2 * (len(feat.scales_mm) - 1) + 1)
    assert feat.luminance is not None and np.allclose(feat.luminance, feat.luminance[0])


def test_bad_input_is_one_line_error():
    with pytest.raises(InputError):
        compute_features(SimpleNamespace(vertices_mm=np.zeros((3, 2)), faces=np.zeros((1, 3))))
    v, f = icosphere(1.0, 2)
    with pytest.raises(InputError):
        compute_features(specimen(v, f + len(v)))
    with pytest.raises(ParameterError):
        compute_features(specimen(v, f), band_spacing_mm=-1)
    with pytest.raises(InputError):
        compute_features(object())
    before = v.copy()
    compute_features(specimen(v, f), band_spacing_mm=0.5)
    assert np.array_equal(v, before)  # inputs are never modified


def test_slabs_give_the_whole_mesh_numbers():
    # processing in overlapping slabs along the axis (as for a 40 M-face scan) must give the numbers of
    # the one-piece computation: same operators, margins wider than every diffusion step (construction)
    v, f = grooved_column(length=10.0, spacing=0.5, noise=0.004, n_theta=160, seed=3)
    # an open tube: boundary rings at both ends exercise the boundary fill and the margins
    whole = compute_features(specimen(v, f))
    sliced = compute_features(specimen(v, f), chunk_faces=len(f) // 5)
    assert whole.info["processing"]["mode"] == "direct" and whole.info["processing"]["slabs"] == 1
    proc = sliced.info["processing"]
    assert proc["slabs"] == 5 and "slabs" in proc["note"] and proc["margin_mm"] > 0
    assert sliced.info["diffusion_steps"] == whole.info["diffusion_steps"] and max(whole.info["diffusion_steps"]) > 1
    np.testing.assert_array_equal(sliced.scales_mm, whole.scales_mm)
    for name in ("mean", "gaussian", "shape_index", "k1", "k2", "curvedness", "normals"):
        a, b = getattr(sliced, name), getattr(whole, name)
        np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-9 * np.abs(b).max(), err_msg=name)
    assert sliced.band_spacing_mm == pytest.approx(whole.band_spacing_mm, rel=1e-12)
    assert sliced.noise_mm == pytest.approx(whole.noise_mm, rel=1e-9)
    assert sliced.sampling_along_mm == whole.sampling_along_mm
    with pytest.raises(ParameterError):
        compute_features(specimen(v, f), chunk_faces=0)


def test_derived_curvatures_are_computed_on_demand():
    # k1, k2 and curvedness follow from H and K (k = H +- sqrt(H^2 - K); Koenderink & van Doorn 1992);
    # given values are kept as given
    H = np.array([[1.0, 0.5]])
    K = np.array([[0.5, -1.0]])
    feat = CurvatureFeatures(np.array([0.0, 1.0]), H, K)
    d = np.sqrt(np.maximum(H * H - K, 0))
    np.testing.assert_allclose(feat.k1, H + d)
    np.testing.assert_allclose(feat.k2, H - d)
    np.testing.assert_allclose(feat.curvedness, np.sqrt(0.5 * ((H + d) ** 2 + (H - d) ** 2)))
    s, c = shape_index_curvedness(H + d, H - d)
    np.testing.assert_allclose(feat.shape_index, s)
    given = CurvatureFeatures(np.array([0.0, 1.0]), H, K, k1=np.zeros((1, 2)))
    assert np.all(given.k1 == 0)


def test_result_says_how_the_features_were_computed(tmp_path, monkeypatch):
    # a scan above the slab threshold is processed in slabs, and the run's parameters (run.json and
    # result.json provenance) say so in words
    import bandgeo.features as features_mod
    from bandgeo.pipeline import upstream
    from bandgeo.results import RunParams
    from bandgeo.synth import SynthParams, simulate, write_specimen

    params = SynthParams(sampling="isotropic", ring_vertices=40, rings_per_lamina=4.5, radius_mm=2.0,
                         mean_thickness_mm=0.55, dome_height_mm=0.8, groove_depth_mm=0.07,
                         groove_width_fraction=0.4, scanner_noise_mm=0.006, years=0.15, seed=3)
    spec = simulate(params)
    path = tmp_path / "small.ply"
    write_specimen(spec, path)
    up = json.loads((tmp_path / "small.truth.json").read_text())["frames"]["paleo_up_file"]
    monkeypatch.setattr(features_mod, "CHUNK_FACES", len(spec.faces) // 3)
    _, _, run = upstream(path, RunParams(scan=str(path), units="mm", up=up))
    note = run.features["processing"]
    assert "slabs along the growth axis" in note and "numbers of the whole mesh" in note


def test_many_diffusion_steps_stay_finite():
    # a scale far above the sampling runs the most diffusion steps (MAX_STEPS); the running sums must
    # not overflow, and the coarse mean curvature of a cylinder stays H = 1/(2r) (do Carmo 1976)
    from bandgeo.features import MAX_STEPS

    r = 3.0
    v, f, U, V = grid_surface(lambda U, V: np.stack([r * np.cos(U), r * np.sin(U), 20 * V], -1), 90, 60)
    feat = compute_features(specimen(v, f), scales_mm=[0.0, 100.0])
    assert feat.info["diffusion_steps"][-1] == MAX_STEPS
    assert np.all(np.isfinite(feat.mean)) and np.all(np.isfinite(feat.gaussian))
    assert np.median(feat.mean[:, 1]) == pytest.approx(1 / (2 * r), rel=0.02)


def test_blocks_summed_over_their_own_vertices_give_the_same_numbers():
    """With many face blocks the one-ring sums run over each block's own vertices (bandgeo.features.
    curvature.COMPACT_BLOCKS); they are the very numbers of whole-length sums, bit for bit, and the
    sphere's curvature is still 1/r and 1/r^2 (do Carmo 1976, Differential Geometry of Curves and
    Surfaces, sec. 3-3)."""
    import bandgeo.features.curvature as curv

    v, f = icosphere(3.0, subdivisions=5)
    rng = np.random.default_rng(2)
    f = f[rng.permutation(len(f))]            # faces in no order: every block touches most of the sphere
    dense = curv.one_ring_curvature(v, f, block=1000)
    saved = curv.COMPACT_BLOCKS
    try:
        curv.COMPACT_BLOCKS = 10 ** 9         # never: the whole-length sums
        whole = curv.one_ring_curvature(v, f, block=1000)
    finally:
        curv.COMPACT_BLOCKS = saved
    assert len(f) > 4 * 1000
    for a, b in zip(dense, whole):
        assert np.array_equal(a, b)
    lap, gauss, area, normals, _ = dense
    H = 0.5 * np.linalg.norm(lap, axis=1)
    assert np.median(H) == pytest.approx(1 / 3.0, rel=1e-2)
    assert np.median(gauss) == pytest.approx(1 / 9.0, rel=1e-2)


def test_diffusion_in_threads_gives_the_same_numbers(monkeypatch):
    """On large meshes the adjacency is built in a thread beside the one-ring sums, and the diffusion's
    three vectors walk in threads: the same operations, so the same features bit for bit as one after
    the other (forced on a small column here)."""
    from bandgeo.features import _slabs

    v, f = grooved_column(n_theta=120, noise=0.002, seed=3)
    monkeypatch.setattr(_slabs, "PARALLEL_DIFFUSION_VERTICES", 10**12)
    serial = compute_features(specimen(v, f))
    monkeypatch.setattr(_slabs, "PARALLEL_DIFFUSION_VERTICES", 0)
    threaded = compute_features(specimen(v, f))
    assert np.array_equal(serial.mean, threaded.mean) and np.array_equal(serial.gaussian, threaded.gaussian)
    assert max(serial.info["diffusion_steps"]) > 1
