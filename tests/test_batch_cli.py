"""The ``bandgeo batch`` and ``bandgeo power`` commands: exit status, one-line errors, printed tables."""
import json
import subprocess
import sys

import pytest


def run(*args, cwd=None):
    proc = subprocess.run([sys.executable, "-m", "bandgeo.cli", *map(str, args)], capture_output=True,
                          text=True, cwd=cwd, timeout=300)
    return proc.returncode, proc.stdout, proc.stderr


def _one_line_error(code, err):
    assert code == 2
    assert err.startswith("bandgeo: error:") and err.count("\n") == 1 and "Traceback" not in err


def test_batch_missing_folder_is_exit_2(tmp_path):
    code, _, err = run("batch", tmp_path / "no such folder", "--out", tmp_path / "out")
    _one_line_error(code, err)
    assert "does not exist" in err


def test_batch_empty_folder_and_empty_manifest_are_exit_2(tmp_path):
    (tmp_path / "empty").mkdir()
    code, _, err = run("batch", tmp_path / "empty", "--out", tmp_path / "out")
    _one_line_error(code, err)
    assert "no specimens" in err
    (tmp_path / "m.csv").write_text("scan,age_ma\n")
    code, _, err = run("batch", tmp_path / "m.csv", "--out", tmp_path / "out")
    _one_line_error(code, err)


def test_batch_malformed_manifest_names_the_row(tmp_path):
    (tmp_path / "a.ply").write_bytes(b"ply\n")
    (tmp_path / "m.csv").write_text("scan,age_ma\na.ply,1100\na.ply,old\n")
    code, _, err = run("batch", tmp_path / "m.csv", "--out", tmp_path / "out")
    _one_line_error(code, err)
    assert "row 3" in err and "age_ma" in err


def test_batch_with_only_corrupt_scans_runs_and_lists_them(tmp_path):
    """The batch ran (exit 0); each unreadable scan is listed with its one-line error."""
    folder = tmp_path / "scans with space"
    folder.mkdir()
    (folder / "KRB-07.PLY").write_bytes(b"ply\nformat binary_little_endian 1.0\nelement vertex 5\n")
    (folder / "KRB-12.stl").write_bytes(b"\x00" * 10)
    code, out, err = run("batch", folder, "--out", tmp_path / "out", "--workers", "1", "--no-report")
    assert code == 0, err
    assert "KRB-07" in out and "KRB-12" in out and "failed" in out and "Traceback" not in out + err
    saved = json.loads((tmp_path / "out" / "batch_summary.json").read_text())
    assert [s["status"] for s in saved["specimens"]] == ["failed", "failed"]
    assert all(s["error"] and "\n" not in s["error"] for s in saved["specimens"])


@pytest.mark.parametrize("args, fragment", [
    (["--years", "1,x"], "years"),
    (["--years", "0,2"], "positive"),
    (["--amplitude", "1.5"], "amplitude"),
    (["--trials", "0"], "trials"),
])
def test_power_bad_options_are_exit_2(tmp_path, args, fragment):
    code, _, err = run("power", *args, "--out", tmp_path / "p")
    _one_line_error(code, err)
    assert fragment in err


def test_batch_malformed_scheduler_address_is_exit_2_and_writes_nothing(tmp_path):
    (tmp_path / "a.ply").write_bytes(b"ply\n")
    code, _, err = run("batch", tmp_path, "--out", tmp_path / "out", "--scheduler", "not an address")
    _one_line_error(code, err)
    assert "tcp://host:8786" in err
    assert not (tmp_path / "out").exists()
