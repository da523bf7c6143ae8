"""Bad input: every broken scan gets one line saying what is wrong and what to do, exit status 2.

The corpus is generated here in tmp_path. Expected behaviour from the issue text (common practice for
command-line tools: one message on stderr, non-zero status, no traceback).
"""
import subprocess
import sys

import numpy as np
import pytest

from bandgeo.cli import main
from bandgeo.errors import InputError
from bandgeo.scan import load_scan, prepare, read_sheet

trimesh = pytest.importorskip("trimesh")


def _binary_ply(verts, faces, n_vertex=None, n_face=None):
    vdt = np.dtype([("x", "<f4"), ("y", "<f4"), ("z", "<f4")])
    vrec = np.empty(len(verts), vdt)
    vrec["x"], vrec["y"], vrec["z"] = np.asarray(verts, float).T
    frec = np.empty(len(faces), np.dtype([("n", "u1"), ("i", "<i4", (3,))]))
    frec["n"], frec["i"] = 3, faces
    header = (f"ply\nformat binary_little_endian 1.0\nelement vertex {len(verts) if n_vertex is None else n_vertex}\n"
              "property float x\nproperty float y\nproperty float z\n"
              f"element face {len(faces) if n_face is None else n_face}\nproperty list uchar int vertex_indices\n"
              "end_header\n")
    return header.encode() + vrec.tobytes() + frec.tobytes()


@pytest.fixture(scope="module")
def good():
    mesh = trimesh.creation.icosphere(subdivisions=2, radius=20.0)
    return np.asarray(mesh.vertices), np.asarray(mesh.faces)


def _make(case, tmp, good):
    v, f = good
    if case == "missing":
        return tmp / "no such scan.ply"
    if case == "directory":
        (tmp / "a folder.ply").mkdir()
        return tmp / "a folder.ply"
    path = tmp / {"unknown_ext": "scan.xyz", "stl_truncated": "scan.stl", "off_garbage": "scan.off",
                  "obj_garbage": "scan.obj"}.get(case, f"{case}.ply")
    if case == "empty":
        path.write_bytes(b"")
    elif case == "unknown_ext":
        path.write_text("1 2 3\n")
    elif case == "text_renamed":
        path.write_text("Field notes, Tallow Creek, Mirrin Ranges.\nSpecimen KRB-07, collected by A. Okonkwo-Reyes.\n")
    elif case == "truncated":
        path.write_bytes(_binary_ply(v, f)[:-500])
    elif case == "counts_too_few_vertices":
        path.write_bytes(_binary_ply(v, f, n_vertex=len(v) - 7))
    elif case == "counts_too_many_faces":
        path.write_bytes(_binary_ply(v, f, n_face=len(f) + 10))
    elif case == "ascii_counts_wrong":
        text = trimesh.exchange.ply.export_ply(trimesh.Trimesh(v, f, process=False), encoding="ascii").decode()
        path.write_text(text.replace(f"element vertex {len(v)}", f"element vertex {len(v) + 3}"))
    elif case in ("nan", "inf"):
        w = v.copy()
        w[5, 1] = np.nan if case == "nan" else np.inf
        path.write_bytes(_binary_ply(w, f))
    elif case == "zero_faces":
        path.write_bytes(_binary_ply(v, np.zeros((0, 3), int)))
    elif case == "points_only":
        trimesh.PointCloud(v).export(str(path))
    elif case == "single_triangle":
        path.write_bytes(_binary_ply([[0, 0, 0], [10, 0, 0], [0, 10, 0]], [[0, 1, 2]]))
    elif case == "flat":
        grid = trimesh.creation.box(extents=(50, 50, 1))
        flat = np.asarray(grid.vertices).copy()
        flat[:, 2] = 0.0
        plane = trimesh.Trimesh(*trimesh.remesh.subdivide(flat, grid.faces), process=False)
        keep = np.asarray(plane.triangles_center)[:, 2] == 0
        path.write_bytes(_binary_ply(plane.vertices, plane.faces[keep]))
    elif case == "index_out_of_range":
        g = f.copy()
        g[10, 2] = len(v) + 100
        path.write_bytes(_binary_ply(v, g))
    elif case == "stl_truncated":
        path.write_bytes(trimesh.Trimesh(v, f).export(file_type="stl")[:-60])
    elif case == "off_garbage":
        path.write_text("this is not an OFF file\n")
    elif case == "obj_garbage":
        path.write_text("hello\nworld\n")
    return path


