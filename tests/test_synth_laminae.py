"""Statistics of the simulated lamina record against analytic values and reference periodograms."""
import numpy as np
import pytest
from astropy.timeseries import LombScargle
from scipy import signal

from bandgeo.errors import ParameterError
from bandgeo.synth import SynthParams, simulate_laminae


def test_mean_thickness_is_the_expected_value():
    """Pooled mean of many records equals mean_thickness_mm (analytic: each factor has mean 1; the
    log-normal exp(e - s^2/2) has mean 1 - standard log-normal moments)."""
    p = SynthParams(days_per_year=400, years=4, annual_amplitude=0.4, noise_cv=0.3, ar1_phi=0.6)
    means = np.array([simulate_laminae(p, rng=seed).thickness_mm.mean() for seed in range(200)])
    se = means.std(ddof=1) / np.sqrt(means.size)
    assert abs(means.mean() - p.mean_thickness_mm) < 4 * se
    # One record is not renormalised: its mean scatters (it is a sample, not a constant).
    assert means.std() > 0


def test_noise_cv_and_ar1_correlation():
    """With no modulation, thickness / mean is log-normal with the given CV and its log is AR(1)
    with lag-1 correlation phi (analytic; Box & Jenkins, AR(1) autocorrelation rho_1 = phi)."""
    p = SynthParams(days_per_year=400, years=50, annual_amplitude=0.0, sway_amplitude_deg=0.0,
                    noise_cv=0.2, ar1_phi=0.7)
    h = simulate_laminae(p, rng=1).thickness_mm
    assert h.std() / h.mean() == pytest.approx(0.2, rel=0.05)
    x = np.log(h) - np.log(h).mean()
    rho1 = (x[1:] * x[:-1]).mean() / (x * x).mean()
    assert rho1 == pytest.approx(0.7, abs=0.02)


@pytest.mark.parametrize("days_per_year", [365.0, 412.5, 480.0])
def test_annual_period_found_by_astropy_and_scipy(days_per_year):
    """The strongest long-period peak of the thickness series sits at the days per year."""
    p = SynthParams(days_per_year=days_per_year, years=8, annual_amplitude=0.3, noise_cv=0.15)
    rec = simulate_laminae(p, rng=4)
    t, h = rec.day_index.astype(float), rec.thickness_mm
    # astropy Lomb-Scargle (reference library), periods 50 to 2000 days, fine grid.
    freq = np.linspace(1 / 2000, 1 / 50, 20000)
    power = LombScargle(t, h).power(freq)
    assert 1 / freq[np.argmax(power)] == pytest.approx(days_per_year, rel=0.01)
    # scipy periodogram of the evenly spaced series: the peak bin holds the annual frequency.
    f, pxx = signal.periodogram(h - h.mean(), fs=1.0, detrend=False, nfft=1 << 16)
    band = (f > 1 / 2000) & (f < 1 / 50)
    assert 1 / f[band][np.argmax(pxx[band])] == pytest.approx(days_per_year, rel=0.01)


def test_annual_amplitude_recovered_and_null_case_has_none():
    """Least-squares sinusoid at the known period (astropy LombScargle.model_parameters) returns the
    fractional amplitude; the null case (amplitude 0, red noise) gives nearly none."""
    def amplitude(a, seed):
        p = SynthParams(days_per_year=400, years=6, annual_amplitude=a, noise_cv=0.2, ar1_phi=0.5)
        rec = simulate_laminae(p, rng=seed)
        ls = LombScargle(rec.day_index.astype(float), rec.thickness_mm, center_data=False)
        offset, s, c = ls.model_parameters(1.0 / 400.0)
        return np.hypot(s, c) / offset

    assert np.median([amplitude(0.3, k) for k in range(5)]) == pytest.approx(0.3, abs=0.02)
    assert np.median([amplitude(0.0, k) for k in range(5)]) < 0.02


def test_tidal_modulation_peaks_at_half_the_synodic_month():
    """Spring-neap cycle: two spring tides per synodic month (common practice), so the strongest
    short-period peak is at M/2."""
    month = 30.5  # days per synodic month at ~620 Ma (Williams 1990, see reference-values.md)
    p = SynthParams(days_per_year=400, years=3, annual_amplitude=0.2, days_per_synodic_month=month,
                    tidal_amplitude=0.3, noise_cv=0.1)
    rec = simulate_laminae(p, rng=2)
    freq = np.linspace(1 / 60, 1 / 5, 20000)
    power = LombScargle(rec.day_index.astype(float), rec.thickness_mm).power(freq)
    assert 1 / freq[np.argmax(power)] == pytest.approx(month / 2, rel=0.01)


