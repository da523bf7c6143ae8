"""AR(1) red-noise background: its spectrum, a robust fit to a periodogram (batched) and surrogates.

The fit follows the idea of Mann & Lees (1996): fit the AR(1) spectrum not to the raw periodogram but to
a median-smoothed one, so that narrow spectral peaks (the cycles being tested) do not inflate the
background. Here the periodogram is cut into equal frequency bins, each bin is summarised by its median
(divided by ln 2, the median of a unit exponential), and ``log S(f) = log s2 - log(1 - 2 phi cos 2 pi f +
phi^2)`` is fitted to the bin medians by least squares over a fine grid of ``phi``.

References
----------
Mann, M. E. & Lees, J. M. (1996) Robust estimation of background noise and signal detection in climatic
time series. Climatic Change 33:409-445.
Gilman, D. L., Fuglister, F. J. & Mitchell, J. M. (1963) J. Atmos. Sci. 20:182-184 (AR(1) spectrum).
"""
from __future__ import annotations

import functools

import numpy as np
from scipy.signal import lfilter

#: Grid of lag-1 coefficients searched by the fit.
PHI_GRID = np.linspace(-0.9, 0.995, 380)


def ar1_spectrum(frequency: np.ndarray, phi, var_e) -> np.ndarray:
    """AR(1) power spectrum ``var_e / (1 - 2 phi cos(2 pi f) + phi^2)`` in the normalisation of
    :func:`bandgeo.spectral.lomb_scargle.fft_power`.

    Parameters
    ----------
    frequency : (nf,) float, cycles per band
    phi, var_e : float or (B,) float
        Lag-1 coefficient and innovation variance.

    Returns
    -------
    (nf,) or (B, nf) float
    """
    phi = np.asarray(phi, dtype=float)[..., None]
    var_e = np.asarray(var_e, dtype=float)[..., None]
    c = np.cos(2.0 * np.pi * np.asarray(frequency, dtype=float))
    out = var_e / (1.0 - 2.0 * phi * c + phi * phi)
    return out


