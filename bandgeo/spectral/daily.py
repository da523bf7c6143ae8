"""Daily-increment test: are the bands regular increments, or as irregular as randomly timed layers?

Three figures, all computed in the depth domain (boundary positions along the growth axis):

- the spacing's coefficient of variation (sd / mean of band thickness);
- the sharpness of the spectral peak at one cycle per mean spacing: boundaries are cut into windows of
  32 bands, each window's boundary train is transformed at frequencies scaled by the window's own mean
  spacing (so a slow seasonal change of thickness does not smear the peak), and the mean power at
  1 / spacing is divided by the mean power between 0.3 and 0.7 / spacing;
- a Monte Carlo null of random spacing (boundaries of a Poisson process, exponential spacings with the
  same mean and count): the p-value is the fraction of null records at least as sharp as the data.

A relief profile along the height (when the scan gives one) adds the quality factor of its own peak
near 1 / mean spacing.

References
----------
Cox, D. R. & Lewis, P. A. W. (1966) The Statistical Analysis of Series of Events, Methuen, ch. 5 (spectrum
of a point process; Poisson process as the random-timing null).
Bartlett, M. S. (1963) The spectral analysis of point processes. J. R. Stat. Soc. B 25:264-296.
"""
from __future__ import annotations

import numpy as np

from .lomb_scargle import astropy_power

#: Bands per window of the boundary-train spectrum, and most windows used.
WINDOW = 32
MAX_WINDOWS = 24
#: Fewest bands for which the test is made.
MIN_BANDS = 48

_U_PEAK = np.linspace(0.85, 1.15, 11)
_U_BACK = np.linspace(0.3, 0.7, 9)


def _sharpness(spacing: np.ndarray) -> np.ndarray:
    """Peak sharpness of boundary trains; ``spacing`` is (B, n). Returns (B,)."""
    B, n = spacing.shape
    n_win = min(n // WINDOW, MAX_WINDOWS)
    starts = np.linspace(0, n - WINDOW, n_win).round().astype(int)
    segs = spacing[:, starts[:, None] + np.arange(WINDOW)[None, :]]      # (B, w, W)
    z = np.cumsum(segs, axis=2) - segs[:, :, :1]                          # boundary positions
    s_bar = segs.mean(axis=2, keepdims=True)
    zn = z / s_bar                                                        # in mean spacings
    u = np.concatenate([_U_PEAK, _U_BACK])
    # float32 phases: the sums need ~1e-3 relative accuracy only, and this is the costly step.
    ang = (2 * np.pi * zn[..., None] * u).astype(np.float32)  # (B, w, W, nu)
    c = np.cos(ang).sum(axis=2, dtype=np.float64)
    s = np.sin(ang).sum(axis=2, dtype=np.float64)
    power = (c * c + s * s) / WINDOW                                      # (B, w, nu)
    power = power.mean(axis=1)
    peak = power[:, :_U_PEAK.size].max(axis=1)
    back = power[:, _U_PEAK.size:].mean(axis=1)
    return peak / back


def daily_test(thickness_mm: np.ndarray, rng: np.random.Generator, n_sim: int = 199,
               depth_height_mm: np.ndarray | None = None, depth_relief: np.ndarray | None = None) -> dict:
    """Test whether band spacing is more regular than random timing.

    Parameters
    ----------
    thickness_mm : (N,) float
        Band thicknesses in growth order.
    rng : numpy Generator
    n_sim : int, default=199
        Null records simulated.
    depth_height_mm, depth_relief : (M,) float, optional
        Relief profile along the height.

    Returns
    -------
    dict
        ``verdict``, ``spacing_cv``, ``spacing_cv_null_median``, ``peak_sharpness``,
        ``peak_sharpness_null_95``, ``p_value``, ``cv_p_value``, ``method``, ``n_bands``,
        ``mean_spacing_mm`` and, with a profile, ``depth_profile``.
    """
    h = np.asarray(thickness_mm, dtype=float)
    n = h.size
    method = ("depth-domain boundary-train spectrum in 32-band windows: peak at 1/mean spacing over "
              "the 0.3-0.7 band, against a Poisson (random-spacing) null; spacing coefficient of variation")
    out = {"verdict": "too few bands to test", "spacing_cv": float(np.std(h) / np.mean(h)) if n else None,
           "peak_sharpness": None, "p_value": None, "method": method, "n_bands": int(n),
           "mean_spacing_mm": float(np.mean(h)) if n else None}
    if n < MIN_BANDS:
        return out
    sharp = float(_sharpness(h[None, :])[0])
    # Only the windows the statistic looks at are simulated (spacings of the null are independent, so
    # any windows are alike); the null CV then comes from as many spacings, which is conservative.
    m = min(n, min(n // WINDOW, MAX_WINDOWS) * WINDOW)
    null_h = rng.exponential(np.mean(h), size=(n_sim, m))
    null_sharp = _sharpness(null_h)
    null_cv = null_h.std(axis=1) / null_h.mean(axis=1)
    cv = float(np.std(h) / np.mean(h))
    p = float((1 + np.count_nonzero(null_sharp >= sharp)) / (n_sim + 1))
    p_cv = float((1 + np.count_nonzero(null_cv <= cv)) / (n_sim + 1))
    regular = p < 0.05 and p_cv < 0.05
    out.update({
        "verdict": "consistent with regular increments" if regular else "not distinguishable from random spacing",
        "peak_sharpness": sharp, "peak_sharpness_null_95": float(np.quantile(null_sharp, 0.95)),
        "p_value": p, "cv_p_value": p_cv, "spacing_cv_null_median": float(np.median(null_cv)),
        "n_sim": int(n_sim),
        "note": "regular increments are necessary for, but do not prove, one band per day",
    })
    if depth_height_mm is not None and depth_relief is not None and len(depth_height_mm) >= 32:
        out["depth_profile"] = _profile_peak(np.asarray(depth_height_mm, float),
                                             np.asarray(depth_relief, float), float(np.mean(h)))
    return out


def _profile_peak(z: np.ndarray, r: np.ndarray, spacing: float) -> dict:
    """Peak of the relief profile's Lomb-Scargle spectrum in 0.5-2 cycles per mean spacing, and its
    quality factor (frequency / full width at half maximum)."""
    ok = np.isfinite(z) & np.isfinite(r)
    z, r = z[ok], r[ok]
    f = np.linspace(0.5, 2.0, 600) / spacing
    from astropy.timeseries import LombScargle

    p = np.asarray(LombScargle(z, r - r.mean()).power(f), dtype=float)
    i = int(np.argmax(p))
    half = p[i] / 2
    lo = i
    while lo > 0 and p[lo] > half:
        lo -= 1
    hi = i
    while hi < p.size - 1 and p[hi] > half:
        hi += 1
    fwhm = max(f[hi] - f[lo], f[1] - f[0])
    return {"peak_frequency_per_mm": float(f[i]), "peak_period_mm": float(1 / f[i]),
            "quality_factor": float(f[i] / fwhm), "peak_over_mean_spacing": float(f[i] * spacing),
            "method": "astropy Lomb-Scargle of the relief profile against height"}
