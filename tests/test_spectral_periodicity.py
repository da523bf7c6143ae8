"""test_periodicity end to end on analytic sinusoids in scipy-generated AR(1) noise and on the forward
model: estimates, intervals, refusals, the stated search band, reproducibility and output blocks."""
import json

import numpy as np
import pytest
from scipy import signal

from bandgeo.errors import ParameterError, SeriesError
from bandgeo.series import series_from_thickness
from bandgeo.spectral import test_periodicity as run_periodicity

N_SIM = 199


def ar1(rng, n, phi, sd):
    """AR(1) noise from scipy.signal.lfilter (outside generator), stationary sd ``sd``."""
    e = rng.standard_normal(n + 500) * sd * np.sqrt(1 - phi * phi)
    return signal.lfilter([1.0], [1.0, -phi], e)[500:]


def thickness(n, period, amp, phi=0.5, sd=0.05, rng=None, extra=()):
    rng = rng or np.random.default_rng(0)
    t = np.arange(n)
    x = 0.25 + amp * np.cos(2 * np.pi * t / period + 0.4) + ar1(rng, n, phi, sd)
    for p, a in extra:
        x = x + a * np.cos(2 * np.pi * t / p)
    return np.clip(x, 0.01, None)


@pytest.fixture(scope="module")
def clear_case():
    """Analytic annual sinusoid of 387.3 bands (6 cycles) in red noise, with a fitted sway."""
    rng = np.random.default_rng(11)
    n, P = 2324, 387.3
    h = thickness(n, P, 0.06, rng=rng)
    t = np.arange(n)
    east = 2.0 + 3.0 * np.sin(2 * np.pi * t / P) * np.sin(np.radians(40)) + rng.normal(0, 0.5, n)
    north = 1.0 + 3.0 * np.sin(2 * np.pi * t / P) * np.cos(np.radians(40)) + rng.normal(0, 0.5, n)
    inc = np.hypot(east, north)
    az = np.degrees(np.arctan2(east, north)) % 360
    s = series_from_thickness(h, inc, az, source="test")
    return s, P, run_periodicity(s, n_sim=N_SIM, seed=5)


def test_clear_annual_cycle_is_found_with_an_interval_holding_the_truth(clear_case):
    s, P, res = clear_case
    d = res.to_dict()["days_per_year"]
    assert d["significant"] is True
    assert d["p_value"] < 0.05
    lo, hi = d["ci95"]
    assert lo <= P <= hi                       # analytic truth
    assert (hi - lo) / P < 0.05
    for name in ("thickness_spectrum", "cycle_count", "sway"):
        m = d["methods"][name]
        assert m["ci95"][0] <= P <= m["ci95"][1], name
        assert m["method"]
    assert d["methods"]["sway"]["assumption"].startswith("heliotropism")
    assert d["is_minimum"] is True
    assert d["consistency"]["p_value"] > 0.01
    assert len(d["methods"]["cycle_count"]["per_cycle_counts"]) >= 3
    # harmonic F-test (Thomson 1982) also sees the line
    assert d["methods"]["thickness_spectrum"]["multitaper_f_test"]["p_value"] < 0.01


def test_searched_band_is_stated_and_default_is_four_to_a_third(clear_case):
    s, P, res = clear_case
    d = res.to_dict()["days_per_year"]
    assert d["searched_band_bands_per_cycle"] == [4.0, pytest.approx(len(s) / 3)]


