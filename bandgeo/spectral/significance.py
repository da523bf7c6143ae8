"""Significance against red noise that controls for searching many frequencies: the Monte Carlo
distribution of the *maximum* ratio of periodogram to fitted AR(1) background over the searched band.

Each surrogate is an AR(1) series with the background fitted to the data; the surrogate's own background
is re-fitted the same way before its maximum ratio is taken, so the estimation of the background is part
of the null distribution (a parametric bootstrap). A peak whose ratio exceeds the 95% quantile of the
maximum is significant at 5% family-wise over the whole band. Everything is batched: surrogates are
generated as a matrix, transformed with one FFT call per block, and fitted with matrix products.

References
----------
Mann, M. E. & Lees, J. M. (1996) Climatic Change 33:409-445 (AR(1) null for spectral peaks).
Westfall, P. H. & Young, S. S. (1993) Resampling-Based Multiple Testing, Wiley (max-statistic
adjustment for many tests).
Davison, A. C. & Hinkley, D. V. (1997) Bootstrap Methods and their Application, CUP, eq. 4.11
(Monte Carlo p-value (1 + r) / (n + 1)).
"""
from __future__ import annotations

import numpy as np

from ..progress import report
from .lomb_scargle import detrend, fft_frequencies, fft_power
from .rednoise import ar1_spectrum, fit_background, simulate_ar1
from .trend import remove_slow

#: Samples (surrogates x bands) generated per block; bounds memory at a few hundred MB.
BLOCK_SAMPLES = 2_000_000

#: Series longer than this use the large-sample null: periodogram ordinates at the Fourier frequencies
#: drawn directly as independent exponentials about the AR(1) spectrum, their asymptotic distribution
#: (Brockwell & Davis 1991, Theorem 10.3.2), instead of simulating each series and transforming it.
LARGE_N = 20_000


def band_mask(frequency: np.ndarray, f_low: float, f_high: float) -> np.ndarray:
    """Boolean mask of grid frequencies inside the searched band ``[f_low, f_high]``."""
    return (frequency >= f_low) & (frequency <= f_high)


def max_ratio_null(n: int, phi: float, var_e: float, mask: np.ndarray, n_fft: int, n_sim: int,
                   rng: np.random.Generator, progress=None, label: str = "red-noise Monte Carlo",
                   basis: np.ndarray | None = None):
    """Maximum of periodogram / re-fitted AR(1) background over ``mask`` for ``n_sim`` AR(1) surrogates.

    Parameters
    ----------
    n : int
        Series length, bands.
    phi, var_e : float
        AR(1) parameters fitted to the data.
    mask : (n_fft//2 + 1,) bool
        Searched band on the frequency grid.
    n_fft : int
    n_sim : int
    rng : numpy Generator
    basis : (n, k) float, optional
        Slow basis removed from each surrogate as from the data (:mod:`bandgeo.spectral.trend`);
        default a straight line.

    Returns
    -------
    (n_sim,) float
        Maximum ratios (the null distribution of the test statistic).
    """
    freq = fft_frequencies(n_fft)
    out = np.empty(n_sim)
    block = max(1, min(n_sim, BLOCK_SAMPLES // max(n, 1)))
    for start in range(0, n_sim, block):
        size = min(block, n_sim - start)
        x = simulate_ar1(rng, size, n, phi, var_e)
        x = detrend(x) if basis is None else remove_slow(x, basis)
        P = fft_power(x, n_fft)
        ph, ve, corr = fit_background(P, freq, n)
        S = ar1_spectrum(freq[mask], ph, ve) * corr[:, mask]
        out[start:start + size] = (P[:, mask] / S).max(axis=1)
        report(progress, label, start + size, n_sim)
    return out


def max_ratio_null_asymptotic(n: int, phi: float, var_e: float, f_low: float, f_high: float, n_sim: int,
                              rng: np.random.Generator, progress=None, label: str = "red-noise Monte Carlo"):
    """Large-sample version of :func:`max_ratio_null` on the Fourier grid ``k / n``.

    Each surrogate periodogram is ``S(f_k) E_k`` with ``E_k`` independent unit exponentials (chi-square
    with 2 degrees of freedom over 2), which is the asymptotic law of the periodogram of a linear process
    at the Fourier frequencies; its AR(1) background is re-fitted exactly as on the data.

    Returns
    -------
    (n_sim,) float
    """
    freq = np.arange(n // 2 + 1) / n
    S_true = ar1_spectrum(freq, phi, var_e)
    mask = band_mask(freq, f_low, f_high)
    out = np.empty(n_sim)
    block = max(1, min(n_sim, BLOCK_SAMPLES // max(freq.size, 1)))
    for start in range(0, n_sim, block):
        size = min(block, n_sim - start)
        P = rng.standard_exponential((size, freq.size)) * S_true
        ph, ve, corr = fit_background(P, freq, n)
        S = ar1_spectrum(freq[mask], ph, ve) * corr[:, mask]
        out[start:start + size] = (P[:, mask] / S).max(axis=1)
        report(progress, label, start + size, n_sim)
    return out


def mc_p_value(statistic: float, null: np.ndarray) -> float:
    """Monte Carlo p-value ``(1 + #{null >= statistic}) / (n + 1)`` (never zero)."""
    null = np.asarray(null)
    return float((1 + np.count_nonzero(null >= statistic)) / (null.size + 1))


def levels(null: np.ndarray, quantiles=(0.95, 0.99)) -> dict:
    """Quantiles of the null maximum ratio, e.g. ``{0.95: q95, 0.99: q99}``."""
    return {q: float(np.quantile(null, q)) for q in quantiles}
