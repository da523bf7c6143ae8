"""Which peak is the annual cycle, and when an answer is refused (issue 12): a trend is not a cycle,
harmonics are harmonics, tidal readings need a plausible ratio to the year, intervals are refused on too
few cycles, the sway interval widens with meander, and the daily test names what it can tell apart."""
import numpy as np
import pytest
from scipy import signal

from bandgeo.series import series_from_thickness
from bandgeo.spectral import test_periodicity as run_periodicity
from bandgeo.spectral.daily import daily_test
from bandgeo.spectral.multitaper import line_test

N_SIM = 199


def _ar1(rng, n, phi, sd):
    return signal.lfilter([1.0], [1.0, -phi], rng.standard_normal(n) * sd)


@pytest.mark.parametrize("kind", ["linear", "quadratic", "exponential", "random walk"])
def test_trends_and_drift_are_not_cycles(kind):
    # Issue 12: a curved rise became a 490-band "annual" cycle. Trends of several shapes (common
    # practice: none has a period) plus AR(1) noise must give no annual cycle.
    rng = np.random.default_rng({"linear": 1, "quadratic": 2, "exponential": 3, "random walk": 4}[kind])
    n = 2400
    u = np.linspace(-1, 1, n)
    trend = {"linear": 0.5 * u, "quadratic": 0.6 * u * u, "exponential": 0.2 * np.exp(2 * u),
             "random walk": np.convolve(np.cumsum(rng.standard_normal(n)), np.ones(300) / 300, "same") * 0.02}[kind]
    h = np.exp(np.log(0.1) + trend + _ar1(rng, n, 0.6, 0.15))
    d = run_periodicity(series_from_thickness(h), n_sim=N_SIM, seed=5).days_per_year
    assert not d["significant"], d["methods"]["thickness_spectrum"]["peak_readings"]


def test_harmonics_of_a_sawtooth_season_are_read_as_harmonics():
    # A sawtooth has harmonics at k f with amplitudes 1/k (Fourier series; analytic). The annual cycle
    # must be the fundamental and the 2nd harmonic read as "harmonic 2", never as tidal.
    rng = np.random.default_rng(7)
    n, P = 2800, 400.0
    t = np.arange(n)
    saw = 2 * ((t / P) % 1.0) - 1
    h = 0.2 * np.exp(0.4 * saw + _ar1(rng, n, 0.4, 0.1))
    d = run_periodicity(series_from_thickness(h), n_sim=N_SIM, seed=3).to_dict()
    y = d["days_per_year"]
    # The fundamental is the year (coverage of its interval is what benchmarks/calibration.py measures;
    # one series may miss 5% of the time).
    assert y["significant"] and abs(y["estimate"] / P - 1) < 0.01
    reads = y["methods"]["thickness_spectrum"]["peak_readings"]
    h2 = [r for r in reads if abs(r["period_bands"] - P / 2) < 3]
    assert h2 and h2[0]["reading"] == "harmonic 2 of the annual cycle"
    assert d["tidal"]["days_per_synodic_month"] is None


def test_a_harmonic_stronger_than_its_fundamental_leads_back_to_the_fundamental():
    # Sub-harmonic check: a season with its 2nd harmonic three times the fundamental (a short growth
    # season can do that). The fundamental, 400 bands, must be the annual cycle.
    rng = np.random.default_rng(8)
    n, P = 3200, 400.0
    th = 2 * np.pi * np.arange(n) / P
    h = 1.0 + 0.1 * np.sin(th) + 0.3 * np.sin(2 * th + 1.0) + _ar1(rng, n, 0.3, 0.15)
    y = run_periodicity(series_from_thickness(h), n_sim=N_SIM, seed=4).days_per_year
    assert y["significant"] and y["ci95"][0] <= P <= y["ci95"][1], y["ci95"]


def test_line_test_bandwidth_stays_below_the_frequency():
    # Thomson (1982): the F-test compares a line with a locally flat continuum over +-W = NW/n; quoted
    # only where W lies below the frequency, and not at all below about two cycles.
    rng = np.random.default_rng(9)
    n = 1000
    x = np.sin(2 * np.pi * np.arange(n) * 3.2 / n) + 0.3 * rng.standard_normal(n)
    lt = line_test(x, 3.2 / n)
    assert lt["applicable"] and lt["bandwidth_cycles_per_band"] < 3.2 / n and lt["k"] >= 2
    assert not line_test(x, 1.5 / n)["applicable"]
    # Pointwise size on white noise at a mid-band frequency (F(2, 2K-2) null): about 5%.
    ps = np.array([line_test(rng.standard_normal(n), 0.1234)["p_value"] for _ in range(300)])
    assert 0.02 <= np.mean(ps < 0.05) <= 0.09


def test_interval_refused_on_fewer_than_three_cycles():
    # Issue 12: an interval on one or two cycles of record cannot be made honest; it is refused.
    rng = np.random.default_rng(10)
    n, P = 1000, 400.0
    h = 1.0 + 0.5 * np.sin(2 * np.pi * np.arange(n) / P) + _ar1(rng, n, 0.3, 0.1)
    y = run_periodicity(series_from_thickness(h), max_period_bands=n / 2, n_sim=N_SIM, seed=2).days_per_year
    assert y["estimate"] is None and y["ci95"] is None
    assert not y["significant"] or "refused" in y


