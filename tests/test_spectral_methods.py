"""Spectral building blocks against outside references: astropy and scipy periodograms, scipy's AR
filter response, nitime's multitaper, analytic sinusoids, and the slow reference implementations."""
import numpy as np
import pytest
from scipy import signal

from bandgeo.spectral import cycles, lomb_scargle as ls, multitaper, rednoise, slow
from bandgeo.spectral.peaks import estimate_in_window, local_window
from bandgeo.spectral.significance import band_mask, max_ratio_null


def ar1(rng, n, phi, sd=1.0):
    """AR(1) noise made with scipy.signal.lfilter (an outside generator)."""
    return signal.lfilter([1.0], [1.0, -phi], rng.standard_normal(n) * sd)


def test_fft_power_equals_astropy_lomb_scargle_at_fourier_frequencies():
    # Reference: astropy LombScargle, normalization='psd', centred data, evenly sampled (VanderPlas 2018).
    from astropy.timeseries import LombScargle

    rng = np.random.default_rng(1)
    n = 600
    x = ar1(rng, n, 0.5)
    x = x - x.mean()
    f = np.arange(1, n // 2) / n
    P = ls.fft_power(x, n)[1:n // 2]
    ref = LombScargle(np.arange(n), x, fit_mean=False, center_data=True, normalization="psd").power(f, method="slow")
    np.testing.assert_allclose(P, ref, rtol=1e-8)


def test_fft_power_equals_scipy_periodogram():
    # Reference: scipy.signal.periodogram (one-sided density, fs=1) is twice |X|^2/n off DC and Nyquist.
    rng = np.random.default_rng(2)
    x = rng.standard_normal(512)
    f, pxx = signal.periodogram(x, fs=1.0, window="boxcar", detrend=False, scaling="density")
    P = ls.fft_power(x, 512)
    np.testing.assert_allclose(P[1:-1], pxx[1:-1] / 2.0, rtol=1e-10)


def test_fft_engine_matches_slow_reference_on_padded_grid():
    rng = np.random.default_rng(3)
    x = rng.standard_normal(300)
    n_fft = ls.n_fft_for(300)
    fr = ls.fft_frequencies(n_fft)[:200]
    np.testing.assert_allclose(ls.fft_power(x, n_fft)[:200], slow.slow_periodogram(x, fr), rtol=1e-9, atol=1e-12)


@pytest.mark.parametrize("n,tol", [(4000, 1e-3), (20000, 1e-4)])
def test_refined_frequency_of_analytic_sinusoid(n, tol):
    # Analytic sinusoid of known frequency. The periodogram maximum is biased only by the interference
    # with the mirror frequency -f0, which falls off with the number of cycles (Quinn & Hannan 2001,
    # ch. 3): about 1e-3 relative for 11 cycles, 1e-4 for 55.
    f0 = 1.0 / 365.25
    x = ls.detrend(np.cos(2 * np.pi * f0 * np.arange(n) + 0.7))
    n_fft = ls.n_fft_for(n)
    fr = ls.fft_frequencies(n_fft)
    P = ls.fft_power(x, n_fft)
    lo, hi = local_window(f0, n)
    f = estimate_in_window(x[None], P[None], fr, n_fft, np.array([lo]), np.array([hi]))[0]
    assert abs(1 / f - 365.25) / 365.25 < tol


def test_ar1_spectrum_equals_scipy_filter_response():
    # Reference: |H(e^{i w})|^2 of the AR(1) filter 1 / (1 - phi z^-1) from scipy.signal.freqz.
    f = np.linspace(0.001, 0.5, 200)
    w, h = signal.freqz([1.0], [1.0, -0.7], worN=2 * np.pi * f)
    np.testing.assert_allclose(rednoise.ar1_spectrum(f, 0.7, 2.0), 2.0 * np.abs(h) ** 2, rtol=1e-10)


@pytest.mark.parametrize("phi", [0.2, 0.6, 0.85])
def test_robust_ar1_fit_recovers_phi_and_ignores_a_strong_line(phi):
    # Series from scipy.signal.lfilter with known phi and unit innovations; adding a strong sinusoid
    # must not move the fit much (the point of the median-smoothed fit, Mann & Lees 1996).
    rng = np.random.default_rng(4)
    n = 8000
    x = ar1(rng, n, phi)
    n_fft = ls.n_fft_for(n)
    fr = ls.fft_frequencies(n_fft)
    ph, ve = rednoise.fit_ar1_spectrum(ls.fft_power(ls.detrend(x), n_fft), fr, n)
    assert abs(ph[0] - phi) < 0.05
    assert abs(ve[0] - 1.0) < 0.15
    y = x + 3.0 * np.std(x) * np.cos(2 * np.pi * np.arange(n) / 365.0)
    ph2, ve2 = rednoise.fit_ar1_spectrum(ls.fft_power(ls.detrend(y), n_fft), fr, n)
    assert abs(ph2[0] - phi) < 0.06
    assert abs(ve2[0] - 1.0) < 0.2


def test_simulated_ar1_has_the_stationary_variance():
    # Stationary AR(1) variance var_e / (1 - phi^2) (textbook, e.g. Box & Jenkins).
    rng = np.random.default_rng(5)
    x = rednoise.simulate_ar1(rng, 400, 500, 0.8, 1.0)
    assert abs(x[:, 0].var() - 1 / (1 - 0.64)) < 0.5
    assert abs(x[:, -1].var() - 1 / (1 - 0.64)) < 0.5
    lag1 = np.mean([np.corrcoef(r[:-1], r[1:])[0, 1] for r in x])
    assert abs(lag1 - 0.8) < 0.03


def test_batched_null_equals_slow_one_series_at_a_time():
    rng_a = np.random.default_rng(6)
    n = 256
    n_fft = ls.n_fft_for(n)
    fr = ls.fft_frequencies(n_fft)
    mask = band_mask(fr, 3.0 / n, 0.25)
    fast = max_ratio_null(n, 0.5, 1.0, mask, n_fft, 12, rng_a)
    surrogates = rednoise.simulate_ar1(np.random.default_rng(6), 12, n, 0.5, 1.0)
    ref = slow.slow_max_ratio(surrogates, fr, mask)
    np.testing.assert_allclose(fast, ref, rtol=1e-8)


def test_cycle_count_matches_scipy_hilbert_reference():
    # Reference: scipy.signal.hilbert on the band-passed series (slow path) for an analytic sinusoid in
    # AR(1) noise; both give the same mean bands per cycle.
    rng = np.random.default_rng(7)
    n, P = 3000, 372.0
    x = ls.detrend(np.cos(2 * np.pi * np.arange(n) / P) + 0.3 * ar1(rng, n, 0.5))
    n_fft = ls.n_fft_for(n)
    fast = cycles.count_cycles(x, 1 / P, n_fft)
    ref = slow.slow_cycle_period(x, 1 / P)
    assert abs(fast["mean_period_bands"] - ref) < 0.5
    assert abs(fast["mean_period_bands"] - P) < 3.0
    # whole cycles in the interior, each close to the true period
    assert len(fast["per_cycle_counts"]) >= 5
    assert np.all(np.abs(fast["per_cycle_counts"] - P) < 0.1 * P)


def test_dpss_tapers_match_nitime():
    # Reference: nitime.algorithms.dpss_windows (independent implementation of Slepian sequences).
    from nitime.algorithms import dpss_windows

    v, lam = multitaper.tapers(512, 4.0, 7)
    v2, lam2 = dpss_windows(512, 4.0, 7)
    np.testing.assert_allclose(lam, lam2, rtol=1e-6)
    for a, b in zip(v, v2):
        assert abs(abs(np.dot(a, b)) - 1.0) < 1e-6


def test_multitaper_psd_proportional_to_nitime():
    # Reference: nitime.algorithms.multi_taper_psd with eigenvalue weights (adaptive=False): same shape of
    # spectrum; the two normalisations differ by a constant factor.
    from nitime.algorithms import multi_taper_psd

    rng = np.random.default_rng(8)
    n = 1024
    x = ar1(rng, n, 0.6)
    x = x - x.mean()  # nitime works on the centred series
    mt = multitaper.multitaper(x, n)
    f, psd, _ = multi_taper_psd(x, NW=4, adaptive=False, jackknife=False, NFFT=n)
    ratio = mt["psd"][1:n // 2] / psd[1:n // 2]
    assert np.std(ratio) / np.mean(ratio) < 1e-9
    assert abs(np.mean(ratio) - np.pi) < 1e-9  # nitime's density is per radian: a factor pi here


def test_f_test_finds_the_line_nitime_finds_and_is_calibrated_on_noise():
    # Thomson (1982): F ~ F(2, 2K-2) under a locally flat spectrum, mean (2K-2)/(2K-4).
    # The line found at the F maximum must be the one nitime.utils.detect_lines reports.
    from nitime.utils import detect_lines

    rng = np.random.default_rng(9)
    n = 2048
    noise = rng.standard_normal(n)
    mt = multitaper.multitaper(noise, n)
    K = mt["k"]
    assert abs(np.nanmean(mt["f_stat"][5:-5]) - (2 * K - 2) / (2 * K - 4)) < 0.1
    f0 = 0.1234
    x = noise + 0.5 * np.cos(2 * np.pi * f0 * np.arange(n))
    mt = multitaper.multitaper(x, 4 * n)
    i = np.nanargmax(mt["f_stat"])
    lines = detect_lines(x, (4.0, K), NFFT=4 * n)
    assert abs(mt["frequency"][i] - f0) < 1.0 / n
    assert np.min(np.abs(np.asarray(lines[0]) / (2 * np.pi) - f0)) < 1.0 / n or \
        np.min(np.abs(np.asarray(lines[0]) - f0)) < 1.0 / n
    assert abs(mt["line_amplitude"][i] - 0.5) < 0.1


def test_asymptotic_null_matches_simulated_series_on_the_fourier_grid():
    # Brockwell & Davis (1991) Thm 10.3.2: periodogram ordinates of a linear process at the Fourier
    # frequencies are asymptotically independent exponentials about the spectrum. The large-series null
    # must therefore give the same maximum-ratio quantiles as simulating and transforming each series.
    from bandgeo.spectral.significance import max_ratio_null_asymptotic

    n = 4096
    fr = np.arange(n // 2 + 1) / n
    mask = band_mask(fr, 3.0 / n, 0.25)
    sim = max_ratio_null(n, 0.6, 1.0, mask, n, 400, np.random.default_rng(10))
    asym = max_ratio_null_asymptotic(n, 0.6, 1.0, 3.0 / n, 0.25, 400, np.random.default_rng(11))
    for q in (0.5, 0.95):
        assert abs(np.quantile(asym, q) / np.quantile(sim, q) - 1) < 0.08, q


def test_large_series_path_recovers_a_known_period():
    # Analytic sinusoid (period 365.25 bands) in scipy AR(1) noise, 30,000 bands: above LARGE_N.
    from bandgeo.series import series_from_thickness
    from bandgeo.spectral import test_periodicity as run_periodicity

    rng = np.random.default_rng(12)
    n = 30_000
    h = 1.0 + 0.02 * np.cos(2 * np.pi * np.arange(n) / 365.25) + 0.05 * ar1(rng, n, 0.5)
    d = run_periodicity(series_from_thickness(h), n_sim=199, methods=("spectrum", "cycle_count")).days_per_year
    assert d["significant"]
    assert d["ci95"][0] <= 365.25 <= d["ci95"][1]


def test_background_follows_a_broad_excess_but_not_a_line():
    # A broad hump (white noise smoothed by a band-pass, scipy.signal.butter) added to AR(1) noise must
    # raise the background over the hump; a narrow line must not raise it (robust fit, Mann & Lees 1996).
    rng = np.random.default_rng(13)
    n = 4000
    base = ar1(rng, n, 0.5)
    b, a = signal.butter(4, [0.3, 0.5], btype="band")
    hump = 3.0 * signal.lfilter(b, a, rng.standard_normal(n))
    n_fft = ls.n_fft_for(n)
    fr = ls.fft_frequencies(n_fft)
    _, _, corr = rednoise.fit_background(ls.fft_power(ls.detrend(base + hump), n_fft), fr, n)
    assert np.median(corr[0, (fr > 0.17) & (fr < 0.23)]) > 2.0
    assert np.median(corr[0, fr < 0.05]) < 1.2
    line = base + 2.0 * np.cos(2 * np.pi * 0.1 * np.arange(n))
    _, _, corr = rednoise.fit_background(ls.fft_power(ls.detrend(line), n_fft), fr, n)
    assert corr[0, np.argmin(np.abs(fr - 0.1))] < 1.3
