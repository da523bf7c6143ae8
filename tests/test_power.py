"""Power analysis: binomial intervals, detection against years of record, false alarms at zero amplitude.

Binomial interval references: Wilson, E. B. (1927) J. Am. Stat. Assoc. 22:209-212 (score interval);
Clopper, C. J. & Pearson, E. S. (1934) Biometrika 26:404-413 (exact interval from beta quantiles).
"""
import csv
import math
import subprocess
import sys

import pytest
from scipy import stats

from bandgeo.batch import power_analysis
from bandgeo.batch.power import binomial_ci
from bandgeo.errors import ParameterError

N_SIM = 99  # Monte Carlo replicates inside each test: enough for a 5% level (common practice: 19+)


@pytest.mark.parametrize("k, n", [(0, 20), (3, 40), (17, 20), (50, 100)])
def test_wilson_interval_matches_the_formula(k, n):
    # Wilson (1927): centre (p + z^2/2n) / (1 + z^2/n), half-width z/(1+z^2/n) sqrt(p(1-p)/n + z^2/4n^2).
    z = stats.norm.ppf(0.975)
    p = k / n
    centre = (p + z * z / (2 * n)) / (1 + z * z / n)
    half = z / (1 + z * z / n) * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n))
    low, high = binomial_ci(k, n)
    assert low == pytest.approx(max(0.0, centre - half), abs=1e-9)
    assert high == pytest.approx(min(1.0, centre + half), abs=1e-9)


@pytest.mark.parametrize("k, n", [(1, 20), (10, 40)])
def test_exact_interval_matches_beta_quantiles(k, n):
    # Clopper & Pearson (1934): [Beta(0.025; k, n-k+1), Beta(0.975; k+1, n-k)].
    low, high = binomial_ci(k, n, method="exact")
    assert low == pytest.approx(stats.beta.ppf(0.025, k, n - k + 1))
    assert high == pytest.approx(stats.beta.ppf(0.975, k + 1, n - k))


@pytest.fixture(scope="module")
def signal_table():
    # 60 days/yr keeps records short; the searched band reaches about a third of the record, so a
    # one-year record cannot show an annual cycle at all while a long record can.
    return power_analysis(noise_cv=0.25, annual_amplitude=0.12, years=(1.0, 4.0, 8.0), days_per_year=60.0,
                          n_trials=24, seed=3, ar1_phi=0.3, n_sim=N_SIM)


def test_detection_increases_with_years(signal_table):
    p = [r["p_detect"] for r in signal_table.rows]
    short, long = signal_table.rows[0], signal_table.rows[-1]
    # Separated beyond the 95% Wilson intervals of both proportions (Wilson 1927).
    assert short["p_detect_ci95_high"] < long["p_detect_ci95_low"], p
    assert p[0] <= p[1] + 0.15 and p[1] <= p[2] + 0.15, p  # monotone within sampling slack
    assert long["median_ci_width_days_per_year"] is not None
    # Intervals among detections should mostly hold the truth (92-98% is the pipeline's target; with
    # 24 trials only a gross failure is detectable).
    assert long["coverage_ci95_high"] >= 0.92


def test_false_alarms_at_zero_amplitude_within_nominal_rate():
    table = power_analysis(noise_cv=0.25, annual_amplitude=0.0, years=(5.0,), days_per_year=60.0,
                           n_trials=60, seed=4, ar1_phi=0.5, n_sim=N_SIM)
    row = table.rows[0]
    # At most the nominal 5%, plus binomial slack: the 99% quantile of Binomial(n, 0.05).
    assert row["n_detected"] <= stats.binom.ppf(0.99, row["n_trials"], 0.05)


def test_table_outputs_and_determinism(signal_table, tmp_path):
    files = signal_table.write(tmp_path)
    with open(files["csv"], newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [float(r["years"]) for r in rows] == [1.0, 4.0, 8.0]
    assert "median_ci_width_days_per_year" in rows[0] and "p_detect_ci95_low" in rows[0]
    assert files["png"].read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert files["pdf"].read_bytes().startswith(b"%PDF") and "<svg" in files["svg"].read_text()
    text = signal_table.format_table()
    assert "days/yr" in text and "(yr)" in text and "Wilson" in text


def test_workers_do_not_change_the_table():
    kw = dict(noise_cv=0.2, annual_amplitude=0.3, years=(4.0,), days_per_year=60.0, n_trials=6, seed=9,
              n_sim=N_SIM)
    assert power_analysis(**kw, workers=1).trials == power_analysis(**kw, workers=2).trials


def test_bad_parameters():
    with pytest.raises(ParameterError):
        power_analysis(years=(0,), n_trials=1)
    with pytest.raises(ParameterError):
        power_analysis(n_trials=0)
    with pytest.raises(ParameterError):  # validated by SynthParams
        power_analysis(annual_amplitude=1.5, n_trials=1)


def test_power_command_prints_the_table_with_units(tmp_path):
    proc = subprocess.run([sys.executable, "-m", "bandgeo.cli", "power", "--noise-cv", "0.2", "--amplitude",
                           "0.3", "--years", "2,6", "--days-per-year", "60", "--trials", "4", "--simulations",
                           str(N_SIM), "--out", str(tmp_path / "power out")],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert "P(detect)" in proc.stdout and "days/yr" in proc.stdout and "(yr)" in proc.stdout
    assert (tmp_path / "power out" / "power.csv").is_file()
