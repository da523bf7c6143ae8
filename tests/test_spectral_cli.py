"""The ``bandgeo periodicity`` command: text with units and intervals, JSON, output files, errors."""
import json
import subprocess
import sys

import numpy as np
import pytest
from scipy import signal


def run(*args):
    proc = subprocess.run([sys.executable, "-m", "bandgeo", *args], capture_output=True, text=True)
    return proc.returncode, proc.stdout, proc.stderr


@pytest.fixture(scope="module")
def series_csv(tmp_path_factory):
    rng = np.random.default_rng(3)
    n = 2000
    noise = signal.lfilter([1.0], [1.0, -0.5], rng.standard_normal(n) * 0.03)
    h = 250 + 60 * np.cos(2 * np.pi * np.arange(n) / 400.0) + 1000 * noise
    p = tmp_path_factory.mktemp("in put") / "KRB-12 series.CSV"
    p.write_text("thickness_um\n" + "\n".join(f"{v:.3f}" for v in h) + "\n")
    return p


def test_text_output_and_files(series_csv, tmp_path):
    out = tmp_path / "out dir"
    code, text, err = run("periodicity", str(series_csv), "--out", str(out), "--n-sim", "199", "--seed", "4")
    assert code == 0, err
    assert "bands per cycle" in text and "95% interval" in text and " h " in text.replace("h)", "h ")
    assert "Daily test:" in text and "minimum" in text
    res = json.loads((out / "result.json").read_text())
    d = res["days_per_year"]
    assert d["significant"] and d["ci95"][0] <= 400 <= d["ci95"][1]
    assert res["length_of_day_hours"]["ci95"] is not None
    head = (out / "spectra.csv").read_text().splitlines()[0]
    assert "frequency_cycles_per_band" in head and "thickness_level95_mm2_band" in head
    assert not [p for p in out.iterdir() if p.name.startswith(".")]   # no temporary files left


def test_json_flag_and_search_band(series_csv):
    code, text, err = run("periodicity", str(series_csv), "--json", "--n-sim", "199",
                          "--min-period", "100", "--max-period", "600")
    assert code == 0, err
    d = json.loads(text)["days_per_year"]
    assert d["searched_band_bands_per_cycle"] == [100.0, 600.0]


def test_bad_inputs_exit_2_with_one_line(tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text("thickness_mm\n0.1\nfoo\n")
    for args in (["periodicity", str(bad)], ["periodicity", str(tmp_path / "missing.csv")]):
        code, out, err = run(*args)
        assert code == 2
        assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    good = tmp_path / "ok.csv"
    good.write_text("thickness_mm\n" + "\n".join("0.2" if i % 2 else "0.3" for i in range(100)))
    code, _, err = run("periodicity", str(good), "--min-period", "80", "--max-period", "20")
    assert code == 2 and "min_period_bands" in err
