"""``bandgeo inspect``: text with units on every number, JSON, and the shared scan options."""
import json
import re
import subprocess
import sys

import numpy as np
import pytest

from bandgeo.cli import main
from test_scan_meshes import posed_column, write_ply

import trimesh  # a hard dependency (pyproject.toml): imported, never skipped


@pytest.fixture()
def scan_file(tmp_path):
    v, f, up = posed_column(21, base="cut")
    colors = np.full((len(v), 3), 200, np.uint8)
    path = write_ply(tmp_path / "KRB 07 scan.PLY", v / 10.0, f, colors)  # file in cm
    return path, up


def test_text_block_has_units(scan_file, capsys):
    # every number shown to a user carries its unit (project rule); the column is 64 mm tall (analytic)
    path, _ = scan_file
    assert main(["inspect", str(path), "--units", "cm"]) == 0
    out = capsys.readouterr().out
    assert "height 6.4 cm" in out and "(height 64 mm" in out
    assert re.search(r"median edge\s+[\d.]+ cm \([\d.]+ mm\)", out)
    assert "colours      yes" in out and "confidence" in out and "(0..1)" in out
    # every decimal number on the size, edge and up lines carries a unit (or is a unit-less 0..1 / vector)
    for line in out.splitlines():
        if line.startswith(("size", "median edge")):
            assert re.findall(r"\d(?: ?)(?:cm|mm)\b", line)


def test_json_output(scan_file, capsys):
    path, up = scan_file
    assert main(["inspect", str(path), "--json", "--units", "cm"]) == 0
    info = json.loads(capsys.readouterr().out)
    assert info["schema"] == "bandgeo.inspect/1"
    assert info["units"] == "cm" and info["mm_per_unit"] == 10.0
    assert info["size_mm"]["height"] == pytest.approx(64.0, rel=1e-4)
    assert info["size"]["height"] == pytest.approx(6.4, rel=1e-4)
    angle = np.degrees(np.arccos(np.clip(np.dot(info["up"]["scan_frame"], up), -1, 1)))
    assert angle < 1.0
    assert info["up"]["estimated"]["method"] and len(info["up"]["estimated"]["ci95_deg"]) == 2
    assert info["vertices"] > 0 and info["pieces"] == 1 and info["holes"] == 0 and info["colors"] is True


def test_options_up_north_bedding(scan_file, capsys):
    path, up = scan_file
    up_txt = ",".join(f"{x:.9f}" for x in up)
    assert main(["inspect", str(path), "--json", "--units", "cm", "--up", up_txt, "--north", "1,0,0",
                 "--strike", "30", "--dip", "10"]) == 0
    info = json.loads(capsys.readouterr().out)
    assert info["up"]["source"] == "cli" and info["north_known"]
    assert info["bedding"] == {"strike_deg": 30.0, "dip_deg": 10.0}
    # analytic: rotating about the strike line by the dip moves the field vertical by exactly the dip
    angle = np.degrees(np.arccos(np.clip(np.dot(info["up"]["scan_frame"], up), -1, 1)))
    assert angle == pytest.approx(10.0, abs=1e-6)


def test_scale_points_option(scan_file, capsys):
    path, _ = scan_file
    assert main(["inspect", str(path), "--json", "--scale-points", "0,0,0,0,0,3.2", "--scale-length", "64",
                 "--units", "mm"]) == 0
    info = json.loads(capsys.readouterr().out)
    assert info["mm_per_unit"] == pytest.approx(20.0)  # 64 mm over 3.2 file units
    assert "reference length" in info["scale"]


@pytest.mark.parametrize("args, expected", [
    (["--strike-dip", "30,10"], "needs the specimen's field vertical and north"),
    (["--strike", "30"], "--strike and --dip go together"),
    (["--scale-points", "0,0,0,1,1,1"], "--scale-points and --scale-length go together"),
    (["--up", "0,0"], "expected three"),
    (["--strike-dip", "30"], "expected 2"),
])
def test_option_errors_are_one_line(scan_file, capsys, args, expected):
    path, _ = scan_file
    assert main(["inspect", str(path), *args]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and expected in err and "Traceback" not in err


def test_console_entry_point(scan_file):
    path, _ = scan_file
    proc = subprocess.run([sys.executable, "-m", "bandgeo.cli", "inspect", str(path), "--units", "cm"],
                          capture_output=True, text=True)
    assert proc.returncode == 0 and "units        cm" in proc.stdout


def test_prepare_from_options_matches_prepare(scan_file):
    from bandgeo.cli._scan_options import prepare_from_options
    from bandgeo.scan import load_scan, prepare

    path, up = scan_file
    a = prepare_from_options(path, units="cm", up=up, north=None, strike_dip=None, strike=None, dip=None,
                             sheet=None, scale_points=None, scale_length=None, out="ignored")
    b = prepare(load_scan(path), units="cm", up=up)
    np.testing.assert_array_equal(a.vertices_mm, b.vertices_mm)
    np.testing.assert_array_equal(a.scan_to_specimen, b.scan_to_specimen)