def test_whole_spectrum_and_levels_are_given(clear_case):
    _, P, res = clear_case
    sp = res.spectra
    f = sp["frequency_cycles_per_band"]
    assert f[0] > 0 and f[-1] == pytest.approx(0.5, abs=1e-3)
    for key in ("thickness_lomb_scargle_mm2_band", "thickness_periodogram_mm2_band",
                "thickness_ar1_background_mm2_band", "thickness_level95_mm2_band", "thickness_level99_mm2_band",
                "thickness_multitaper_mm2_band", "thickness_f_test", "sway_periodogram_deg2_band"):
        assert sp[key].shape == f.shape, key
    assert np.all(sp["thickness_level99_mm2_band"] >= sp["thickness_level95_mm2_band"])
    i = np.argmin(np.abs(f - 1 / P))
    assert sp["thickness_periodogram_mm2_band"][i] > sp["thickness_level99_mm2_band"][i]
    # astropy's Lomb-Scargle agrees with the FFT engine near the peak (same quantity)
    near = np.abs(f - 1 / P) < 0.5 / 2324
    np.testing.assert_allclose(sp["thickness_lomb_scargle_mm2_band"][near],
                               sp["thickness_periodogram_mm2_band"][near], rtol=0.05)
    table = res.to_spectra_table()
    assert all(("_mm2_" in k or "_deg2_" in k or "cycles_per_band" in k or "bands" in k or "f_test" in k
                or "searched" in k) for k in table)
    assert sp["evolutive_ratio"].shape == (sp["evolutive_centre_band"].size, sp["evolutive_frequency_cycles_per_band"].size)


def test_result_blocks_are_json_safe_and_complete(clear_case):
    _, _, res = clear_case
    d = res.to_dict()
    json.dumps(d, allow_nan=False)
    assert set(d) >= {"daily_test", "days_per_year", "tidal", "hiatus", "warnings"}
    assert d["daily_test"]["verdict"] == "consistent with regular increments"
    assert d["hiatus"]["counts_are_minima"] is True
    assert d["days_per_year"]["persistence"]["fraction_of_windows"] > 0.5


def test_red_noise_alone_gives_no_estimate_and_says_why():
    rng = np.random.default_rng(12)
    h = 0.25 + ar1(rng, 2000, 0.7, 0.05)
    res = run_periodicity(series_from_thickness(h), n_sim=N_SIM, seed=3)
    d = res.to_dict()["days_per_year"]
    assert d["significant"] is False
    assert d["estimate"] is None and d["ci95"] is None
    assert d["p_value"] >= 0.05
    assert any("no significant annual cycle" in w for w in res.warnings)


def test_tidal_cycles_give_days_per_synodic_month():
    # Analytic fortnightly (15.25) and monthly (30.5) sinusoids beside the annual one.
    rng = np.random.default_rng(13)
    h = thickness(2400, 400.0, 0.05, sd=0.03, rng=rng, extra=[(15.25, 0.02), (30.5, 0.012)])
    res = run_periodicity(series_from_thickness(h), n_sim=N_SIM, seed=1)
    t = res.to_dict()["tidal"]["days_per_synodic_month"]
    assert t["significant"]
    assert t["ci95"][0] - 0.1 <= 30.5 <= t["ci95"][1] + 0.1
    assert abs(t["estimate"] - 30.5) < 0.3
    d = res.to_dict()["days_per_year"]
    assert abs(d["estimate"] - 400) < 10        # the annual, not the tidal, cycle is chosen
    assert any(abs(p["period_bands"] - 15.25) < 0.3 for p in d["other_significant_peaks"])


def test_user_can_narrow_the_search_and_the_band_is_recorded():
    rng = np.random.default_rng(14)
    h = thickness(2400, 400.0, 0.06, rng=rng)
    res = run_periodicity(series_from_thickness(h), min_period_bands=50, max_period_bands=300, n_sim=N_SIM)
    d = res.to_dict()["days_per_year"]
    assert d["searched_band_bands_per_cycle"] == [50.0, 300.0]
    assert d["estimate"] is None or d["estimate"] <= 300 * 1.05