CASES = [
    ("missing", "no such file"),
    ("directory", "is a folder"),
    ("empty", "is empty"),
    ("unknown_ext", "unknown extension"),
    ("text_renamed", "does not start with 'ply'"),
    ("truncated", "truncated"),
    ("counts_too_few_vertices", "header counts do not match"),
    ("counts_too_many_faces", "truncated"),
    ("ascii_counts_wrong", "header counts are wrong"),
    ("nan", "NaN or infinite"),
    ("inf", "NaN or infinite"),
    ("zero_faces", "points only"),
    ("points_only", "points only"),
    ("single_triangle", "usable faces"),
    ("flat", "flat"),
    ("index_out_of_range", "outside the"),
    ("stl_truncated", "truncated"),
    ("off_garbage", "not an OFF file"),
    ("obj_garbage", "no vertices"),
]


@pytest.mark.parametrize("case, expected", CASES)
def test_api_raises_one_line(tmp_path, good, case, expected):
    path = _make(case, tmp_path, good)
    with pytest.raises(InputError) as err:
        prepare(load_scan(path))
    message = str(err.value)
    assert expected in message
    assert "\n" not in message and ";" in message  # what is wrong; what to do


@pytest.mark.parametrize("case, expected", CASES)
def test_cli_exit_2_one_line(tmp_path, good, case, expected, capsys):
    path = _make(case, tmp_path, good)
    before = path.read_bytes() if path.is_file() else None
    status = main(["inspect", str(path)])
    captured = capsys.readouterr()
    assert status == 2
    assert captured.err.count("\n") == 1 and captured.err.startswith("bandgeo: error:")
    assert expected in captured.err and "Traceback" not in captured.err
    if before is not None:
        assert path.read_bytes() == before  # the input is never modified


def test_real_process_for_truncated_file(tmp_path, good):
    path = _make("truncated", tmp_path, good)
    proc = subprocess.run([sys.executable, "-m", "bandgeo.cli", "inspect", str(path)], capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1 and "Traceback" not in proc.stderr and "truncated" in proc.stderr


@pytest.mark.parametrize("text, expected", [
    ("specimen_id = KRB-07\n", "not valid TOML"),
    ("specimen_id = 'KRB-07'\nstrike = 40\n", "unknown field 'strike'"),
    ("units = 'furlong'\n", "units must be one of"),
    ("up = [0, 0]\n", "up must be three numbers"),
    ("strike_deg = 40\n", "dip_deg is missing"),
    ("strike_deg = 40\ndip_deg = 120\n", "dip_deg must be 0..90"),
    ("scale = { points = [[0, 0, 0], [0, 0, 0]], length = 5 }\n", "same point"),
    ("scale = -2\n", "positive"),
])
def test_bad_sheet(tmp_path, good, text, expected, capsys):
    sheet = tmp_path / "KRB-07 sheet.toml"
    sheet.write_text(text)
    with pytest.raises(InputError) as err:
        read_sheet(sheet)
    assert expected in str(err.value) and "\n" not in str(err.value)
    scan = tmp_path / "good.ply"
    trimesh.Trimesh(*good, process=False).export(str(scan))
    assert main(["inspect", str(scan), "--sheet", str(sheet)]) == 2
    err_text = capsys.readouterr().err
    assert err_text.count("\n") == 1 and expected in err_text


def test_bad_sheet_line_number(tmp_path):
    sheet = tmp_path / "s.toml"
    sheet.write_text("specimen_id = 'KRB-12'\nformation = 'Karrabin Formation'\ndipdeg = 3\n")
    with pytest.raises(InputError, match="line 3"):
        read_sheet(sheet)
