"""Cleaning: every change counted, checked against trimesh (the reference library) on damaged meshes."""
import numpy as np
import pytest

from bandgeo.errors import InputError
from bandgeo.scan import Scan, prepare
from bandgeo.scan import meshgraph as clean_module  # the hashing kernels live there
from bandgeo.scan.clean import clean_mesh, first_of_equal_rows
from test_scan_meshes import domed_column

import trimesh  # a hard dependency (pyproject.toml): imported, never skipped


@pytest.fixture(scope="module")
def sphere():
    m = trimesh.creation.icosphere(subdivisions=3, radius=20.0)
    return np.asarray(m.vertices), np.asarray(m.faces)


def _scan(v, f, colors=None):
    return Scan(np.asarray(v, float), np.asarray(f, np.int64), colors, "test.ply", "0" * 64, "ply-ascii", "mm")


def test_first_of_equal_rows_matches_numpy_unique():
    rng = np.random.default_rng(1)
    rows = rng.integers(0, 5, (5000, 3)).astype(float)
    rep = first_of_equal_rows(rows)
    # reference: np.unique groups; each row's representative is the first row of its group
    _, first, inv = np.unique(rows, axis=0, return_index=True, return_inverse=True)
    np.testing.assert_array_equal(rep, first[inv.ravel()])


def test_first_of_equal_rows_survives_hash_collisions(monkeypatch):
    # force every row to the same hash: the exact fallback must still group correctly
    monkeypatch.setattr(clean_module, "_mix", lambda h: np.zeros_like(h))
    rows = np.random.default_rng(2).integers(0, 4, (300, 3)).astype(float)
    _, first, inv = np.unique(rows, axis=0, return_index=True, return_inverse=True)
    np.testing.assert_array_equal(first_of_equal_rows(rows), first[inv.ravel()])


def test_stl_soup_is_merged_like_trimesh(sphere):
    v, f = sphere
    soup_v = v[f].reshape(-1, 3)
    soup_f = np.arange(len(soup_v)).reshape(-1, 3)
    res = clean_mesh(soup_v, soup_f)
    ref = trimesh.Trimesh(soup_v, soup_f, process=False)
    ref.merge_vertices(digits_vertex=12)  # reference: trimesh's merge of coincident vertices
    assert res.counts["duplicate_vertices_merged"] == len(soup_v) - len(ref.vertices)
    assert len(res.vertices) == len(ref.vertices) == len(v)
    assert res.stats["holes"] == 0 and res.stats["pieces"] == 1


def test_degenerate_duplicate_and_unreferenced(sphere):
    v, f = sphere
    n = len(v)
    extra_v = np.vstack([v, [[0, 0, 0], [1, 0, 0], [2, 0, 0]], [[99, 99, 99]] * 2])
    extra_f = np.vstack([f, [[0, 0, 1]], [[n, n + 1, n + 2]], [f[5][[1, 2, 0]]], [f[9][[2, 1, 0]]]])
    res = clean_mesh(extra_v, extra_f)
    assert res.counts["degenerate_faces_removed"] == 2          # repeated index; collinear (zero area)
    assert res.counts["duplicate_faces_removed"] == 2           # same vertices, either winding
    assert res.counts["duplicate_vertices_merged"] == 1         # the two [99, 99, 99]
    # the three collinear points (their face removed) and the merged pair's survivor are unreferenced
    assert res.counts["unreferenced_vertices_removed"] == 4
    assert len(res.faces) == len(f) and len(res.vertices) == n
    assert trimesh.Trimesh(res.vertices, res.faces, process=False).is_watertight


@pytest.mark.parametrize("which", [0, 17, 400, 1279])
def test_repeated_face_inside_closed_mesh(sphere, which):
    # a copy of one face of a closed surface: its edges become non-manifold; whichever face heads the
    # sorted run, the copy is found (trimesh: the result is watertight again)
    v, f = sphere
    g = np.vstack([f, f[which][[2, 0, 1]]])
    res = clean_mesh(v, g)
    assert res.counts["duplicate_faces_removed"] == 1 and res.stats["non_manifold_edges"] == 0
    assert trimesh.Trimesh(res.vertices, res.faces, process=False).is_watertight


def test_pieces_keep_largest(sphere):
    v, f = sphere
    small = trimesh.creation.icosphere(subdivisions=1, radius=2.0)
    v2 = np.vstack([v, np.asarray(small.vertices) + 100])
    f2 = np.vstack([f, np.asarray(small.faces) + len(v)])
    spec = prepare(_scan(v2, f2), up=[0, 0, 1])
    assert spec.cleaning["pieces_removed"] == 1
    assert spec.cleaning["faces_in_removed_pieces"] == len(small.faces)
    assert spec.cleaning["vertices_in_removed_pieces"] == len(small.vertices)
    assert len(spec.faces) == len(f)
    assert any("kept the largest of 2 pieces" in w for w in spec.warnings)
    assert spec.scan_vertex_index.max() < len(v)