def _bins(frequency: np.ndarray, n: int):
    """Index arrays of equal-width frequency bins over (0, 0.5), each with several Fourier points."""
    n_bins = int(np.clip(n // 12, 6, 64))
    sel = np.flatnonzero((frequency > 0) & (frequency < 0.5))
    edges = np.linspace(0.0, 0.5, n_bins + 1)
    which = np.clip(np.searchsorted(edges, frequency[sel], side="right") - 1, 0, n_bins - 1)
    groups = [sel[which == b] for b in range(n_bins)]
    return [g for g in groups if g.size >= 2]


@functools.lru_cache(maxsize=64)
def _bin_table(nf: int, df: float, n: int):
    """Indices (nb, size) of the points of each bin, same number per bin (evenly spread) so that the
    medians are one vectorised call, and the bins' mean frequencies (cached per grid)."""
    frequency = np.arange(nf) * df
    groups = _bins(frequency, n)
    size = min(g.size for g in groups)
    take = np.stack([g[np.linspace(0, g.size - 1, size).round().astype(int)] for g in groups])
    return take, frequency[take].mean(axis=1)


def fit_ar1_spectrum(power: np.ndarray, frequency: np.ndarray, n: int, return_bins: bool = False):
    """Robust AR(1) fit to periodograms (one per row).

    Parameters
    ----------
    power : (B, nf) or (nf,) float
        Periodograms on ``frequency``.
    frequency : (nf,) float, cycles per band
    n : int
        Length of the series (sets the number of bins).

    Returns
    -------
    phi : (B,) float
        Lag-1 coefficient, in [-0.9, 0.995].
    var_e : (B,) float
        Innovation variance, in the units of power.
    """
    P = np.atleast_2d(np.asarray(power, dtype=float))
    frequency = np.asarray(frequency, dtype=float)
    take, fb = _bin_table(frequency.size, float(frequency[1] - frequency[0]), int(n))
    med = np.median(P[:, take], axis=2) / np.log(2.0)
    L = np.log(np.maximum(med, np.finfo(float).tiny))          # (B, nb)
    G = -np.log(1.0 - 2.0 * PHI_GRID[:, None] * np.cos(2 * np.pi * fb)[None, :] + PHI_GRID[:, None] ** 2)
    nb = L.shape[1]
    sl = L.sum(axis=1)
    sg = G.sum(axis=1)
    ss = (L * L).sum(axis=1)[:, None] - 2.0 * (L @ G.T) + (G * G).sum(axis=1)[None, :] \
        - (sl[:, None] - sg[None, :]) ** 2 / nb                # (B, nphi) residual sum of squares
    k = np.argmin(ss, axis=1)
    phi = PHI_GRID[k]
    log_var = (sl - sg[k]) / nb
    if return_bins:
        return phi, np.exp(log_var), (med, fb)
    return phi, np.exp(log_var)


def fit_background(power: np.ndarray, frequency: np.ndarray, n: int):
    """Robust background: the AR(1) fit, raised where the spectrum has a broad excess over it.

    A measured series may carry more than red noise: measurement noise shaped by the way it was
    measured (for example tilt from averaged boundary normals) lifts a broad band of frequencies above
    any AR(1) curve, and a test against the bare AR(1) would call that band significant. The bin
    medians show such an excess; eroded by a 3-bin minimum (so that the excess of a single bin, which is
    what a narrow spectral line can cause, is ignored) and floored at 1, their ratio to the AR(1) fit
    multiplies the background. Applied identically to the data and to every Monte Carlo surrogate.

    Returns
    -------
    phi, var_e : (B,) float
        AR(1) parameters.
    factor : (B, nf) float
        Multiplicative correction (>= 1) on ``frequency``.
    """
    phi, ve, (med, fb) = fit_ar1_spectrum(power, frequency, n, return_bins=True)
    c = med / ar1_spectrum(fb, phi, ve)
    lo = np.concatenate([c[:, :1], c[:, :-1]], axis=1)
    hi = np.concatenate([c[:, 1:], c[:, -1:]], axis=1)
    c = np.maximum(np.minimum(np.minimum(lo, c), hi), 1.0)
    f = np.asarray(frequency, dtype=float)
    j = np.clip(np.searchsorted(fb, f) - 1, 0, fb.size - 2)
    w = np.clip((f - fb[j]) / (fb[j + 1] - fb[j]), 0.0, 1.0)
    factor = c[:, j] * (1 - w) + c[:, j + 1] * w
    local = local_level(power, frequency, n)
    with np.errstate(divide="ignore", invalid="ignore"):
        factor = np.maximum(factor, np.nan_to_num(local / ar1_spectrum(f, phi, ve), nan=1.0))
    return phi, ve, factor


#: Half-width of the running median of the local level, in Fourier spacings (1/n).
LOCAL_HALF_WIDTH = 8


def local_level(power: np.ndarray, frequency: np.ndarray, n: int) -> np.ndarray:
    """Running median of the periodogram over +-8 Fourier spacings, divided by ln 2 (batched).

    A low-frequency excess narrower than the equal-width bins of the AR(1) fit - the steep rise of a
    meandering tilt or of a drift below about ten cycles per record - is followed by it, so that such an
    excess is not tested against a background that lies under it. A line fills a few of the 17 Fourier
    ordinates in the window and barely moves their median. Taken on the Fourier grid (about independent
    ordinates) and interpolated to ``frequency``.
    """
    from scipy.ndimage import median_filter

    P = np.atleast_2d(np.asarray(power, dtype=float))
    f = np.asarray(frequency, dtype=float)
    step = max(1, int(round(1.0 / (n * (f[1] - f[0])))))      # grid points per Fourier spacing
    Pc = P[:, ::step]
    fc = f[::step]
    med = median_filter(Pc, size=(1, 2 * LOCAL_HALF_WIDTH + 1), mode="mirror") / np.log(2.0)
    if step == 1:
        return med
    out = np.empty_like(P)
    for i in range(P.shape[0]):
        out[i] = np.interp(f, fc, med[i])
    return out


def simulate_ar1(rng: np.random.Generator, size: int, n: int, phi, var_e, dtype=np.float64) -> np.ndarray:
    """``size`` stationary Gaussian AR(1) series of length ``n`` (rows), started in equilibrium.

    Parameters
    ----------
    rng : numpy Generator
    size, n : int
    phi, var_e : float
        Lag-1 coefficient (|phi| < 1) and innovation variance.
    dtype : numpy float type, default=float64
        float32 halves the cost for long series.

    Returns
    -------
    (size, n) float
    """
    phi = float(phi)
    sd = float(np.sqrt(max(var_e, 0.0)))
    if dtype == np.float32:
        innov = rng.standard_normal((size, n), dtype=np.float32)
        innov *= np.float32(sd)
    else:
        innov = rng.standard_normal((size, n)) * sd
    first = rng.standard_normal(size) * sd / np.sqrt(max(1.0 - phi * phi, 1e-12))
    innov[:, 0] = first
    if dtype == np.float32:
        return lfilter(np.array([1.0], np.float32), np.array([1.0, -phi], np.float32), innov, axis=1)
    return lfilter([1.0], [1.0, -phi], innov, axis=1)
