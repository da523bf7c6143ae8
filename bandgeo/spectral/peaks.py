"""Spectral peaks of a band series: candidates above the family-wise level, their refined frequency,
and a red-noise-respecting Monte Carlo of the frequency estimate (fitted sinusoids + AR(1) surrogates,
re-estimated exactly as on the data).

References
----------
Quinn, B. G. & Hannan, E. J. (2001) The Estimation and Tracking of Frequency, CUP (periodogram-maximum
frequency estimator and its refinement).
Davison, A. C. & Hinkley, D. V. (1997) Bootstrap Methods and their Application, CUP, sec. 5.2 (basic
bootstrap interval) and sec. 8.2 (model-based resampling of dependent series).
"""
from __future__ import annotations

import numpy as np

from ..progress import report
from .lomb_scargle import detrend, fft_frequencies, fft_power, fft_transform, parabolic_peak, \
    refine_ls
from .rednoise import ar1_spectrum, fit_ar1_spectrum, fit_background, simulate_ar1
from .significance import LARGE_N
from .trend import remove_slow

#: Samples (replicates x bands) per block of the Monte Carlo.
BLOCK_SAMPLES = 2_000_000


def find_peaks(ratio: np.ndarray, frequency: np.ndarray, mask: np.ndarray, threshold: float, n: int):
    """Grid indices of local maxima of ``ratio`` inside ``mask`` above ``threshold``, strongest first.

    Maxima closer than 3 Fourier spacings (``3/n``) to a stronger one are dropped: they are its side
    lobes. Returns an int array (possibly empty).
    """
    r = np.asarray(ratio)
    interior = np.zeros(r.size, dtype=bool)
    interior[1:-1] = (r[1:-1] >= r[:-2]) & (r[1:-1] >= r[2:])
    idx = np.flatnonzero(interior & mask & (r > threshold))
    idx = idx[np.argsort(-r[idx])]
    kept: list[int] = []
    for i in idx:
        if all(abs(frequency[i] - frequency[j]) > 3.0 / n for j in kept):
            kept.append(int(i))
    return np.asarray(kept, dtype=int)


def local_window(f_hat: float, n: int) -> tuple[float, float]:
    """Frequency window searched around a peak when it is re-estimated: +-min(3/n, 0.4 f)."""
    half = min(3.0 / n, 0.4 * f_hat)
    return f_hat - half, f_hat + half


