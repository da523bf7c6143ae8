"""Binned profiles along the column: a groove-score profile and its periodic contrast.

Used by the curvature-class stage to choose the groove class set (the classes whose summed probability
is most periodic along the flattened height). The tracing itself is in :mod:`bandgeo.segment.trace`.
"""
from __future__ import annotations

import numpy as np
from scipy.ndimage import gaussian_filter1d


def groove_profile(s: np.ndarray, score: np.ndarray, bin_mm: float, sigma_mm: float):
    """Mean groove score in bins along ``s``, smoothed by a Gaussian (empty bins borrow neighbours).

    Returns
    -------
    centres_mm : (q,) float
    profile : (q,) float
        Smoothed mean score (0..1).
    counts : (q,) float
        Smoothed vertex counts per bin.
    """
    s0 = float(s.min())
    nb = int(np.ceil((s.max() - s0) / bin_mm)) + 1
    ib = np.minimum(((s - s0) / bin_mm).astype(np.int64), nb - 1)
    sums = np.bincount(ib, score, minlength=nb)
    cnt = np.bincount(ib, minlength=nb).astype(float)
    sig = max(sigma_mm / bin_mm, 0.5)
    ss = gaussian_filter1d(sums, sig, mode="constant")
    cc = gaussian_filter1d(cnt, sig, mode="constant")
    prof = np.where(cc > 1e-9, ss / np.maximum(cc, 1e-9), 0.0)
    return s0 + (np.arange(nb) + 0.5) * bin_mm, prof, cc


def periodic_contrast(profile: np.ndarray, bin_mm: float, spacing_mm: float) -> float:
    """Share of the profile's variance at the band frequency (0.7-1.4 / spacing) and its 2nd harmonic."""
    x = profile - profile.mean()
    if len(x) < 8 or not np.any(x):
        return 0.0
    pw = np.abs(np.fft.rfft(x * np.hanning(len(x)))) ** 2
    f = np.fft.rfftfreq(len(x), d=bin_mm)
    f0 = 1.0 / spacing_mm
    band = ((f >= 0.7 * f0) & (f <= 1.4 * f0)) | ((f >= 1.4 * f0) & (f <= 2.8 * f0))
    tot = pw[1:].sum()
    return float(pw[band].sum() / tot) if tot > 0 else 0.0
