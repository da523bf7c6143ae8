"""``bandgeo segment``: outputs, summary line, one-line errors (exit 2), paths with spaces and .PLY."""
import json

import numpy as np
import pytest

from bandgeo.cli import main
from bandgeo.measure import BandTable
from bandgeo.segment import Segmentation


@pytest.fixture(scope="module")
def scan_file(tmp_path_factory):
    from bandgeo.synth import SynthParams, simulate, write_specimen

    folder = tmp_path_factory.mktemp("scan folder")
    spec = simulate(SynthParams(years=0.06, radius_mm=3.0, seed=21))
    path = folder / "KRB 07.PLY"
    write_specimen(spec, path)
    truth = json.loads((folder / "KRB 07.truth.json").read_text())
    return path, truth


def test_segment_writes_outputs(scan_file, tmp_path, capsys):
    path, truth = scan_file
    up = ",".join(str(x) for x in truth["frames"]["paleo_up_file"])
    out = tmp_path / "seg out"
    status = main(["segment", str(path), "--out", str(out), "--units", "mm", "--up", up])
    text = capsys.readouterr().out
    assert status == 0
    for name in ("segmentation.json", "segmentation_labels.npz", "bands.csv"):
        assert (out / name).is_file()
    seg = Segmentation.load(out)
    table = BandTable.from_csv(out / "bands.csv")
    assert len(table) == len(seg.boundaries) - 1 > 10
    # every number in the summary carries its unit
    assert "bands between" in text and " mm" in text and " deg" in text
    # the laminae of the forward model (construction: 24 laminae of about 0.25 mm)
    n_true = truth["laminae"]["n_recorded"]
    assert abs(len(table) - (n_true - 2)) <= 1
    assert np.median(table.thickness_axis_mm) == pytest.approx(np.median(truth["laminae"]["thickness_mm"]), rel=0.1)


def test_segment_bad_input_is_one_line_exit_2(tmp_path, capsys):
    status = main(["segment", str(tmp_path / "no such.ply"), "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err
    assert status == 2 and err.count("\n") == 1 and "error" in err
    bad = tmp_path / "broken.ply"
    bad.write_bytes(b"ply\nformat nonsense\n")
    status = main(["segment", str(bad), "--out", str(tmp_path / "o")])
    assert status == 2 and capsys.readouterr().err.count("\n") == 1


def test_segment_bad_classes_option(scan_file, tmp_path, capsys):
    path, _ = scan_file
    status = main(["segment", str(path), "--out", str(tmp_path / "o"), "--classes", "lots", "--units", "mm"])
    assert status == 2 and "--classes" in capsys.readouterr().err