def test_same_seed_same_result_and_inputs_untouched():
    rng = np.random.default_rng(15)
    h = thickness(1500, 300.0, 0.06, rng=rng)
    s = series_from_thickness(h)
    before = s.thickness_mm.copy()
    a = run_periodicity(s, n_sim=N_SIM, seed=9).to_dict()
    b = run_periodicity(s, n_sim=N_SIM, seed=9).to_dict()
    assert a == b
    np.testing.assert_array_equal(s.thickness_mm, before)


@pytest.mark.parametrize("kwargs, err", [
    ({"min_period_bands": 1}, ParameterError),
    ({"max_period_bands": 5000}, ParameterError),
    ({"min_period_bands": 100, "max_period_bands": 50}, ParameterError),
    ({"n_sim": 10}, ParameterError),
    ({"methods": ("spectrum", "magic")}, ParameterError),
    ({"seed": -1}, ParameterError),
])
def test_bad_parameters_are_one_line_errors(kwargs, err):
    s = series_from_thickness(thickness(500, 100.0, 0.06))
    with pytest.raises(err) as exc:
        run_periodicity(s, **kwargs)
    assert "\n" not in str(exc.value)


def test_too_short_series_is_refused():
    with pytest.raises(SeriesError):
        run_periodicity(np.ones(10))


def test_forward_model_with_hiatuses_counts_are_minima_and_flagged():
    from bandgeo.synth import SynthParams, simulate_laminae

    rec = simulate_laminae(SynthParams(days_per_year=380, years=6, annual_amplitude=0.3, noise_cv=0.15,
                                       hiatus_rate_per_year=3, hiatus_mean_days=4, seed=21))
    s = series_from_thickness(rec.thickness_mm, rec.inclination_deg, rec.azimuth_deg,
                              hiatus_flags=rec.hiatus_after)
    d = run_periodicity(s, n_sim=N_SIM).to_dict()
    assert d["days_per_year"]["significant"]
    # Missing days shorten the recorded cycle: the estimate is of bands per year, at most the days
    assert d["days_per_year"]["ci95"][0] <= 380
    assert d["hiatus"]["evidence"] == "strong"
    assert len(d["hiatus"]["flagged_bands"]) == int(rec.hiatus_after.sum())


def test_anomalous_bands_are_listed_but_are_not_hiatus_evidence_alone():
    # Robust z-score rule (Rousseeuw & Croux 1993 MAD scale): bands 100x thinner than their
    # neighbours are listed; log-normal noise alone is not. Neither is evidence of missing time on its own
    # (issue 12: a thick band more often means a missed boundary than missing days).
    from bandgeo.spectral.hiatus import hiatus_evidence

    rng = np.random.default_rng(16)
    h = 0.25 * np.exp(0.2 * rng.standard_normal(2000))
    assert hiatus_evidence(h, None, None, None)["evidence"] == "none"
    h[[300, 1200]] = 0.0025
    ev = hiatus_evidence(h, None, None, None)
    assert ev["thin_bands"] == [300, 1200]
    assert ev["evidence"] == "none" and ev["indicators_fired"] == []
    h[700] = 0.25 * 20
    assert hiatus_evidence(h, None, None, None)["evidence"] == "none"


def test_hiatus_indicators_say_which_fired():
    # What marks missing time (Pannella 1972): flagged surfaces and truncated / cut bands.
    from bandgeo.spectral.hiatus import hiatus_evidence

    rng = np.random.default_rng(17)
    h = 0.25 * np.exp(0.2 * rng.standard_normal(500))
    flags = [""] * 500
    flags[42] = "boundaries cross"
    ev = hiatus_evidence(h, None, None, None, band_flags=flags)
    assert ev["evidence"] == "some" and ev["indicators_fired"] == ["truncated or cut bands"]
    assert ev["cut_bands"] == [42]
    user = np.zeros(500, bool)
    user[100] = True
    ev = hiatus_evidence(h, user, None, None, band_flags=flags)
    assert ev["evidence"] == "strong"
    assert set(ev["indicators_fired"]) == {"truncated or cut bands", "user-flagged surfaces"}
