"""Slow, plain reference implementations of the fast batched routines, kept for the tests.

Each one computes the same quantity as its fast counterpart in the most direct way (explicit sums, one
series at a time, scipy's Hilbert transform), so that tests can check the fast code against it.
"""
from __future__ import annotations

import numpy as np
from scipy.signal import hilbert

from .rednoise import ar1_spectrum, fit_background


def slow_periodogram(x: np.ndarray, frequency: np.ndarray) -> np.ndarray:
    """``|sum_t x_t exp(-2 pi i f t)|^2 / n`` by an explicit sum at each frequency (one series)."""
    x = np.asarray(x, dtype=float)
    t = np.arange(x.size)
    out = np.empty(len(frequency))
    for k, f in enumerate(frequency):
        c = np.sum(x * np.cos(2 * np.pi * f * t))
        s = np.sum(x * np.sin(2 * np.pi * f * t))
        out[k] = (c * c + s * s) / x.size
    return out


def slow_max_ratio(series: np.ndarray, frequency: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """Maximum periodogram / fitted background over ``mask``, one series (row) at a time."""
    out = []
    for x in np.atleast_2d(series):
        xd = x - x.mean()
        t = np.arange(x.size) - 0.5 * (x.size - 1)
        xd = xd - (xd @ t) / (t @ t) * t
        P = slow_periodogram(xd, frequency)
        phi, ve, corr = fit_background(P, frequency, x.size)
        out.append(np.max(P[mask] / (ar1_spectrum(frequency[mask], phi[0], ve[0]) * corr[0, mask])))
    return np.array(out)


def slow_cycle_period(x: np.ndarray, f0: float, rel_width: float = 0.25) -> float:
    """Mean bands per cycle from the phase of scipy's analytic signal after a Gaussian band-pass done on
    a long zero-padded full FFT (same filter as the fast complex demodulation)."""
    x = np.asarray(x, dtype=float)
    n = x.size
    m = 8 * n
    X = np.fft.fft(x, m)
    f = np.fft.fftfreq(m)
    W = np.exp(-0.5 * ((np.abs(f) - f0) / (rel_width * f0)) ** 2)
    y = np.real(np.fft.ifft(X * W))[:n]
    phase = np.unwrap(np.angle(hilbert(y)))
    period = 1.0 / f0
    trim = int(round(period if n - 2 * period >= 2 * period else 0.5 * period))
    t = np.arange(n)[trim:n - trim]
    slope = np.polyfit(t, phase[trim:n - trim], 1)[0]
    return 2 * np.pi / slope
