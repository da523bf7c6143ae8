"""Lomb-Scargle periodogram of an evenly indexed band series: astropy for the reported spectrum and a
batched FFT engine (the same quantity at the Fourier frequencies) for Monte Carlo and peak refinement.

Frequencies are in cycles per band throughout; a period in bands is ``1 / frequency``.

References
----------
Lomb, N. R. (1976) Astrophys. Space Sci. 39:447-462.
Scargle, J. D. (1982) Astrophys. J. 263:835-853.
VanderPlas, J. T. (2018) Astrophys. J. Suppl. 236:16 (astropy's implementation).
"""
from __future__ import annotations

import numpy as np
from scipy import fft as _fft

#: Largest number of complex samples handled in one block by the refinement (memory bound).
_BLOCK = 4_000_000
#: Threads of the batched FFTs (one whole transform per thread: the same numbers as one thread).
FFT_WORKERS = 2


def oversample_for(n: int) -> int:
    """Zero-padding factor of the frequency grid for a series of ``n`` bands (finer for short series)."""
    return 4 if n <= 50_000 else 2


def n_fft_for(n: int, oversample: int | None = None) -> int:
    """FFT length giving a grid spacing of ``1 / (oversample * n)`` cycles per band or finer."""
    ovs = oversample_for(n) if oversample is None else int(oversample)
    return int(_fft.next_fast_len(max(int(ovs * n), n), real=True))


