"""Band measurements on boundaries of known geometry (analytic plane geometry), and the CSV table."""
from types import SimpleNamespace

import numpy as np
import pytest

from bandgeo.errors import InputError
from bandgeo.measure import BandTable, direction_angles, mean_growth_direction, measure_bands
from bandgeo.segment import Boundary, Centreline, Segmentation, assign_bands


def unit(v):
    v = np.asarray(v, float)
    return v / np.linalg.norm(v)


def straight_axis(t, length=20.0):
    s = np.linspace(0.0, length, 41)
    return Centreline(s, s[:, None] * t[None, :], np.repeat(t[None, :], len(s), axis=0))


def column(t, radius=3.0, length=20.0, n=30000, seed=0):
    rng = np.random.default_rng(seed)
    s = rng.uniform(0, length, n)
    th = rng.uniform(0, 2 * np.pi, n)
    e1 = unit(np.cross(t, [1.0, 0, 0]))
    e2 = np.cross(t, e1)
    return s[:, None] * t + radius * (np.cos(th)[:, None] * e1 + np.sin(th)[:, None] * e2)


def seg_for(boundaries, axis, v):
    band = assign_bands(v, boundaries, axis)
    return Segmentation(boundaries=boundaries, axis=axis, vertex_class=np.zeros(len(v), np.int8),
                        class_names=["groove"], vertex_band=band,
                        resolution={"flagged": [[5.0, 6.0, "bands thinner than 3 x the sampling interval"]]},
                        warnings=[], params={})


def test_inclination_and_azimuth_of_a_tilted_column():
    # growth direction tilted 12 deg toward azimuth 135 deg (south-east): x = sin(i) sin(a), y = sin(i) cos(a)
    inc, az = 12.0, 135.0
    t = np.array([np.sin(np.radians(inc)) * np.sin(np.radians(az)),
                  np.sin(np.radians(inc)) * np.cos(np.radians(az)), np.cos(np.radians(inc))])
    axis = straight_axis(t)
    v = column(t)
    heights = [1.0, 1.5, 2.3, 3.0, 5.2, 5.5]
    bs = [Boundary.from_height(h, axis, id=i, origin="auto") for i, h in enumerate(heights)]
    table = measure_bands(SimpleNamespace(vertices_mm=v, north_known=True), seg_for(bs, axis, v))
    # parallel planes across the axis: thickness = height difference (construction), no spread around
    assert np.allclose(table.thickness_axis_mm, np.diff(heights))
    assert np.allclose(table.thickness_median_mm, np.diff(heights))
    assert np.allclose(table.thickness_iqr_mm, 0.0, atol=1e-9)
    assert np.allclose(table.inclination_deg, inc) and np.allclose(table.azimuth_deg, az)
    assert np.allclose(mean_growth_direction(table), t)
    # the stretch 5.0-6.0 mm is flagged on the band it overlaps (the last one)
    assert "thinner" in table.flags[-1] and table.flags[0] == ""
    assert len(table) == len(heights) - 1 and list(table.index) == list(range(len(heights) - 1))


def test_azimuth_convention_clockwise_from_north():
    # atan2(x, y) (common practice): north 0, east 90, south 180, west 270
    g = np.array([[0.1, 1, 10], [1, 0, 10], [0, -1, 10], [-1, 0, 10]], float)
    g = g / np.linalg.norm(g, axis=1, keepdims=True)
    inc, az = direction_angles(g)
    assert np.allclose(az, [np.degrees(np.arctan2(0.1, 1)), 90, 180, 270])
    assert np.allclose(inc[1:], np.degrees(np.arctan(0.1)))


def test_wedge_shaped_band():
    # plane geometry (construction): base plane z = 2 with normal z, top plane through (0, 0, 3) with
    # normal n tilted by a about y. Along g = unit(z + n) the distance from a base point p to the top
    # plane is ((c_top - p) . n) / (g . n). At the axis that is cos(a) / (g . n); around the base ring
    # at radius r it varies as r sin(a) cos(theta) / (g . n), symmetric about the axis value, so the
    # median is the axis value and the IQR is that of a sinusoid, sqrt(2) r sin(a) / (g . n).
    a, r = np.radians(2.0), 3.0
    t = np.array([0.0, 0.0, 1.0])
    axis = straight_axis(t)
    v = column(t, radius=r)
    n_top = np.array([np.sin(a), 0.0, np.cos(a)])
    bs = [Boundary(0, 2.0, [0, 0, 2.0], t), Boundary(1, 3.0, [0, 0, 3.0], n_top)]
    table = measure_bands(SimpleNamespace(vertices_mm=v, north_known=True), seg_for(bs, axis, v))
    g = unit(t + n_top)
    expected_axis = np.dot([0, 0, 1.0], n_top) / np.dot(g, n_top)
    assert table.thickness_axis_mm[0] == pytest.approx(expected_axis, rel=1e-9)
    assert table.thickness_median_mm[0] == pytest.approx(expected_axis, rel=1e-3)
    assert table.thickness_iqr_mm[0] == pytest.approx(np.sqrt(2) * r * np.sin(a) / np.dot(g, n_top), rel=0.02)
    assert table.inclination_deg[0] == pytest.approx(1.0, abs=1e-6)  # half of the 2-degree wedge


def test_north_unknown_and_no_bands_warn():
    t = np.array([0.0, 0.0, 1.0])
    axis = straight_axis(t)
    v = column(t, n=2000)
    bs = [Boundary.from_height(h, axis, id=i, origin="auto") for i, h in enumerate([1.0, 2.0])]
    table = measure_bands(SimpleNamespace(vertices_mm=v, north_known=False), seg_for(bs, axis, v))
    assert any("north is not known" in w for w in table.warnings)
    empty = measure_bands(SimpleNamespace(vertices_mm=v, north_known=True), seg_for(bs[:1], axis, v))
    assert len(empty) == 0 and empty.warnings
    with pytest.raises(InputError):
        measure_bands(SimpleNamespace(vertices_mm=v[:10]), seg_for(bs, axis, v))


def test_csv_round_trip_with_units_in_headers(tmp_path):
    t = np.array([0.0, 0.0, 1.0])
    axis = straight_axis(t)
    v = column(t, n=5000)
    bs = [Boundary.from_height(h, axis, id=i, origin="auto") for i, h in enumerate([1.0, 1.4, 2.0, 2.9])]
    bs[1].flags.append("gap filled")
    table = measure_bands(SimpleNamespace(vertices_mm=v, north_known=True), seg_for(bs, axis, v))
    path = tmp_path / "bands dir" / "bands.csv"
    table.to_csv(path)
    header = path.read_text().splitlines()[0].split(",")
    assert header[:8] == ["band_index", "base_mm", "top_mm", "thickness_axis_mm", "thickness_median_mm",
                          "thickness_iqr_mm", "inclination_deg", "azimuth_deg"]
    back = BandTable.from_csv(path)
    assert np.allclose(back.thickness_axis_mm, table.thickness_axis_mm, rtol=1e-5)
    assert back.flags == table.flags and "gap filled" in back.flags[0]
    recs = table.to_records()
    assert recs[1]["thickness_axis_mm"] == pytest.approx(0.6) and recs[1]["band_index"] == 1
    bad = tmp_path / "bad.csv"
    bad.write_text("a,b\n1,2\n")
    with pytest.raises(InputError):
        BandTable.from_csv(bad)
    bad.write_text(path.read_text().replace("0.6", "zero point six", 1))
    with pytest.raises(InputError):
        BandTable.from_csv(bad)
    with pytest.raises(InputError):
        BandTable.from_csv(tmp_path / "missing.csv")
