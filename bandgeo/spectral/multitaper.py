"""Multitaper spectrum with discrete prolate spheroidal (Slepian) tapers and Thomson's harmonic F-test.

The tapers come from ``scipy.signal.windows.dpss``. The spectrum is the eigenvalue-weighted average of
the K eigenspectra; the F-test asks, at each frequency, whether the K tapered transforms are better
explained by one complex sinusoid (a line) than by a locally flat continuum. Under the null the
statistic follows F(2, 2K - 2).

References
----------
Thomson, D. J. (1982) Spectrum estimation and harmonic analysis. Proc. IEEE 70:1055-1096
(eqs. 13.9-13.10 for the F-test).
Percival, D. B. & Walden, A. T. (1993) Spectral Analysis for Physical Applications, CUP, ch. 7 and 10.
"""
from __future__ import annotations

import numpy as np
from scipy import fft as _fft
from scipy import stats
from scipy.signal.windows import dpss

#: Default time-bandwidth product and number of tapers (2 NW - 1).
DEFAULT_NW = 4.0


def tapers(n: int, nw: float = DEFAULT_NW, k: int | None = None):
    """Slepian tapers ``(K, n)`` and their concentration eigenvalues ``(K,)`` (scipy)."""
    k = int(2 * nw - 1) if k is None else int(k)
    win, ratios = dpss(n, nw, Kmax=k, return_ratios=True)
    return np.atleast_2d(win), np.atleast_1d(ratios)


def multitaper(x: np.ndarray, n_fft: int, nw: float = DEFAULT_NW, k: int | None = None) -> dict:
    """Multitaper power spectrum and harmonic F-test of one series.

    Parameters
    ----------
    x : (n,) float
        The (detrended) series.
    n_fft : int
        FFT length; the grid is ``k / n_fft`` cycles per band.
    nw : float, default=4
        Time-bandwidth product; the resolution half-width is ``nw / n`` cycles per band.
    k : int, optional
        Number of tapers (default ``2 nw - 1``).

    Returns
    -------
    dict
        ``frequency (nf,)``, ``psd (nf,)`` in the normalisation of the periodogram (white noise of
        variance s2 gives s2), ``f_stat (nf,)``, ``f_p_value (nf,)`` (pointwise, F(2, 2K-2)),
        ``line_amplitude (nf,)`` (amplitude of the fitted sinusoid, units of x), ``nw``, ``k``,
        ``eigenvalues``.
    """
    x = np.asarray(x, dtype=float)
    n = x.size
    v, lam = tapers(n, nw, k)
    K = v.shape[0]
    Y = _fft.rfft(v * x[None, :], n=n_fft, axis=1)              # (K, nf) eigencoefficients
    psd = (lam[:, None] * np.abs(Y) ** 2).sum(axis=0) / lam.sum()
    U0 = v.sum(axis=1)                                          # DC value of each taper's transform
    u2 = float(U0 @ U0)
    mu = (U0[:, None] * Y).sum(axis=0) / u2                     # complex line amplitude
    resid = (np.abs(Y - U0[:, None] * mu[None, :]) ** 2).sum(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        f_stat = (K - 1) * np.abs(mu) ** 2 * u2 / resid
    f_stat[0] = np.nan
    p = stats.f.sf(f_stat, 2, 2 * K - 2)
    return {"frequency": np.arange(Y.shape[1]) / n_fft, "psd": psd, "f_stat": f_stat, "f_p_value": p,
            "line_amplitude": 2.0 * np.abs(mu), "nw": float(nw), "k": int(K), "eigenvalues": lam}


def f_test_at(mt: dict, f: float, n: int) -> dict:
    """The largest F statistic within the resolution half-width ``nw / n`` of ``f``, with its
    pointwise p-value and frequency."""
    fr = mt["frequency"]
    sel = np.abs(fr - f) <= mt["nw"] / n
    if not np.any(sel):
        sel = np.abs(fr - f) == np.abs(fr - f).min()
    i = np.flatnonzero(sel)[np.nanargmax(mt["f_stat"][sel])]
    return {"frequency": float(fr[i]), "f_stat": float(mt["f_stat"][i]), "p_value": float(mt["f_p_value"][i]),
            "dof": [2, 2 * mt["k"] - 2]}


#: Largest time-bandwidth product of the line test, and the fraction of the frequency it may span.
LINE_NW_MAX = 4.0
LINE_NW_MIN = 1.5
LINE_NW_FRACTION = 0.8


def line_test(x: np.ndarray, f: float) -> dict:
    """Thomson's harmonic F-test at one frequency, with a bandwidth that fits below it.

    A cycle must be a line, not a slope: the F-test asks whether the tapered transforms at ``f`` are
    explained by one sinusoid better than by a locally flat continuum. Its bandwidth ``W = NW / n`` must
    stay below ``f`` (otherwise the test mixes the frequency with zero, where trends live), so ``NW`` is
    ``min(4, 0.8 f n)``, at least 1.5; when even that does not fit (fewer than about 2 cycles in the
    record) the test is not applicable and says so. Evaluated exactly at ``f`` (no grid).

    Returns
    -------
    dict
        ``applicable``, ``f_stat``, ``p_value`` (pointwise, F(2, 2K - 2)), ``dof``, ``nw``, ``k``,
        ``bandwidth_cycles_per_band``, ``frequency``, ``method``.
    """
    x = np.asarray(x, dtype=float)
    n = x.size
    nw = float(min(LINE_NW_MAX, LINE_NW_FRACTION * f * n))
    out = {"frequency": float(f), "nw": nw, "bandwidth_cycles_per_band": nw / n, "applicable": False,
           "f_stat": None, "p_value": None, "dof": None, "k": None,
           "method": "Thomson (1982) harmonic F-test, DPSS tapers (scipy), bandwidth below the frequency"}
    if nw < LINE_NW_MIN:
        out["note"] = (f"not applicable: the record holds {f * n:.1f} cycles, too few for a bandwidth "
                       f"below the frequency")
        return out
    v, _ = tapers(n, nw, max(2, int(2 * nw - 1)))
    K = v.shape[0]
    t = np.arange(n)
    e = np.exp(-2j * np.pi * f * t)
    Y = (v * (x * e)[None, :]).sum(axis=1)
    U0 = v.sum(axis=1)
    u2 = float(U0 @ U0)
    mu = (U0 * Y).sum() / u2
    resid = float((np.abs(Y - U0 * mu) ** 2).sum())
    F = float((K - 1) * abs(mu) ** 2 * u2 / max(resid, 1e-300))
    out.update({"applicable": True, "f_stat": F, "p_value": float(stats.f.sf(F, 2, 2 * K - 2)),
                "dof": [2, 2 * K - 2], "k": int(K)})
    return out
