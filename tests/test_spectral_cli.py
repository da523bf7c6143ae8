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
    code, text, err = run("periodicity", str(series_csv), "--out", str(out), "--simulations", "199", "--seed", "4")
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


@pytest.mark.parametrize("value", ["1e308", "inf", "1e200"])
def test_huge_or_infinite_values_one_line_exit_2_nothing_written(tmp_path, value):
    # Issue 15: one line naming the file's line, exit 2, no output files, no numpy warnings leaked.
    rng = np.random.default_rng(1)
    vals = [f"{v:.4f}" for v in 0.2 + 0.02 * rng.standard_normal(120)]
    vals[6] = value
    p = tmp_path / "huge.csv"
    p.write_text("# a comment line\nthickness_mm\n" + "\n".join(vals) + "\n")
    out = tmp_path / "out"
    code, text, err = run("periodicity", str(p), "--out", str(out), "--simulations", "99")
    assert code == 2, (text, err)
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err and "Warning" not in err
    assert "np.float64" not in err
    if value != "inf":
        assert "line 9" in err     # comment (1) + header (2) + values from line 3: the 7th value
    assert not out.exists()


def test_simulations_option_has_a_hidden_alias(series_csv):
    code, text, _ = run("periodicity", "--help")
    assert code == 0 and "--simulations" in text and "--n-sim" not in text
    code, text, err = run("periodicity", str(series_csv), "--json", "--n-sim", "99")
    assert code == 0, err
    assert json.loads(text)["parameters"]["n_sim"] == 99


def test_bands_csv_gives_the_figures_of_the_one_public_function(tmp_path):
    # Issue 12: one set of figures per set of bands. A bands.csv is read as a band table; the command's
    # figures equal bandgeo.spectral.periodicity_figures on the same bands with the count uncertainty
    # from the table (what the analyze pipeline calls).
    from bandgeo import uncertainty
    from bandgeo.measure import BandTable
    from bandgeo.series import build_series
    from bandgeo.spectral import periodicity_figures

    rng = np.random.default_rng(21)
    n = 1600
    h = 0.1 * np.exp(0.3 * np.sin(2 * np.pi * np.arange(n) / 400) + 0.15 * rng.standard_normal(n))
    top = np.cumsum(h)
    flags = [""] * n
    flags[50] = "boundaries cross"
    inc = 3 + 0.2 * rng.standard_normal(n)
    table = BandTable(index=np.arange(n), base_mm=top - h, top_mm=top, thickness_axis_mm=h,
                      thickness_median_mm=h, thickness_iqr_mm=0.01 * h, inclination_deg=inc,
                      azimuth_deg=np.full(n, 90.0), confidence=np.clip(0.9 + 0.05 * rng.standard_normal(n), 0, 1),
                      flags=flags, base_inclination_deg=inc, base_azimuth_deg=np.full(n, 90.0))
    path = tmp_path / "bands.csv"
    table.to_csv(path)
    code, text, err = run("periodicity", str(path), "--json", "--simulations", "199", "--seed", "3")
    assert code == 0, err
    got = json.loads(text)
    again = BandTable.from_csv(path)
    ref = periodicity_figures(build_series(again), count_uncertainty=uncertainty.count_uncertainty(again),
                              n_sim=199, seed=3, band_flags=list(again.flags))
    a, b = got["days_per_year"], ref["blocks"]["days_per_year"]
    assert a["estimate"] == pytest.approx(b["estimate"], rel=1e-12)
    assert a["ci95"] == pytest.approx(b["ci95"], rel=1e-12)
    assert a["counting_uncertainty"]["relative_sd"] > 0 and a["ci95_spectral"] != a["ci95"]
    assert got["astronomy"]["length_of_day_hours"]["ci95"] == pytest.approx(
        ref["astronomy"]["length_of_day_hours"]["ci95"], rel=1e-12)
    assert "truncated or cut bands" in got["hiatus"]["indicators_fired"]


def test_count_uncertainty_option_widens_the_interval(series_csv):
    code, text, err = run("periodicity", str(series_csv), "--json", "--simulations", "199",
                          "--count-uncertainty", "2")
    assert code == 0, err
    d = json.loads(text)["days_per_year"]
    lo, hi = d["ci95"]
    slo, shi = d["ci95_spectral"]
    assert lo < slo and hi > shi
    assert d["counting_uncertainty"]["relative_sd"] == pytest.approx(0.02)