def test_hiatuses_remove_the_expected_fraction_of_days():
    """Missing-day episodes are a Poisson Boolean model on the days: a day survives with probability
    exp(-rate/days_per_year * mean length) (Hall 1988, Introduction to the Theory of Coverage
    Processes, ch. 3 - from memory)."""
    p = SynthParams(days_per_year=400, years=5, hiatus_rate_per_year=12, hiatus_mean_days=4)
    recs = [simulate_laminae(p, rng=seed) for seed in range(60)]
    kept = np.array([r.n_laminae / p.n_nominal for r in recs])
    expected = np.exp(-12 / 400 * 4)
    assert kept.mean() == pytest.approx(expected, abs=4 * kept.std(ddof=1) / np.sqrt(kept.size))
    r = recs[0]
    assert r.recorded_laminae_per_year < p.laminae_per_year_nominal
    # The flags sit exactly where the day numbers jump by more than one.
    np.testing.assert_array_equal(r.hiatus_after[:-1], np.diff(r.day_index) > 1)
    gaps = r.hiatus_positions()
    assert sum(g["days_missing"] for g in gaps) == r.missing_laminae
    no_gap = simulate_laminae(p.replace(hiatus_rate_per_year=0.0))
    assert no_gap.n_laminae == p.n_nominal and not no_gap.hiatus_after.any()


def test_growth_rate_and_boundaries():
    p = SynthParams(days_per_year=300, years=2, laminae_per_day=2.0)
    rec = simulate_laminae(p)
    assert rec.n_laminae == 1200 and p.laminae_per_year_nominal == 600
    assert np.all(np.bincount(rec.day_index) == 2)
    np.testing.assert_allclose(np.diff(rec.boundary_heights_mm), rec.thickness_mm)
    assert rec.boundary_heights_mm[0] == 0.0


def test_sway_follows_the_annual_cycle_in_the_sway_plane():
    """Tilt component in the sway plane oscillates with the amplitude given, at the annual period;
    unit growth directions have inclination equal to their angle from +z (analytic)."""
    p = SynthParams(days_per_year=400, years=3, sway_amplitude_deg=5.0, mean_tilt_deg=0.0,
                    meander_amplitude_deg=0.0)
    rec = simulate_laminae(p)
    assert rec.sway_deg.max() == pytest.approx(5.0, abs=0.01)
    assert rec.sway_deg.min() == pytest.approx(-5.0, abs=0.01)
    freq = np.linspace(1 / 2000, 1 / 50, 20000)
    power = LombScargle(rec.day_index.astype(float), rec.sway_deg).power(freq)
    assert 1 / freq[np.argmax(power)] == pytest.approx(400, rel=0.01)
    d = rec.growth_directions()
    np.testing.assert_allclose(np.linalg.norm(d, axis=1), 1.0)
    np.testing.assert_allclose(np.degrees(np.arccos(d[:, 2])), rec.inclination_deg, atol=1e-9)
    az = np.degrees(np.arctan2(d[:, 0], d[:, 1])) % 360
    big = rec.inclination_deg > 0.5
    np.testing.assert_allclose(np.minimum(abs(az - rec.azimuth_deg), 360 - abs(az - rec.azimuth_deg))[big],
                               0, atol=1e-6)


def test_same_seed_same_record_and_generator_accepted():
    p = SynthParams(hiatus_rate_per_year=3)
    a, b = simulate_laminae(p), simulate_laminae(p, rng=p.seed)
    np.testing.assert_array_equal(a.thickness_mm, b.thickness_mm)
    c = simulate_laminae(p, rng=np.random.default_rng(p.seed))
    np.testing.assert_array_equal(a.thickness_mm, c.thickness_mm)
    assert not np.array_equal(a.thickness_mm, simulate_laminae(p, rng=1).thickness_mm)
    with pytest.raises(ParameterError):
        simulate_laminae(p, rng="seven")
