"""Orientation: bedding correction by strike and dip, the estimated way-up, north, and the recorded transforms."""
import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from bandgeo.errors import ParameterError
from bandgeo.scan import Scan, prepare
from bandgeo.scan.orient import bed_pole, bedding_rotation, estimate_up, frame_rows, rotation_between
from test_scan_meshes import domed_column, posed_column

import trimesh  # a hard dependency (pyproject.toml): imported, never skipped


def _angle(a, b):
    a, b = np.asarray(a, float), np.asarray(b, float)
    return np.degrees(np.arccos(np.clip(a @ b / np.linalg.norm(a) / np.linalg.norm(b), -1, 1)))


def _scan(v, f, path="column.ply"):
    return Scan(vertices=np.asarray(v, float), faces=np.asarray(f, np.int64), colors=None, path=path,
                sha256="0" * 64, file_format="ply-binary-le", units_hint="mm")


def _inclination_azimuth(vec):
    vec = np.asarray(vec, float) / np.linalg.norm(vec)
    return np.degrees(np.arccos(vec[2])), np.degrees(np.arctan2(vec[0], vec[1])) % 360.0


# --- strike and dip ------------------------------------------------------------------------------
# Right-hand rule: with strike 000 the bed dips to the east (dip direction = strike + 90 = 090).
# Fossen, Structural Geology, 2nd ed. (2016), chapter 1 on orientation conventions (page from memory).

def test_right_hand_rule_pole():
    inc, az = _inclination_azimuth(bed_pole(0.0, 30.0))
    assert inc == pytest.approx(30.0) and az == pytest.approx(90.0)  # pole leans toward the dip direction
    inc, az = _inclination_azimuth(bed_pole(45.0, 20.0))
    assert inc == pytest.approx(20.0) and az == pytest.approx(135.0)


def test_bed_dipping_30_toward_090_comes_back_horizontal():
    # analytic case: the plane z = -tan(30 deg) x dips 30 deg toward the east (090)
    rng = np.random.default_rng(0)
    xy = rng.uniform(-50, 50, (500, 2))
    pts = np.column_stack([xy, -np.tan(np.radians(30.0)) * xy[:, 0] + 7.0])
    out = pts @ bedding_rotation(0.0, 30.0).T
    assert np.ptp(out[:, 2]) < 1e-9


def test_vertical_column_tilts_by_the_dip():
    # a column that stands vertical today leaned by the dip, away from the dip direction, when the bed
    # was horizontal (analytic: rotation about the strike line by the dip angle)
    col = bedding_rotation(0.0, 30.0) @ np.array([0.0, 0.0, 1.0])
    inc, az = _inclination_azimuth(col)
    assert inc == pytest.approx(30.0) and az == pytest.approx(270.0)


@pytest.mark.parametrize("strike, dip", [(0, 30), (45, 20), (210, 65), (333, 5), (90, 90)])
def test_bedding_rotation_is_about_the_strike_line(strike, dip):
    rot = bedding_rotation(strike, dip)
    s = np.radians(strike)
    strike_vec = np.array([np.sin(s), np.cos(s), 0.0])
    np.testing.assert_allclose(rot @ strike_vec, strike_vec, atol=1e-12)
    np.testing.assert_allclose(rot @ bed_pole(strike, dip), [0, 0, 1], atol=1e-12)
    # reference library: scipy's rotation about the strike line by the dip, sign chosen by the pole
    cand = [Rotation.from_rotvec(sign * np.radians(dip) * strike_vec).as_matrix() for sign in (1, -1)]
    ref = min(cand, key=lambda m: np.linalg.norm(m @ bed_pole(strike, dip) - [0, 0, 1]))
    np.testing.assert_allclose(rot, ref, atol=1e-12)


def test_bad_dip():
    with pytest.raises(ParameterError, match="dip must be between 0 and 90"):
        bedding_rotation(10, 95)


def test_rotation_between_antiparallel_and_generic():
    rng = np.random.default_rng(3)
    for _ in range(20):
        a, b = rng.normal(size=3), rng.normal(size=3)
        rot = rotation_between(a, b)
        np.testing.assert_allclose(rot @ (a / np.linalg.norm(a)), b / np.linalg.norm(b), atol=1e-12)
        np.testing.assert_allclose(rot @ rot.T, np.eye(3), atol=1e-12)
        assert np.linalg.det(rot) == pytest.approx(1.0)
    rot = rotation_between([0, 0, 1], [0, 0, -1])
    np.testing.assert_allclose(rot @ [0, 0, 1], [0, 0, -1], atol=1e-12)


def test_frame_is_right_handed_east_north_up():
    rows, known = frame_rows([0, 0, 2.0], [0, 3.0, 0.5])
    assert known
    np.testing.assert_allclose(rows, np.eye(3), atol=1e-12)  # x east, y north, z up; x = y cross z
    rows, known = frame_rows([0.3, -0.2, 0.9])
    assert not known and np.linalg.det(rows) == pytest.approx(1.0)


# --- estimated way-up ----------------------------------------------------------------------------
@pytest.mark.parametrize("seed, base, grooves", [(0, "cut", 0.0), (1, "cut", 0.08), (2, "open", 0.0),
                                                 (3, "open", 0.08), (4, "cut", 0.0), (5, "open", 0.0)])
