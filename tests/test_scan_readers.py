"""Reading scans: files written by trimesh and open3d read back identically; hand-written files follow
the published format descriptions; colours, hashes, upper-case extensions and spaces in paths."""
import hashlib
import os

import numpy as np
import pytest

from bandgeo.scan import load_scan

import trimesh  # a hard dependency (pyproject.toml): imported, never skipped
import open3d as o3d  # a hard dependency (pyproject.toml)


@pytest.fixture(scope="module")
def sphere():
    mesh = trimesh.creation.icosphere(subdivisions=2, radius=12.5)
    rng = np.random.default_rng(5)
    colors = rng.integers(0, 256, (len(mesh.vertices), 3)).astype(np.uint8)
    return np.asarray(mesh.vertices), np.asarray(mesh.faces), colors


def _by_face(vertices, faces):
    return np.asarray(vertices)[np.asarray(faces)]


@pytest.mark.parametrize("ext, kwargs, fmt", [
    ("ply", {}, "ply-binary-le"),
    ("ply", {"encoding": "ascii"}, "ply-ascii"),
    ("obj", {}, "obj"),
    ("off", {}, "off"),
    ("stl", {}, "stl-binary"),
    ("glb", {}, "glb"),
])
def test_trimesh_written_reads_back(tmp_path, sphere, ext, kwargs, fmt):
    # reference library: trimesh writes the file, our reader must give back the same triangles
    v, f, c = sphere
    path = tmp_path / f"sphere.{ext}"
    trimesh.Trimesh(v, f, vertex_colors=c if ext == "ply" else None, process=False).export(str(path), **kwargs)
    scan = load_scan(path)
    assert scan.file_format == fmt
    assert len(scan.faces) == len(f)
    np.testing.assert_allclose(_by_face(scan.vertices, scan.faces), _by_face(v, f), rtol=0, atol=1e-5)
    if ext == "ply":
        np.testing.assert_array_equal(scan.colors, c)


def test_trimesh_gltf_with_embedded_buffer(tmp_path, sphere):
    # reference library: trimesh writes a .gltf with its buffer embedded (base64 data URI)
    v, f, _ = sphere
    files = trimesh.exchange.gltf.export_gltf(trimesh.Scene(trimesh.Trimesh(v, f, process=False)), embed_buffers=True)
    path = tmp_path / "sphere.GLTF"
    path.write_bytes(files["model.gltf"])
    scan = load_scan(path)
    assert scan.file_format == "gltf"
    np.testing.assert_allclose(_by_face(scan.vertices, scan.faces), _by_face(v, f), atol=1e-5)


def test_trimesh_ascii_stl_reads_back(tmp_path, sphere):
    v, f, _ = sphere
    path = tmp_path / "sphere.stl"
    path.write_text(trimesh.exchange.stl.export_stl_ascii(trimesh.Trimesh(v, f, process=False)))
    scan = load_scan(path)
    assert scan.file_format == "stl-ascii"
    np.testing.assert_allclose(_by_face(scan.vertices, scan.faces), _by_face(v, f), atol=1e-5)


@pytest.mark.parametrize("ext, ascii_", [("ply", False), ("ply", True), ("obj", False), ("off", False),
                                         ("stl", False), ("glb", False)])
def test_open3d_written_reads_back(tmp_path, sphere, ext, ascii_):
    # reference library: open3d writes the file (vertex colours as float 0..1 become uchar in PLY)
    v, f, c = sphere
    mesh = o3d.geometry.TriangleMesh(o3d.utility.Vector3dVector(v), o3d.utility.Vector3iVector(f.astype(np.int32)))
    if ext == "ply":
        mesh.vertex_colors = o3d.utility.Vector3dVector(c / 255.0)
    mesh.compute_vertex_normals()
    path = tmp_path / f"sphere o3d.{ext}"
    assert o3d.io.write_triangle_mesh(str(path), mesh, write_ascii=ascii_)
    scan = load_scan(path)
    assert len(scan.faces) == len(f)
    np.testing.assert_allclose(_by_face(scan.vertices, scan.faces), _by_face(v, f), atol=1e-4)
    if ext == "ply":
        np.testing.assert_array_equal(scan.colors, c)
        # and open3d reads our file the same way it reads its own
        back = o3d.io.read_triangle_mesh(str(path))
        np.testing.assert_allclose(np.asarray(back.vertices), scan.vertices, atol=1e-9)


def test_big_endian_binary_ply(tmp_path, sphere):
    # binary_big_endian per the PLY description (Turk 1994): same layout, big-endian numbers
    v, f, c = sphere
    vdt = np.dtype([("x", ">f8"), ("y", ">f8"), ("z", ">f8"), ("red", "u1"), ("green", "u1"), ("blue", "u1")])
    vrec = np.empty(len(v), vdt)
    vrec["x"], vrec["y"], vrec["z"] = v.T
    vrec["red"], vrec["green"], vrec["blue"] = c.T
    frec = np.empty(len(f), np.dtype([("n", "u1"), ("i", ">i4", (3,))]))
    frec["n"], frec["i"] = 3, f
    header = ("ply\nformat binary_big_endian 1.0\ncomment units cm\n"
              f"element vertex {len(v)}\nproperty double x\nproperty double y\nproperty double z\n"
              "property uchar red\nproperty uchar green\nproperty uchar blue\n"
              f"element face {len(f)}\nproperty list uchar int vertex_indices\nend_header\n")
    path = tmp_path / "BIG ENDIAN.PLY"
    path.write_bytes(header.encode() + vrec.tobytes() + frec.tobytes())
    scan = load_scan(path)
    assert scan.file_format == "ply-binary-be"
    assert scan.units_hint == "cm"
    np.testing.assert_array_equal(scan.vertices, v)
    np.testing.assert_array_equal(scan.faces, f)
    np.testing.assert_array_equal(scan.colors, c)


