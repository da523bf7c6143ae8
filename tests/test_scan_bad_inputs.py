"""Bad input: every broken scan gets one line saying what is wrong and what to do, exit status 2.

The corpus is generated here in tmp_path. Expected behaviour from the issue text (common practice for
command-line tools: one message on stderr, non-zero status, no traceback).
"""
import re
import subprocess
import sys

import numpy as np
import pytest

from bandgeo.cli import main
from bandgeo.errors import InputError, ParameterError
from bandgeo.scan import load_scan, prepare, read_sheet

import trimesh  # a hard dependency (pyproject.toml): imported, never skipped


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
                  "obj_garbage": "scan.obj"}.get(case, f"{case}.obj" if case.startswith("obj") else f"{case}.ply")
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
    elif case in ("scaled_1e-30", "coords_1e308", "coords_1e20"):
        factor = {"scaled_1e-30": 1e-30, "coords_1e308": 1e306, "coords_1e20": 1e20}[case]
        path.write_text(_ascii_ply(v * factor, f))
    elif case.startswith("obj_short_v"):
        path.write_text(_obj(v, f, short=(5, int(case[-1]))))
    elif case == "obj_ragged":
        path.write_text(_obj(v, f, short=(5, 4)))
    elif case == "obj_inf":
        w = v.copy()
        w[3, 0] = np.inf
        path.write_text(_obj(w, f))
    return path


def _ascii_ply(verts, faces):
    head = (f"ply\nformat ascii 1.0\nelement vertex {len(verts)}\nproperty double x\nproperty double y\n"
            f"property double z\nelement face {len(faces)}\nproperty list uchar int vertex_indices\nend_header\n")
    return head + "".join("%r %r %r\n" % tuple(map(float, p)) for p in verts) \
        + "".join("3 %d %d %d\n" % tuple(q) for q in faces)


def _obj(verts, faces, short=None):
    """OBJ text; ``short=(k, c)`` writes vertex k with its first c values (c = 4 adds a w value)."""
    lines = []
    for i, p in enumerate(np.asarray(verts, float).tolist()):
        if short is not None and i == short[0]:
            vals = (p + [1.0])[:short[1]]
            lines.append("v " + " ".join(repr(x) for x in vals))
        else:
            lines.append("v %r %r %r" % tuple(p))
    lines += ["f %d %d %d" % tuple(q + 1) for q in np.asarray(faces)]
    return "\n".join(lines) + "\n"


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
    # issue 15 F11-F13: each was an internal error or a misleading message with warnings printed first
    ("scaled_1e-30", "4e-29 mm across"),
    ("coords_1e308", "coordinates reach"),
    ("coords_1e20", "coordinates reach"),
    ("obj_short_v1", "OBJ line 6 is a vertex line with 1 number"),
    ("obj_short_v2", "OBJ line 6 is a vertex line with 2 numbers"),
    ("obj_ragged", "different numbers of values"),
    ("obj_inf", "NaN or infinite"),
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
    # issue 15 F14: angles, ages and scales are range-checked (strike is an azimuth, 0..360 degrees)
    ("strike_deg = 400\ndip_deg = 10\n", "strike_deg must be 0..360"),
    ("strike_deg = -720.5\ndip_deg = 10\n", "strike_deg must be 0..360"),
    ("age_ma = 9000\n", "age_ma must be 0..4600"),
    ("scale = 1e-30\n", "scale must be between"),
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


@pytest.mark.parametrize("strike_dip, expected", [
    ("400,10", "strike must be between 0 and 360 degrees"),
    ("-720.5,10", "strike must be between 0 and 360 degrees"),
    ("40,-0.2", "but got -0.2;"),
])
def test_bad_strike_dip_on_the_command_line(tmp_path, good, strike_dip, expected, capsys):
    scan = tmp_path / "good.ply"
    trimesh.Trimesh(*good, process=False).export(str(scan))
    status = main(["inspect", str(scan), "--up", "0,0,1", "--north", "0,1,0", f"--strike-dip={strike_dip}"])
    err = capsys.readouterr().err
    assert status == 2 and err.count("\n") == 1 and expected in err


def test_numpy_values_are_shown_as_plain_numbers(good):
    # issue 15: a message printed "np.float64(-0.2)"
    scan = load_scan_from_arrays(*good)
    with pytest.raises(ParameterError) as err:
        prepare(scan, scale=np.float64(-0.2))
    assert "np.float64" not in str(err.value) and "-0.2" in str(err.value)


@pytest.mark.parametrize("case", ["coords_1e308", "coords_1e20", "obj_inf", "scaled_1e-30"])
def test_no_warning_leaks_before_the_error(tmp_path, good, case):
    # issue 15 F13: numeric RuntimeWarnings were printed before the one-line error; a real process, so
    # that nothing (pytest's warning capture) hides what the terminal would show
    path = _make(case, tmp_path, good)
    proc = subprocess.run([sys.executable, "-m", "bandgeo.cli", "inspect", str(path)], capture_output=True,
                          text=True)
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1 and "Warning" not in proc.stderr and "Traceback" not in proc.stderr


def load_scan_from_arrays(v, f):
    from bandgeo.scan import Scan
    return Scan(vertices=np.asarray(v), faces=np.asarray(f), colors=None, path="arrays.ply",
                sha256="0" * 64, file_format="ply-binary-le")


@pytest.mark.parametrize("vertices, faces, expected", [
    (np.zeros((5, 2)), np.zeros((1, 3), int), "(n, 3) array of numbers"),
    (np.zeros((5, 3)), np.array([[0, 1, 9]]), "outside 0..4"),
    (np.zeros((5, 3)), np.zeros((1, 3)), "whole numbers"),
    (np.zeros((0, 3)), np.zeros((0, 3), int), "(n, 3) array of numbers"),
])
def test_hand_built_scan_is_checked(vertices, faces, expected):
    # issue 15 F12 was an IndexError inside the cleanup; arrays of the wrong shape are refused up front
    with pytest.raises(ParameterError, match=re.escape(expected)):
        prepare(load_scan_from_arrays(vertices, faces))


def test_float32_int32_scan_gives_the_same_specimen(good):
    v, f = good
    a = prepare(load_scan_from_arrays(v.astype(np.float32).astype(float), f))
    b = prepare(load_scan_from_arrays(v.astype(np.float32), f.astype(np.int32)))
    np.testing.assert_array_equal(a.vertices_mm, b.vertices_mm)
    np.testing.assert_array_equal(a.faces, b.faces)