def test_flipped_faces_are_rewound_outward(sphere):
    v, f = sphere
    rng = np.random.default_rng(4)
    flip = rng.random(len(f)) < 0.3
    g = f.copy()
    g[flip] = g[flip][:, ::-1]
    res = clean_mesh(v, g)
    assert res.counts["faces_flipped"] == int(flip.sum())
    mesh = trimesh.Trimesh(res.vertices, res.faces, process=False)
    assert mesh.is_winding_consistent and mesh.volume > 0  # trimesh: consistent and outward
    # same triangles as the original, wound the original way (normals agree)
    original = trimesh.Trimesh(v, f, process=False)
    np.testing.assert_allclose(mesh.face_normals, original.face_normals, atol=1e-12)


def test_inside_out_mesh_is_turned(sphere):
    v, f = sphere
    res = clean_mesh(v, f[:, ::-1])
    assert res.counts["faces_flipped"] == len(f)
    assert trimesh.Trimesh(res.vertices, res.faces, process=False).volume > 0


def test_open_column_winding_and_holes():
    v, f = domed_column(base="open")
    res = clean_mesh(v, f[:, ::-1])
    assert res.counts["faces_flipped"] == len(f)
    mesh = trimesh.Trimesh(res.vertices, res.faces, process=False)
    normals = mesh.face_normals
    radial = mesh.triangles_center[:, :2]
    wall = np.abs(normals[:, 2]) < 0.1
    assert np.all(np.einsum("ij,ij->i", normals[wall, :2], radial[wall]) > 0)  # outward on the wall
    assert res.stats["holes"] == len(mesh.outline().entities) == 1  # trimesh: one boundary loop


def test_holes_counted_like_trimesh(sphere):
    v, f = sphere
    mesh = trimesh.Trimesh(v, f, process=False)
    # remove three faces far apart: three boundary loops
    centers = mesh.triangles_center
    picks = [int(np.argmax(centers @ d)) for d in ([1, 0, 0], [-1, 0, 0], [0, 0, 1])]
    keep = np.ones(len(f), bool)
    keep[picks] = False
    res = clean_mesh(v, f[keep])
    ref = trimesh.Trimesh(v, f[keep], process=False)
    assert res.stats["holes"] == len(ref.outline().entities) == 3
    assert res.stats["boundary_edges"] == 9


def test_median_edge_matches_trimesh(sphere):
    v, f = sphere
    res = clean_mesh(v, f)
    ref = trimesh.Trimesh(v, f, process=False)
    assert res.stats["median_edge"] == pytest.approx(float(np.median(ref.edges_unique_length)))


def test_non_manifold_edge_is_reported(sphere):
    v, f = sphere
    a, b = f[0][0], f[0][1]
    v2 = np.vstack([v, [[0, 0, 40.0]]])
    f2 = np.vstack([f, [[a, b, len(v)]]])
    res = clean_mesh(v2, f2)
    assert res.stats["non_manifold_edges"] == 1
    assert res.stats["pieces"] == 1


def test_unused_nonfinite_vertices_are_dropped_used_ones_refused(sphere):
    v, f = sphere
    v2 = np.vstack([v, [[np.nan, 0, 0], [np.inf, 1, 1]]])
    res = clean_mesh(v2, f)
    assert res.counts["nonfinite_vertices_removed"] == 2
    assert res.counts["unreferenced_vertices_removed"] == 0
    assert np.isfinite(res.vertices).all()
    v3 = v.copy()
    v3[3] = np.nan
    with pytest.raises(InputError, match="NaN or infinite"):
        clean_mesh(v3, f)


def test_scan_vertex_index_and_colours_follow(sphere):
    v, f = sphere
    colors = (np.arange(len(v))[:, None] % 256 * np.ones((1, 3))).astype(np.uint8)
    pad = np.vstack([[[500, 500, 500]], v])  # an unused vertex first shifts every index by one
    spec = prepare(_scan(pad, f + 1, np.vstack([[[1, 2, 3]], colors])), up=[0, 0, 1])
    np.testing.assert_array_equal(spec.scan_vertex_index, np.arange(1, len(v) + 1))
    np.testing.assert_array_equal(spec.colors, colors)
    assert spec.cleaning["unreferenced_vertices_removed"] == 1


def test_progress_is_reported(sphere):
    # the progress convention of DEVELOPERS.md: progress(description, done, total)
    v, f = sphere
    calls = []
    prepare(_scan(v, f), up=[0, 0, 1], progress=lambda d, done, total: calls.append((d, done, total)))
    assert calls and all(isinstance(d, str) and 0 <= done <= total for d, done, total in calls)
    assert any(d.startswith("cleaning") for d, _, _ in calls) and any(d == "orienting" for d, _, _ in calls)