def test_cycle_count_and_persistence_need_enough_cycles():
    # Cycle counting trims one cycle at each end, so on 3.5 cycles it would rest on 1.5: refused. The
    # persistence fraction needs two independent windows of three cycles: not given on 3.5 cycles.
    rng = np.random.default_rng(11)
    n, P = 1400, 400.0
    h = 1.0 + 0.4 * np.sin(2 * np.pi * np.arange(n) / P) + _ar1(rng, n, 0.3, 0.1)
    y = run_periodicity(series_from_thickness(h), n_sim=N_SIM, seed=2).days_per_year
    assert y["significant"] and y["estimate"] is not None
    assert y["methods"]["cycle_count"]["estimate"] is None and "refused" in y["methods"]["cycle_count"]
    assert y["persistence"]["fraction_of_windows"] is None


def _sway_case(meander_sd, seed=12):
    rng = np.random.default_rng(seed)
    n, P = 2400, 400.0
    th = 2 * np.pi * np.arange(n) / P
    h = 1.0 + 0.15 * np.sin(th) + _ar1(rng, n, 0.5, 0.2)
    sway = 2.0 * np.sin(th + 0.5) + _ar1(rng, n, 0.97, meander_sd) + 0.1 * rng.standard_normal(n)
    s = series_from_thickness(h, source="test")
    s.sway_deg = sway
    return run_periodicity(s, n_sim=N_SIM, seed=6).days_per_year


def test_sway_interval_widens_with_meander_and_weights_are_shown():
    # Issue 12: a nearly noise-free sway took > 99.9% of the weight. With a meandering growth direction
    # (slow AR(1), phi 0.97) the sway interval must widen, its meander be reported, and the thickness
    # route be given on its own.
    calm, wild = _sway_case(0.05), _sway_case(0.3)
    w = lambda d: d["methods"]["sway"]["ci95"][1] - d["methods"]["sway"]["ci95"][0]   # noqa: E731
    assert w(wild) > 2 * w(calm)
    cw, ww = calm["combination_with_sway"]["weights"], wild["combination_with_sway"]["weights"]
    assert ww["sway"] < cw["sway"]
    assert wild["methods"]["sway"]["meander"]["residual_sd_deg"] > calm["methods"]["sway"]["meander"]["residual_sd_deg"]
    assert set(ww) == {"thickness_spectrum", "sway"} and abs(sum(ww.values()) - 1) < 1e-9
    # The headline is the thickness route (the sway combination undercovered on the generator).
    assert wild["weights"] == {"thickness_spectrum": 1.0}
    assert wild["thickness_route"]["ci95"][0] <= 400.0 <= wild["thickness_route"]["ci95"][1]


def test_tidal_reading_needs_a_plausible_months_per_year_ratio():
    # Published synodic months per year: 12.37 today to 14.5 +- 0.5 at ~2450 Ma (Williams 2000, Rev.
    # Geophys. 38:37-59); 400 days / 30.5 days per month = 13.1 (Williams 2000, ~620 Ma). A 30.5-band
    # cycle beside a 400-band year is read as the synodic month; a 40-band one (10 months a year) is not.
    rng = np.random.default_rng(13)
    n = 3200
    t = np.arange(n)

    def case(month, amp):
        h = (1.0 + 0.3 * np.sin(2 * np.pi * t / 400.0) + amp * np.sin(2 * np.pi * t / month)
             + _ar1(rng, n, 0.2, 0.1))
        return run_periodicity(series_from_thickness(h), n_sim=N_SIM, seed=1).tidal

    # The month may outshine the year in the spectrum: the ratio still puts the year at 400 bands.
    good, bad = case(30.5, 0.12), case(40.0, 0.05)
    m = good["days_per_synodic_month"]
    assert m is not None and m["ci95"][0] <= 30.5 <= m["ci95"][1]
    assert bad["days_per_synodic_month"] is None
    assert any("synodic months per year" in r["reason"] for r in bad["rejected_peaks"])


def test_daily_test_against_gamma_renewal_and_couplets():
    # Independent layers with the same mean and CV (a gamma renewal process; Cox & Lewis 1966) are not
    # called regular increments; alternating thick-thin couplets are recognised; a seasonal daily clock
    # beats the renewal alternative.
    rng = np.random.default_rng(14)
    n = 1600
    t = np.arange(n)
    gamma = daily_test(rng.gamma(4.0, 0.025, n), rng)
    assert gamma["verdict"] != "consistent with regular increments"
    couplets = daily_test(np.where(t % 2 == 0, 0.15, 0.05) * np.exp(0.2 * rng.standard_normal(n)), rng)
    assert couplets["alternatives"][2]["p_value"] < 0.05 and "couplets" in couplets["alternatives"][2]["conclusion"]
    clock = daily_test(0.1 * np.exp(0.3 * np.sin(2 * np.pi * t / 400) + 0.2 * rng.standard_normal(n)), rng)
    assert clock["verdict"] == "consistent with regular increments"
    assert clock["alternatives"][0]["p_value"] < 0.05
    assert "cannot_tell_apart" in clock and "season" in clock["cannot_tell_apart"]
