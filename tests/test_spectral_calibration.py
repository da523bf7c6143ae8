"""Calibration on the forward model (bandgeo.synth) with known truth: the 95% interval of days per year
must cover the truth in 92-98% of series, and red noise alone must be declared to hold an annual cycle
in at most 5% of series. The figures with more series and replicates: benchmarks/calibration.py.

Monte Carlo replicates are reduced to 99 per test (the smallest count with which a Monte Carlo test at
5% is exact: (1 + 4) / (99 + 1) = 0.05; Davison & Hinkley 1997, sec. 4.2.5), which makes the intervals
slightly noisier, not biased.
"""
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
from calibration import null_case, signal_case  # noqa: E402

from bandgeo.spectral import test_periodicity as run_periodicity  # noqa: E402

N_SERIES = 200
N_SIM = 99


# Time limits catch a hang, not slowness: on this 2-core machine under load (two CPU hogs and the
# other work) the coverage test took 233 s of its former 300 s; a slower CI machine must not fail it.
@pytest.mark.timeout(1200)
def test_interval_coverage_on_forward_model():
    hits, detected = [], 0
    for i in range(N_SERIES):
        s, truth = signal_case(i, with_sway=False)
        d = run_periodicity(s, n_sim=N_SIM, seed=i, methods=("spectrum", "cycle_count")).days_per_year
        if d["significant"]:
            detected += 1
            hits.append(d["ci95"][0] <= truth <= d["ci95"][1])
        else:
            hits.append(False)      # a missed cycle counts against coverage
    coverage = float(np.mean(hits))
    # Target of the issue: 92-98% for a nominal 95% interval.
    assert detected >= 0.97 * N_SERIES
    assert 0.92 <= coverage <= 0.98, f"coverage {coverage:.3f}"


@pytest.mark.timeout(1200)
def test_red_noise_false_alarm_rate():
    declared = [run_periodicity(null_case(i, with_sway=False), n_sim=N_SIM, seed=i,
                                methods=("spectrum",)).days_per_year["significant"] for i in range(N_SERIES)]
    rate = float(np.mean(declared))
    # Target of the issue: at most 5% (the Monte Carlo maximum statistic controls the family-wise rate).
    assert rate <= 0.05, f"false-alarm rate {rate:.3f}"


@pytest.mark.timeout(1200)
def test_independent_generator_small_batch():
    # A small batch of the independent generator (benchmarks/series_generator.py: skewed and peaked
    # seasons, multiplicative log-normal AR(1) noise, drift and trends, missing days, meandering tilt).
    # The full calibration (>= 400 series, binomial intervals) is benchmarks/calibration.py; this guards
    # against a regression to the state of issue 12 (16/20 intervals held, 1/20 pure-noise series with
    # drift gave an "annual" cycle).
    from calibration import _holds, _one_independent

    recs = [_one_independent((i, N_SIM, 7)) for i in range(40)]
    cyc = [r for r in recs if r["has_cycle"] and r["ci95"] is not None]
    null = [r for r in recs if not r["has_cycle"]]
    held = sum(_holds(r["ci95"], r["truth"]) for r in cyc)
    assert len(cyc) >= 17 and held >= 0.85 * len(cyc), (held, len(cyc))
    assert sum(r["significant"] for r in null) <= 2
