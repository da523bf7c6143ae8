"""The command line: version, help, one-line errors, and the vector syntax people actually type."""
import subprocess
import sys

import numpy as np
import pytest

from bandgeo import __version__
from bandgeo.cli import main
from bandgeo.cli._common import VECTOR


def run(*args):
    proc = subprocess.run([sys.executable, "-m", "bandgeo.cli", *args], capture_output=True, text=True)
    return proc.returncode, proc.stdout, proc.stderr


def test_version():
    code, out, err = run("--version")
    assert code == 0
    assert out.strip() == f"bandgeo {__version__}"


def test_help_lists_commands():
    code, out, _ = run("--help")
    assert code == 0
    assert "Usage" in out and "--quiet" in out


def test_unknown_command_is_one_line_exit_2():
    code, out, err = run("no-such-command")
    assert code == 2
    assert err.count("\n") == 1 and "Traceback" not in err
    assert err.startswith("bandgeo: error:")


@pytest.mark.parametrize("text, expected", [
    ("-0.3,0.1,0.95", [-0.3, 0.1, 0.95]),
    ("0,0,1", [0, 0, 1]),
    ("1e-3,-2,3", [1e-3, -2, 3]),
])
def test_vector_parsing(text, expected):
    np.testing.assert_allclose(VECTOR.convert(text, None, None), expected)


@pytest.mark.parametrize("text", ["1,2", "a,b,c", "0,0,0", "nan,0,1"])
def test_vector_rejects(text):
    import click
    with pytest.raises(click.exceptions.BadParameter):
        VECTOR.convert(text, None, None)


def test_main_returns_status():
    assert main(["--version"]) == 0


def test_readme_python_example_runs_and_covers_the_truth():
    # The README's notebook example, run as written on the bundled sample KRB-07; its truth file
    # (forward model) says how many laminae per year were recorded.
    import json
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    code = (root / "README.md").read_text().split("```python")[1].split("```")[0]
    namespace = {}
    import os
    cwd = os.getcwd()
    os.chdir(root)
    try:
        exec(compile(code, "README.md", "exec"), namespace)
    finally:
        os.chdir(cwd)
    truth = json.loads((root / "sample_meshes" / "KRB-07_annual.truth.json").read_text())
    lo, hi = namespace["days"]["ci95"]
    assert lo <= truth["laminae"]["recorded_laminae_per_year"] <= hi


def test_a_segment_folder_opens_for_review_and_re_runs(tmp_path):
    # 'bandgeo segment' promises its folder opens with 'bandgeo review': the folder must hold the
    # specimen cache beside the segmentation, and the downstream stages must run from it alone.
    import json

    from bandgeo import pipeline
    from bandgeo.results import ResultFolder
    from bandgeo.review.data import FolderData
    from bandgeo.synth import SynthParams, simulate, write_specimen

    path = tmp_path / "KRB 08.ply"
    write_specimen(simulate(SynthParams(years=0.06, radius_mm=3.0, seed=21)), path)
    up = ",".join(str(x) for x in json.loads((tmp_path / "KRB 08.truth.json").read_text())["frames"]["paleo_up_file"])
    out = tmp_path / "segment out"
    assert main(["segment", str(path), "--out", str(out), "--units", "mm", "--up", up, "--seed", "3"]) == 0
    assert {"specimen.npz", "run.json", "segmentation.json", "segmentation_labels.npz"} <= {p.name for p in out.iterdir()}
    inputs = ResultFolder(out).load_inputs()
    assert inputs.params.seed == 3 and inputs.specimen.vertices_mm.dtype == np.float64
    page = FolderData(out)                          # what 'bandgeo review' loads
    assert len(page.segmentation.boundaries) == len(inputs.segmentation.boundaries)
    held = pipeline.Rerunner(out).segmentation     # the review page's re-runner reads the folder once
    assert [b.id for b in held.boundaries] == [b.id for b in inputs.segmentation.boundaries]