def fft_frequencies(n_fft: int) -> np.ndarray:
    """(n_fft//2 + 1,) frequencies in cycles per band of a real FFT of length ``n_fft``."""
    return np.arange(n_fft // 2 + 1, dtype=float) / n_fft


def detrend(x: np.ndarray) -> np.ndarray:
    """Remove the least-squares straight line along the last axis (batched); returns a new array."""
    x = np.asarray(x)
    dt = np.float32 if x.dtype == np.float32 else np.float64   # single precision stays single
    x = x.astype(dt, copy=False)
    n = x.shape[-1]
    t = (np.arange(n, dtype=np.float64) - 0.5 * (n - 1)).astype(dt)
    tt = float(t.astype(np.float64) @ t.astype(np.float64)) if n > 1 else 1.0
    slope = (x @ t) / dt(tt)
    out = x - x.mean(axis=-1, keepdims=True, dtype=np.float64).astype(dt)
    out -= np.asarray(slope, dtype=dt)[..., None] * t
    return out


def fft_transform(x: np.ndarray, n_fft: int) -> np.ndarray:
    """Zero-padded real FFT along the last axis, (..., n_fft//2 + 1) complex."""
    return _fft.rfft(x, n=n_fft, axis=-1, workers=FFT_WORKERS if np.ndim(x) > 1 else None)


def fft_power(x: np.ndarray, n_fft: int, spectrum: np.ndarray | None = None) -> np.ndarray:
    """Classical periodogram ``|sum_t x_t exp(-2 pi i f t)|^2 / n`` on the grid of :func:`fft_frequencies`.

    For a centred, evenly sampled series this equals astropy's Lomb-Scargle power with
    ``normalization='psd'`` at the Fourier frequencies ``k / n`` (tested). White noise of variance
    ``s2`` has expected power ``s2``.

    Parameters
    ----------
    x : (..., n) float
    n_fft : int
    spectrum : complex array, optional
        The FFT already computed by :func:`fft_transform` (saves one transform).

    Returns
    -------
    (..., n_fft//2 + 1) float
    """
    n = np.shape(x)[-1]
    X = fft_transform(x, n_fft) if spectrum is None else spectrum
    return (X.real ** 2 + X.imag ** 2) / n


def astropy_power(x: np.ndarray, frequency: np.ndarray) -> np.ndarray:
    """astropy ``LombScargle`` power (normalization 'psd', data centred, no floating mean) of one
    series indexed by band number, at ``frequency`` (cycles per band, > 0).

    The exact 'cython' method is used while bands x frequencies stays below 2e6, and astropy's fast
    approximation beyond (see /work/shared/PERF-NOTES: exact methods are 16-80x slower at 1e5 samples).
    """
    from astropy.timeseries import LombScargle

    x = np.asarray(x, dtype=float)
    t = np.arange(x.size, dtype=float)
    frequency = np.asarray(frequency, dtype=float)
    method = "cython" if x.size * frequency.size <= 2_000_000 else "fast"
    ls = LombScargle(t, x, fit_mean=False, center_data=True, normalization="psd")
    with np.errstate(divide="ignore", invalid="ignore"):   # astropy's fast method near f = 0
        return np.asarray(ls.power(frequency, method=method), dtype=float)


def parabolic_peak(power: np.ndarray, index: np.ndarray, n_fft: int) -> np.ndarray:
    """Frequencies of the peaks at grid ``index`` refined by a parabola through the log power of the
    three grid points around each (batched over the first axis).

    Parameters
    ----------
    power : (B, nf) float
    index : (B,) int
    n_fft : int

    Returns
    -------
    (B,) float, cycles per band
    """
    nf = power.shape[-1]
    i = np.clip(np.asarray(index), 1, nf - 2)
    rows = np.arange(power.shape[0])
    tiny = np.finfo(float).tiny
    lm = np.log(power[rows, i - 1] + tiny)
    l0 = np.log(power[rows, i] + tiny)
    lp = np.log(power[rows, i + 1] + tiny)
    den = lm - 2.0 * l0 + lp
    with np.errstate(divide="ignore", invalid="ignore"):
        delta = np.where(den < 0, 0.5 * (lm - lp) / den, 0.0)
    return (i + np.clip(delta, -0.5, 0.5)) / n_fft


def ls_power_at(x: np.ndarray, f: np.ndarray) -> np.ndarray:
    """Exact least-squares power of each row at its own frequency, with a floating mean and trend.

    The explained sum of squares of the regression of ``x`` on ``[1, t, cos 2 pi f t, sin 2 pi f t]``
    beyond that of ``[1, t]``: the generalised Lomb-Scargle power (Zechmeister & Kuerster 2009) with the
    straight line the series was detrended by kept in the model. Its maximum is the least-squares
    frequency of one sinusoid, free of the bias the plain periodogram has from the mirror frequency
    ``-f`` (and from the detrending) when a record holds only a few cycles.

    Parameters
    ----------
    x : (B, n) float
    f : (B,) float

    Returns
    -------
    (B,) float
    """
    B, n = x.shape
    t = np.arange(n, dtype=float) - 0.5 * (n - 1)
    e = np.empty((B, n), dtype=complex)
    e[:, 0] = np.exp(2j * np.pi * f * t[0])
    e[:, 1:] = np.exp(2j * np.pi * f)[:, None]
    np.cumprod(e, axis=1, out=e)
    xe = (x * e).sum(axis=1)
    s1 = e.sum(axis=1)
    st = e @ t
    e *= e
    s2 = e.sum(axis=1)
    c, s = s1.real, s1.imag
    cc, ss, cs = 0.5 * (n + s2.real), 0.5 * (n - s2.real), 0.5 * s2.imag
    tt = float(t @ t)
    z = np.zeros(B)
    M = np.empty((B, 4, 4))
    M[:, 0] = np.stack([np.full(B, float(n)), z, c, s], axis=1)
    M[:, 1] = np.stack([z, np.full(B, tt), st.real, st.imag], axis=1)
    M[:, 2] = np.stack([c, st.real, cc, cs], axis=1)
    M[:, 3] = np.stack([s, st.imag, cs, ss], axis=1)
    xs, xt = x.sum(axis=1), x @ t
    v = np.stack([xs, xt, xe.real, xe.imag], axis=1)
    sol = np.linalg.solve(M + 1e-12 * n * np.eye(4), v[:, :, None])[:, :, 0]
    return (v * sol).sum(axis=1) - xs ** 2 / n - xt ** 2 / tt


def refine_ls(x: np.ndarray, f0: np.ndarray, n_iter: int = 5) -> np.ndarray:
    """Maximise :func:`ls_power_at` near ``f0`` by successive parabolas (batched).

    The step starts at a tenth of the Fourier spacing and shrinks threefold each iteration; moves are
    limited to twice the step, so the search stays on the peak it started from.
    """
    x = np.atleast_2d(np.asarray(x, dtype=float))
    f = np.array(f0, dtype=float).reshape(-1).copy()
    n = x.shape[1]
    d = 0.1 / n
    block = max(1, _BLOCK // max(n, 1))
    for start in range(0, x.shape[0], block):
        sl = slice(start, start + block)
        xb, fb = x[sl], f[sl]
        step = d
        for _ in range(n_iter):
            pm, p0, pp = (ls_power_at(xb, fb + k * step) for k in (-1, 0, 1))
            den = pm - 2 * p0 + pp
            with np.errstate(divide="ignore", invalid="ignore"):
                delta = np.where(den < 0, 0.5 * (pm - pp) / den, np.where(pp > pm, 1.0, -1.0))
            fb = fb + np.clip(np.nan_to_num(delta), -2.0, 2.0) * step
            step /= 3.0
        f[sl] = fb
    return f


def refine_frequency(x: np.ndarray, f0: np.ndarray, n_steps: int = 2) -> np.ndarray:
    """Refine peak frequencies by Newton steps on the exact periodogram ``|X(f)|^2`` (batched).

    Parameters
    ----------
    x : (B, n) float
        Series (already detrended), one per row.
    f0 : (B,) float
        Starting frequencies (cycles per band), e.g. from :func:`parabolic_peak`.
    n_steps : int, default=2

    Returns
    -------
    (B,) float
        Frequencies where ``d|X|^2/df = 0`` near ``f0``; a step is taken only where the curvature is
        negative and is limited to a quarter of the Fourier spacing ``1/n``.
    """
    x = np.atleast_2d(np.asarray(x, dtype=float))
    f = np.array(f0, dtype=float).reshape(-1).copy()
    n = x.shape[1]
    t = np.arange(n, dtype=float) - 0.5 * (n - 1)
    w = 2.0 * np.pi * t
    step_max = 0.25 / n
    block = max(1, _BLOCK // max(n, 1))
    for start in range(0, x.shape[0], block):
        sl = slice(start, start + block)
        xb = x[sl]
        fb = f[sl]
        for _ in range(n_steps):
            # exp(-i f w_t) by a running product (w_t steps by 2 pi): cheaper than n complex exps.
            e = np.empty_like(xb, dtype=complex)
            e[:, 0] = np.exp(-1j * fb * w[0])
            e[:, 1:] = np.exp(-2j * np.pi * fb)[:, None]
            np.cumprod(e, axis=1, out=e)
            e *= xb
            X0 = e.sum(axis=1)
            X1 = -1j * (e @ w)
            X2 = -(e @ (w * w))
            d1 = 2.0 * np.real(np.conj(X0) * X1)
            d2 = 2.0 * (np.abs(X1) ** 2 + np.real(np.conj(X0) * X2))
            with np.errstate(divide="ignore", invalid="ignore"):
                step = np.where(d2 < 0, -d1 / d2, 0.0)
            fb = fb + np.clip(np.nan_to_num(step), -step_max, step_max)
        f[sl] = fb
    return f