def estimate_in_window(x: np.ndarray, P: np.ndarray, frequency: np.ndarray, n_fft: int,
                       lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Peak frequency of each row inside its own window ``[lo, hi]``: grid maximum of the periodogram,
    parabolic interpolation, then least-squares refinement (:func:`refine_ls`).

    Parameters
    ----------
    x : (B, n) float, detrended series
    P : (B, nf) float, their periodograms on ``frequency``
    lo, hi : (B,) float, window bounds, cycles per band

    Returns
    -------
    (B,) float, cycles per band
    """
    inside = (frequency[None, :] >= np.asarray(lo)[:, None]) & (frequency[None, :] <= np.asarray(hi)[:, None])
    k = np.argmax(np.where(inside, P, -np.inf), axis=1)
    f0 = parabolic_peak(P, k, n_fft)
    # The least-squares refinement costs O(n) per row and step; beyond LARGE_N bands the parabola on
    # the oversampled grid is used alone (the same on data and replicates, so the interval is unaffected).
    f = refine_ls(x, f0, n_iter=4) if x.shape[1] <= LARGE_N else f0
    return np.clip(f, lo, hi)


def fit_sinusoids(x: np.ndarray, freqs) -> tuple[np.ndarray, np.ndarray]:
    """Least-squares fit of a mean and a cosine/sine pair at each frequency.

    Returns
    -------
    model : (n,) float
        The fitted sinusoids (without the mean).
    amplitude : (k,) float
        Amplitude of each sinusoid, in the units of ``x``.
    """
    x = np.asarray(x, dtype=float)
    t = np.arange(x.size, dtype=float)
    freqs = np.atleast_1d(np.asarray(freqs, dtype=float))
    cols = [np.ones_like(t)]
    for f in freqs:
        cols += [np.cos(2 * np.pi * f * t), np.sin(2 * np.pi * f * t)]
    A = np.column_stack(cols)
    coef, *_ = np.linalg.lstsq(A, x, rcond=None)
    model = A[:, 1:] @ coef[1:]
    amp = np.hypot(coef[1::2], coef[2::2])
    return model, amp


#: Ring of the residual-spectrum smoother: Fourier spacings (1/n) excluded around each frequency (the
#: notch a least-squares fit leaves at its own frequency) and the outer radius averaged.
RING_INNER, RING_OUTER = 1.0, 6.0
#: Harmonics of a peak kept in the Monte Carlo model (a season is rarely a sine).
N_HARMONICS = 3


def ring_smooth(power: np.ndarray, n: int, n_fft: int) -> np.ndarray:
    """Mean of a periodogram over the ring ``RING_INNER/n < |f' - f| <= RING_OUTER/n`` around each grid
    frequency (mirrored at 0 and 1/2, where the spectrum of a real series is symmetric).

    The notch that fitting a sinusoid leaves at its own frequency is thereby filled from its neighbours,
    and leftover signal (phase wander, a changing shape, amplitude modulation) spreads over the ring.
    """
    from scipy.ndimage import convolve1d

    step = n_fft / n                                    # grid points per Fourier spacing
    j = np.arange(-int(np.floor(RING_OUTER * step)), int(np.floor(RING_OUTER * step)) + 1)
    w = ((np.abs(j) > RING_INNER * step) & (np.abs(j) <= RING_OUTER * step)).astype(float)
    w /= w.sum()
    return convolve1d(np.asarray(power, dtype=float), w, mode="mirror")


def residual_surrogates(rng: np.random.Generator, size: int, n: int, spectrum: np.ndarray, n_fft: int,
                        dtype=np.float64) -> np.ndarray:
    """``size`` stationary Gaussian series of length ``n`` whose spectrum is ``spectrum`` (given on the
    grid of :func:`bandgeo.spectral.lomb_scargle.fft_frequencies` (n_fft), in the normalisation of
    :func:`bandgeo.spectral.lomb_scargle.fft_power`): white noise of length ``n_fft`` shaped in the
    frequency domain (circulant embedding; ``n_fft >= 2 n`` keeps the wrap-around out of the kept
    ``n`` samples for correlations shorter than the record), first ``n`` samples kept."""
    from scipy import fft as _fft

    from .lomb_scargle import FFT_WORKERS

    w = rng.standard_normal((size, n_fft), dtype=np.float32 if dtype == np.float32 else np.float64)
    W = _fft.rfft(w, axis=1, workers=FFT_WORKERS)
    W *= np.sqrt(np.maximum(spectrum, 0.0)).astype(W.real.dtype)[None, :]
    return _fft.irfft(W, n=n_fft, axis=1, workers=FFT_WORKERS)[:, :n]


def cycle_phase_matrices(n: int, f: float):
    """Cosine and sine at ``f`` and the start index of each whole cycle ``[j/f, (j+1)/f)`` of the record
    (``m = floor(n f)`` cycles): per-cycle sums of ``y * cos`` and ``y * sin`` give each cycle's phase.

    Returns ``(cos (n,), sin (n,), starts (m + 1,))``, ``starts[-1]`` being the end of the last whole cycle,
    and ``m``."""
    t = np.arange(n)
    m = int(np.floor(n * f + 1e-9))
    j = np.floor(t * f).astype(int)
    starts = np.searchsorted(j, np.arange(m + 1))
    return np.cos(2 * np.pi * f * t), np.sin(2 * np.pi * f * t), starts, m


def phase_scatter(y: np.ndarray, C: np.ndarray, S: np.ndarray, starts: np.ndarray | None = None) -> np.ndarray:
    """Residual variance of per-cycle phases about their straight line (batched over rows of ``y``).

    Each whole cycle of the record gives one phase; a record whose season keeps time scatters about a
    line. Excess scatter (phase wander, a changing season) makes the frequency less certain than a
    stationary-noise model says. ``C, S, starts`` come from :func:`cycle_phase_matrices`. Returns (B,)
    radians squared (NaN with fewer than three cycles).
    """
    y = np.atleast_2d(y)
    m = starts.size - 1
    if m < 3:
        return np.full(y.shape[0], np.nan)
    end = int(starts[-1])
    a = np.add.reduceat(y[:, :end] * C[:end], starts[:-1], axis=1)
    b = np.add.reduceat(y[:, :end] * S[:end], starts[:-1], axis=1)
    ph = np.unwrap(np.arctan2(-b, a), axis=1)
    j = np.arange(m) - 0.5 * (m - 1)
    slope = (ph - ph.mean(axis=1, keepdims=True)) @ j / (j @ j)
    res = ph - ph.mean(axis=1, keepdims=True) - slope[:, None] * j[None, :]
    return (res * res).sum(axis=1) / (m - 2)


def peak_monte_carlo(x: np.ndarray, f_hat: float, other_freqs, n_fft: int, n_boot: int,
                     rng: np.random.Generator, cycle_fn=None, progress=None, label="interval Monte Carlo",
                     basis: np.ndarray | None = None):
    """Monte Carlo of the frequency estimate of one peak, with a noise model taken from the residual.

    The data are modelled as the fitted sinusoid at ``f_hat``, its harmonics (2 and 3 times ``f_hat``:
    a season is rarely a sine), any other significant sinusoids, and a residual. The residual is not
    assumed to be AR(1): its own periodogram, averaged over a ring of 1-6 Fourier spacings around each
    frequency (floored by the robust AR(1) background of the residual), is the spectrum of the Gaussian
    surrogates. What a sinusoid cannot describe - a skewed or
    changing season, drift of phase, amplitude modulation by a changing growth rate, meander of a tilt -
    stays in the residual near ``f_hat`` and widens the interval. Each replicate (model plus surrogate)
    is treated exactly as the data: slow part removed, window search, parabola, least-squares
    refinement.

    Parameters
    ----------
    x : (n,) float, the series with its slow part removed
    f_hat : float, the estimate on the data (cycles per band)
    other_freqs : sequence of float, other significant frequencies kept in the model
    n_fft, n_boot : int
    rng : numpy Generator
    cycle_fn : callable or None
        ``cycle_fn(X, f_star) -> (B,) periods`` applied to each block (cycle counting on the replicates,
        X being their FFTs); its results are returned too.
    basis : (n, k) float, optional
        The slow basis removed from the data (default: a straight line).

    Returns
    -------
    dict with ``f_star (n_boot,)``, ``cycle_star (n_boot,) or None``, ``phi``, ``var_e`` (robust AR(1)
    summary of the residual), ``amplitude``, ``residual_sd``, ``residual_lag1``, ``noise_model``.
    """
    n = x.size
    freq = fft_frequencies(n_fft)
    remove = (lambda y: detrend(y)) if basis is None else (lambda y: remove_slow(y, basis))
    harmonics = [k * f_hat for k in range(2, N_HARMONICS + 1) if k * f_hat < 0.5 - 1.0 / n]
    freqs = [f_hat]
    for f in list(other_freqs or []) + harmonics:
        if all(abs(f - g) > 1.5 / n for g in freqs):
            freqs.append(f)
    model, amp = fit_sinusoids(x, freqs)
    resid = remove(x - model)
    phi, var_e = fit_ar1_spectrum(fft_power(resid, n_fft), freq, n)
    phi, var_e = float(phi[0]), float(var_e[0])
    # The ring average has the sampling noise of about ten periodogram ordinates; the robust background of
    # the whole residual spectrum (AR(1) raised by any broad excess) is its floor, so a ring that happens
    # to fall low does not narrow the interval.
    Pr = fft_power(resid, n_fft)
    ph_b, ve_b, corr_b = fit_background(Pr, freq, n)
    S = np.maximum(ring_smooth(Pr, n, n_fft), ar1_spectrum(freq, ph_b[0], ve_b[0]) * corr_b[0])
    lo, hi = local_window(f_hat, n)
    f_star = np.empty(n_boot)
    cyc = np.empty(n_boot) if cycle_fn is not None else None
    Cm, Sm, st_cyc, m_cyc = cycle_phase_matrices(n, f_hat)
    d_star = np.empty(n_boot)
    block = max(1, min(n_boot, BLOCK_SAMPLES // max(n_fft, 1)))
    single = n > LARGE_N          # single precision halves the cost; ample for a periodogram peak
    for start in range(0, n_boot, block):
        size = min(block, n_boot - start)
        if single:
            y = residual_surrogates(rng, size, n, S, n_fft, dtype=np.float32)
            y += model.astype(np.float32)[None, :]
        else:
            y = model[None, :] + residual_surrogates(rng, size, n, S, n_fft)
        y = remove(y)
        X = fft_transform(y, n_fft)
        P = fft_power(y, n_fft, spectrum=X)
        fs = estimate_in_window(y, P, freq, n_fft, np.full(size, lo), np.full(size, hi))
        f_star[start:start + size] = fs
        d_star[start:start + size] = phase_scatter(y.astype(float, copy=False), Cm, Sm, st_cyc)
        if cycle_fn is not None:
            cyc[start:start + size] = cycle_fn(X, fs)
        report(progress, label, start + size, n_boot)
    r = resid - resid.mean()
    lag1 = float(r[1:] @ r[:-1] / max(r @ r, 1e-300))
    return {"f_star": f_star, "cycle_star": cyc, "phi": phi, "var_e": var_e,
            "phase_scatter": float(phase_scatter(x, Cm, Sm, st_cyc)[0]), "phase_scatter_star": d_star,
            "n_whole_cycles": int(m_cyc),
            "amplitude": float(amp[0]), "window": (lo, hi), "residual_sd": float(np.std(resid)),
            "residual_lag1": lag1, "residual_spectrum_at_peak": float(np.interp(f_hat, freq, S)),
            "noise_model": "residual spectrum (ring-averaged periodogram of the residual after the "
                           "fitted sinusoid, its 2nd and 3rd harmonics and other significant cycles)"}


def basic_interval(estimate: float, replicates: np.ndarray, level: float = 0.95) -> list[float]:
    """Basic (reverse-percentile) bootstrap interval ``[2 e - q_hi, 2 e - q_lo]``.

    Davison & Hinkley (1997) eq. 5.6. Replicates that are not finite are ignored.
    """
    r = np.asarray(replicates, dtype=float)
    r = r[np.isfinite(r)]
    if r.size < 10:
        return [float("nan"), float("nan")]
    a = 0.5 * (1.0 - level)
    q_lo, q_hi = np.quantile(r, [a, 1.0 - a])
    return [float(2 * estimate - q_hi), float(2 * estimate - q_lo)]
