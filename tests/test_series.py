"""Band series: from a band table, from arrays and from CSV files (good and bad)."""
import numpy as np
import pytest

from bandgeo.errors import InputError, SeriesError
from bandgeo.measure import BandTable
from bandgeo.series import build_series, fit_sway_plane, read_series_csv, series_from_thickness


def table(n=100, seed=0):
    rng = np.random.default_rng(seed)
    h = rng.uniform(0.2, 0.3, n)
    top = np.cumsum(h)
    t = np.arange(n)
    sway = 3.0 * np.sin(2 * np.pi * t / 40)
    east = 1.0 + sway * np.sin(np.radians(60))
    north = 0.5 + sway * np.cos(np.radians(60))
    flags = [""] * n
    flags[10] = "possible hiatus"
    return BandTable(index=t, base_mm=top - h, top_mm=top, thickness_axis_mm=h, thickness_median_mm=h * 1.01,
                     thickness_iqr_mm=h * 0.1, inclination_deg=np.hypot(east, north),
                     azimuth_deg=np.degrees(np.arctan2(east, north)) % 360, confidence=np.ones(n),
                     flags=flags), sway


def test_build_series_from_band_table_recovers_the_sway_plane():
    # Geometry (common practice): tilt vectors inc*(sin az, cos az) swing along the plane azimuth 60 deg.
    bt, sway = table()
    before = bt.thickness_axis_mm.copy()
    s = build_series(bt)
    assert len(s) == 100
    np.testing.assert_array_equal(s.thickness_mm, bt.thickness_axis_mm)
    assert s.sway_azimuth_deg == pytest.approx(60.0, abs=0.01)
    # component along the plane = sway + projection of the mean lean
    mean_along = 1.0 * np.sin(np.radians(60)) + 0.5 * np.cos(np.radians(60))
    np.testing.assert_allclose(s.sway_deg, sway + mean_along, atol=1e-9)
    assert s.hiatus_flags[10] and s.hiatus_flags.sum() == 1
    np.testing.assert_array_equal(bt.thickness_axis_mm, before)   # input untouched


def test_missing_axis_thickness_falls_back_to_median_with_warning():
    bt, _ = table()
    bt.thickness_axis_mm[5] = np.nan
    s = build_series(bt)
    assert s.thickness_mm[5] == pytest.approx(bt.thickness_median_mm[5])
    assert any("median" in w for w in s.warnings)


def test_sway_plane_of_forward_model_matches_its_truth():
    # The forward model's sway_deg is the tilt component along its sway azimuth (30 deg by default);
    # its growth meander (a random walk off the sway plane) is switched off so the plane is exact.
    from bandgeo.synth import SynthParams, simulate_laminae

    rec = simulate_laminae(SynthParams(years=2, seed=2, meander_amplitude_deg=0.0))
    sway, az = fit_sway_plane(rec.inclination_deg, rec.azimuth_deg)
    assert az == pytest.approx(rec.params.sway_azimuth_deg % 180, abs=0.01)
    np.testing.assert_allclose(sway, rec.sway_deg, atol=1e-9)


def test_csv_with_micrometre_header_and_tilt(tmp_path):
    p = tmp_path / "thin section KRB-07.CSV"
    rows = ["thickness_um,inclination_deg,azimuth_deg"] + [f"{250 + i % 7},{2 + i % 3},{100 + i}" for i in range(60)]
    p.write_text("\n".join(rows) + "\n")
    s = read_series_csv(p)
    assert len(s) == 60
    assert s.thickness_mm[0] == pytest.approx(0.25)
    assert s.inclination_deg is not None and s.sway_deg is not None


def test_csv_without_header_is_taken_as_mm_with_warning(tmp_path):
    p = tmp_path / "plain.csv"
    p.write_text("\n".join(str(0.2 + 0.01 * (i % 5)) for i in range(40)))
    s = read_series_csv(p)
    assert s.thickness_mm[1] == pytest.approx(0.21)
    assert any("no header" in w for w in s.warnings)


@pytest.mark.parametrize("content, err, words", [
    ("thickness_mm\n" + "0.2\n" * 10, SeriesError, "at least"),
    ("thickness_mm\n" + "0.2\n" * 30 + "abc\n", InputError, "not a number"),
    ("thickness_mm\n" + "0.2\n" * 30 + "nan\n", SeriesError, "missing"),
    ("thickness_mm\n" + "0.2\n" * 30 + "-0.1\n", SeriesError, "positive"),
    ("depth,value\n1,2\n", InputError, "no thickness column"),
    ("", InputError, "empty"),
])
def test_bad_csv_gives_one_line_error(tmp_path, content, err, words):
    p = tmp_path / "bad.csv"
    p.write_text(content)
    with pytest.raises(err) as exc:
        read_series_csv(p)
    assert words in str(exc.value)
    assert "\n" not in str(exc.value)


def test_missing_file_is_input_error(tmp_path):
    with pytest.raises(InputError):
        read_series_csv(tmp_path / "nope.csv")


def test_series_from_thickness_checks_lengths():
    with pytest.raises(SeriesError):
        series_from_thickness(np.ones(50), inclination_deg=np.ones(49))


def test_only_hiatus_marks_count_as_hiatus_flags():
    # A ring-tracing repair note ("gap filled") is not evidence of missing days; a review mark is.
    from bandgeo.measure import BandTable
    from bandgeo.series import build_series

    n = 40
    rng = np.random.default_rng(0)
    flags = [""] * n
    flags[3] = "gap filled; low confidence"
    flags[7] = "hiatus: missing days after a storm layer"
    thickness = rng.uniform(0.2, 0.3, n)
    top = np.cumsum(thickness)
    table = BandTable(index=np.arange(n), base_mm=top - thickness, top_mm=top, thickness_axis_mm=thickness,
                      thickness_median_mm=rng.uniform(0.2, 0.3, n), thickness_iqr_mm=np.zeros(n),
                      inclination_deg=np.full(n, 2.0), azimuth_deg=np.full(n, 30.0), confidence=np.ones(n),
                      flags=flags)
    series = build_series(table)
    assert np.flatnonzero(series.hiatus_flags).tolist() == [7]
