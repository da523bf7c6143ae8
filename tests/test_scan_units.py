"""Units, scale and the specimen sheet: precedence, reference lengths and plausibility warnings."""
import numpy as np
import pytest

from bandgeo.errors import ParameterError
from bandgeo.scan import Scan, ScaleReference, prepare, read_sheet
from test_scan_meshes import domed_column

SHEET = """# Specimen sheet (invented demonstration scenario)
specimen_id = "KRB-31"
units = "cm"
up = [0.0, 0.0, 1.0]
north = [0.0, 1.0, 0.0]
strike_deg = 212.0
dip_deg = 9.0
age_ma = 1105.0
age_err_ma = 12.0
locality = "Tallow Creek, Mirrin Ranges"
horizon = "upper Karrabin, bed 3"
formation = "Karrabin Formation"
collector = "A. Okonkwo-Reyes"
notes = "sawn base"
"""


def _scan(v, f, hint=None):
    return Scan(np.asarray(v, float), np.asarray(f, np.int64), None, "KRB-31.ply", "0" * 64, "ply-binary-le", hint)


@pytest.fixture(scope="module")
def column():
    return domed_column(radius=10.0, height=60.0)  # mm, 64 mm tall with its dome


def test_read_sheet_all_fields(tmp_path):
    path = tmp_path / "KRB-31 sheet.toml"
    path.write_text(SHEET)
    sheet = read_sheet(path)
    assert sheet.specimen_id == "KRB-31" and sheet.units == "cm"
    np.testing.assert_array_equal(sheet.up, [0, 0, 1])
    assert (sheet.strike_deg, sheet.dip_deg, sheet.age_ma, sheet.age_err_ma) == (212.0, 9.0, 1105.0, 12.0)
    assert sheet.collector == "A. Okonkwo-Reyes" and sheet.formation == "Karrabin Formation"
    assert sheet.to_dict()["locality"] == "Tallow Creek, Mirrin Ranges"


def test_sheet_scale_reference(tmp_path):
    path = tmp_path / "s.toml"
    path.write_text('units = "mm"\nscale = { points = [[0, 0, 0], [3, 4, 0]], length = 50.0 }\n')
    sheet = read_sheet(path)
    assert isinstance(sheet.scale, ScaleReference) and sheet.scale.file_distance() == 5.0


def test_sheet_units_and_id_used(tmp_path, column):
    v, f = column
    path = tmp_path / "s.toml"
    path.write_text(SHEET)
    spec = prepare(_scan(v / 10.0, f), sheet=path)  # file in cm
    assert spec.units == "cm" and spec.mm_per_unit == 10.0 and spec.specimen_id == "KRB-31"
    assert spec.up_source == "sheet" and spec.north_known
    assert spec.summary["bedding"] == {"strike_deg": 212.0, "dip_deg": 9.0}
    assert spec.sheet.horizon == "upper Karrabin, bed 3"


def test_precedence_cli_over_sheet_over_file(tmp_path, column):
    v, f = column
    path = tmp_path / "s.toml"
    path.write_text('units = "cm"\n')
    assert prepare(_scan(v, f, "m"), units="mm", sheet=path).units == "mm"
    spec = prepare(_scan(v / 10, f, "m"), sheet=path)
    assert spec.units == "cm" and spec.summary["units_source"] == "sheet"
    spec = prepare(_scan(v / 1000, f, "m"))
    assert spec.units == "m" and spec.summary["units_source"] == "file"
    assert spec.summary["height_mm"] == pytest.approx(64.0, rel=1e-6)


@pytest.mark.parametrize("factor, unit", [(1.0, "mm"), (0.1, "cm"), (0.001, "m")])
def test_units_guessed_from_size_with_warning(column, factor, unit):
    # the 64 mm column written in mm, cm or m: the unit that makes it a hand specimen (common practice)
    v, f = column
    spec = prepare(_scan(v * factor, f))
    assert spec.units == unit and spec.summary["units_source"] == "guessed"
    assert any("units not given" in w for w in spec.warnings)
    assert spec.summary["height_mm"] == pytest.approx(64.0, rel=1e-6)


def test_implausible_size_warns(column):
    # hand specimens: columns 1-10 cm wide and 5-50 cm tall (common practice)
    v, f = column
    # a 64 mm column declared in metres would be a 64 m hand specimen
    spec = prepare(_scan(v, f), units="m")
    assert any("implausible" in w and "64 m" in w and "--units mm" in w for w in spec.warnings)
    spec = prepare(_scan(v * 1e-3, f), units="mm")  # 0.064 mm
    assert any("implausible" in w for w in spec.warnings)
    spec = prepare(_scan(v, f), units="mm")
    assert not any("implausible" in w for w in spec.warnings)


def test_reference_length_sets_the_scale(column):
    # analytic: mm per file unit = true length / distance between the points in file units
    v, f = column
    scan = _scan(v * 0.37, f)  # arbitrary photogrammetry units
    # the two points are 60 mm apart on the real column (base rim to top rim, same azimuth)
    p1, p2 = np.array([10.0, 0, 0]) * 0.37, np.array([10.0, 0, 60.0]) * 0.37
    spec = prepare(scan, scale=(p1, p2, 60.0))
    assert spec.mm_per_unit == pytest.approx(1 / 0.37)
    assert spec.summary["height_mm"] == pytest.approx(64.0, rel=1e-6)
    spec_cm = prepare(scan, scale=ScaleReference(p1, p2, 6.0), units="cm")
    assert spec_cm.mm_per_unit == pytest.approx(1 / 0.37)
    assert prepare(_scan(v / 2, f), scale=2.0).summary["height_mm"] == pytest.approx(64.0, rel=1e-6)


def test_bad_units_and_scale(column):
    v, f = column
    with pytest.raises(ParameterError, match="units must be one of"):
        prepare(_scan(v, f), units="furlong")
    with pytest.raises(ParameterError, match="positive"):
        prepare(_scan(v, f), scale=-1)
    with pytest.raises(ParameterError, match="distinct"):
        prepare(_scan(v, f), scale=([0, 0, 0], [0, 0, 0], 5.0))