def test_up_estimate_on_known_poses(seed, base, grooves):
    v, f, up = posed_column(seed, base=base, grooves=grooves, rings=80)
    spec = prepare(_scan(v, f))
    assert spec.up_source == "estimated"
    # truth: the column's axis was z before the (scipy uniform random) rotation
    assert _angle(spec.summary["paleo_up_scan"], up) < 1.0
    assert spec.up_confidence > 0.7
    assert not [w for w in spec.warnings if "way-up" in w]


def test_ambiguous_ends_warn():
    # a plain cylinder: both ends are flat cuts, nothing says which is the top
    cyl = trimesh.creation.cylinder(radius=10.0, height=60.0, sections=48)
    spec = prepare(_scan(cyl.vertices, cyl.faces))
    assert spec.up_confidence < 0.6
    assert any("cannot tell the domed top" in w for w in spec.warnings)
    # the long axis itself is still found (the cylinder's axis is z in trimesh)
    assert min(_angle(spec.summary["paleo_up_scan"], [0, 0, 1]), _angle(spec.summary["paleo_up_scan"], [0, 0, -1])) < 1


def test_round_specimen_warns():
    ball = trimesh.creation.icosphere(subdivisions=3, radius=30.0)
    spec = prepare(_scan(ball.vertices, ball.faces))
    assert spec.up_confidence < 0.5 and any("poorly defined" in w for w in spec.warnings)


def test_given_up_against_the_shape_warns():
    v, f = domed_column()
    spec = prepare(_scan(v, f), up=[0, 0, -1])
    assert spec.up_source == "cli" and spec.up_confidence == 1.0
    assert any("does not point to the base" in w for w in spec.warnings)


def test_estimate_on_few_faces_samples_consistently():
    v, f, up = posed_column(11, rings=200, sections=96)
    est = estimate_up(v, f, max_faces=5000)
    assert _angle(est.up, up) < 1.5


# --- the specimen frame and its transforms --------------------------------------------------------
def test_given_up_and_north_restore_the_upright_column():
    v0, f = domed_column(base="cut")
    v, f2, up = posed_column(7, base="cut")
    rot = Rotation.random(random_state=np.random.default_rng(7)).as_matrix()
    north = rot @ np.array([0.0, 1.0, 0.0])
    spec = prepare(_scan(v, f2), up=up, north=north, units="cm")
    assert spec.north_known and spec.units == "cm" and spec.mm_per_unit == 10.0
    # upright again, scaled cm -> mm: the original coordinates times 10 (the column was built on its axis)
    np.testing.assert_allclose(spec.vertices_mm, v0[spec.scan_vertex_index] * 10.0, atol=1e-6)
    # north maps to +y, up to +z
    r = spec.scan_to_specimen[:3, :3] / 10.0
    np.testing.assert_allclose(r @ north, [0, 1, 0], atol=1e-9)
    np.testing.assert_allclose(r @ up, [0, 0, 1], atol=1e-9)


def test_transforms_compose_and_map_back():
    v, f, up = posed_column(9)
    spec = prepare(_scan(v, f), strike_dip=(40, 25), up=up, north=[1, 0, 0], units="mm")
    composed = np.eye(4)
    for step in spec.transforms:
        composed = np.asarray(step["matrix"]) @ composed
    np.testing.assert_allclose(composed, spec.scan_to_specimen, atol=1e-12)
    assert [t["step"] for t in spec.transforms] == ["scale", "orient", "bedding", "origin"]
    np.testing.assert_allclose(spec.to_scan_frame(spec.vertices_mm), v[spec.scan_vertex_index], atol=1e-8)
    hom = np.column_stack([v[spec.scan_vertex_index], np.ones(len(spec.vertices_mm))])
    np.testing.assert_allclose((hom @ spec.scan_to_specimen.T)[:, :3], spec.vertices_mm, atol=1e-8)


def test_bedding_correction_in_prepare_tilts_the_column():
    # a column standing vertical in a bed dipping 30 deg toward 090 (file frame = east, north, up)
    v, f = domed_column(height=80.0)
    spec = prepare(_scan(v, f), up=[0, 0, 1], north=[0, 1, 0], strike_dip=(0, 30), units="mm")
    axis = spec.scan_to_specimen[:3, :3] @ np.array([0.0, 0.0, 1.0])
    inc, az = _inclination_azimuth(axis)
    assert inc == pytest.approx(30.0, abs=1e-9) and az == pytest.approx(270.0, abs=1e-9)
    assert spec.summary["bedding"] == {"strike_deg": 0.0, "dip_deg": 30.0}


def test_origin_on_axis_at_base():
    v, f, up = posed_column(12, base="open")
    spec = prepare(_scan(v, f), up=up)
    assert spec.vertices_mm[:, 2].min() == pytest.approx(0.0, abs=1e-9)
    ring = spec.vertices_mm[spec.vertices_mm[:, 2] < 1e-6]
    np.testing.assert_allclose(ring[:, :2].mean(axis=0), [0, 0], atol=1e-6)


def test_bedding_without_north_is_refused():
    v, f = domed_column()
    with pytest.raises(ParameterError, match="needs the specimen's field vertical and north"):
        prepare(_scan(v, f), up=[0, 0, 1], strike_dip=(10, 20))
    with pytest.raises(ParameterError, match="needs the specimen's field vertical and north"):
        prepare(_scan(v, f), north=[0, 1, 0], strike_dip=(10, 20))
