"""Evolutive (sliding-window) spectrum: does a cycle persist through the record, or come and go?

Each window is detrended and its periodogram divided by its own robust AR(1) background, so that the
grid shows where a cycle stands above red noise, window by window. All windows go through one batched
FFT.

References
----------
Priestley, M. B. (1965) Evolutionary spectra and non-stationary processes. J. R. Stat. Soc. B
27:204-237.
Mann, M. E. & Lees, J. M. (1996) Climatic Change 33:409-445 (background).
"""
from __future__ import annotations

import numpy as np
from scipy import stats

from .lomb_scargle import detrend, fft_frequencies, fft_power
from .rednoise import ar1_spectrum, fit_ar1_spectrum

#: Pointwise 95% level of a periodogram ordinate over its background (chi-square, 2 dof, over 2).
POINTWISE_95 = float(stats.chi2.ppf(0.95, 2) / 2.0)


def evolutive_spectrum(x: np.ndarray, window: int, step: int | None = None, max_windows: int = 400) -> dict:
    """Sliding-window periodogram over background.

    Parameters
    ----------
    x : (n,) float
    window : int
        Window length, bands.
    step : int, optional
        Step between windows (default ``window // 4``; increased so at most ``max_windows`` windows).

    Returns
    -------
    dict
        ``centre_band (w,)``, ``frequency (nf,)`` cycles per band, ``ratio (w, nf)`` (power over AR(1)
        background), ``window_bands``, ``step_bands``.
    """
    x = np.asarray(x, dtype=float)
    n = x.size
    window = int(min(max(window, 16), n))
    step = max(1, int(step or window // 4), int(np.ceil((n - window) / max_windows)) if n > window else 1)
    starts = np.arange(0, n - window + 1, step)
    segs = np.lib.stride_tricks.sliding_window_view(x, window)[starts]
    segs = detrend(segs)
    n_fft = int(4 * window)
    fr = fft_frequencies(n_fft)
    P = fft_power(segs, n_fft)
    phi, ve = fit_ar1_spectrum(P, fr, window)
    ratio = P / ar1_spectrum(fr, phi, ve)
    return {"centre_band": starts + 0.5 * (window - 1), "frequency": fr, "ratio": ratio,
            "window_bands": window, "step_bands": step}


def persistence(evo: dict, f: float) -> float:
    """Fraction of windows in which the ratio at the grid frequency nearest ``f`` exceeds the pointwise
    95% level (chi-square with 2 degrees of freedom)."""
    i = int(np.argmin(np.abs(evo["frequency"] - f)))
    lo, hi = max(i - 1, 0), i + 2
    return float(np.mean(evo["ratio"][:, lo:hi].max(axis=1) > POINTWISE_95))