# The cube of the PLY description (Greg Turk, "The PLY Polygon File Format", 1994): eight vertices,
# six quadrilateral faces, a comment line, vertex colours and an extra 'edge' element. The layout
# follows that description; the exact numbers of its example are from memory.
TURK_CUBE = """ply
format ascii 1.0
comment author: Greg Turk (layout of the published example)
element vertex 8
property float x
property float y
property float z
property uchar red
property uchar green
property uchar blue
element face 6
property list uchar int vertex_index
element edge 2
property int vertex1
property int vertex2
property uchar red
property uchar green
property uchar blue
end_header
0 0 0 255 0 0
0 0 1 255 0 0
0 1 1 255 0 0
0 1 0 255 0 0
1 0 0 0 0 255
1 0 1 0 0 255
1 1 1 0 0 255
1 1 0 0 0 255
4 0 1 2 3
4 7 6 5 4
4 0 4 5 1
4 1 5 6 2
4 2 6 7 3
4 3 7 4 0
0 1 255 255 255
1 2 255 255 255
"""


def _cube_checks(scan):
    assert len(scan.vertices) == 8 and len(scan.faces) == 12  # six quads fanned into triangles
    mesh = trimesh.Trimesh(scan.vertices, scan.faces, process=False)
    assert mesh.is_watertight
    assert abs(mesh.volume) == pytest.approx(1.0)  # unit cube (analytic)


def test_hand_written_ascii_ply(tmp_path):
    path = tmp_path / "turk cube.ply"
    path.write_text(TURK_CUBE)
    scan = load_scan(path)
    assert scan.file_format == "ply-ascii"
    _cube_checks(scan)
    np.testing.assert_array_equal(scan.colors[0], [255, 0, 0])
    np.testing.assert_array_equal(scan.colors[7], [0, 0, 255])


# Wavefront OBJ (Appendix B1 of the Advanced Visualizer manual, "Object Files (.obj)"): 'v' vertex,
# 'vn' normal, 'vt' texture vertex, 'f v/vt/vn' faces with 1-based indices, negative indices counting
# back from the latest vertex, 'g' groups and '#' comments. Negative-index detail from memory.
OBJ_CUBE = """# unit cube, units mm
g cube
v 0 0 0
v 0 0 1
v 0 1 1
v 0 1 0
v 1 0 0
v 1 0 1
v 1 1 1
v 1 1 0
vt 0 0
vt 1 0
vt 1 1
vn -1 0 0
f 1/1/1 2/2/1 3/3/1 4/1/1
f 8//1 7//1 6//1 5//1
f 1 5 6 2
f 2 6 7 3
f 3 7 8 4
f -5 -1 -4 -8
"""


def test_hand_written_obj(tmp_path):
    path = tmp_path / "cube.OBJ"
    path.write_text(OBJ_CUBE)
    scan = load_scan(path)
    assert scan.file_format == "obj"
    assert scan.units_hint == "mm"
    _cube_checks(scan)


# OFF as documented by Geomview ("OFF files", Geomview manual): optional 'OFF' keyword, a line
# 'NVertices NFaces NEdges', the vertices, then faces as 'Nv v1 v2 ...' with 0-based indices;
# '#' starts a comment.
OFF_CUBE = """OFF
# unit cube
8 6 12
0 0 0
0 0 1
0 1 1
0 1 0
1 0 0
1 0 1
1 1 1
1 1 0
4 0 1 2 3
4 7 6 5 4
4 0 4 5 1
4 1 5 6 2
4 2 6 7 3
4 3 7 4 0
"""


def test_hand_written_off(tmp_path):
    path = tmp_path / "cube.off"
    path.write_text(OFF_CUBE)
    scan = load_scan(path)
    assert scan.file_format == "off"
    _cube_checks(scan)


def test_hash_and_input_untouched(tmp_path, sphere):
    v, f, c = sphere
    path = tmp_path / "with space" / "Scan KRB-07.PLY"
    path.parent.mkdir()
    trimesh.Trimesh(v, f, vertex_colors=c, process=False).export(str(path), file_type="ply")
    before = path.read_bytes()
    stat = os.stat(path)
    scan = load_scan(str(path))
    assert scan.sha256 == hashlib.sha256(before).hexdigest()  # hashlib is the reference
    assert path.read_bytes() == before and os.stat(path).st_mtime_ns == stat.st_mtime_ns
    assert scan.vertices.dtype == np.float64 and scan.faces.dtype == np.int64 and scan.colors.dtype == np.uint8


def test_no_colours_means_none(tmp_path, sphere):
    v, f, _ = sphere
    path = tmp_path / "plain.ply"
    trimesh.Trimesh(v, f, process=False).export(str(path))
    assert load_scan(path).colors is None
