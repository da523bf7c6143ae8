"""One series through the spectral search: periodogram, robust red-noise background, Monte Carlo
family-wise levels over the searched band, and the significant peaks found by successive prewhitening.

Prewhitening (fit and remove the strongest sinusoid, search again) keeps the side lobes and leakage of a
strong cycle from being reported as cycles of their own. Every peak is judged against the same
maximum-statistic null, so the chance that red noise alone gives any significant peak in the band is
at most 5%.

References
----------
Mann, M. E. & Lees, J. M. (1996) Climatic Change 33:409-445.
Roberts, D. H., Lehar, J. & Dreher, J. W. (1987) Astron. J. 93:968-989 (removing detected sinusoids
before searching again).
"""
from __future__ import annotations

import numpy as np

from .lomb_scargle import detrend, fft_frequencies, fft_power, n_fft_for
from .peaks import estimate_in_window, find_peaks, fit_sinusoids, local_window
from .rednoise import ar1_spectrum, fit_background
from .trend import n_cosines, remove_slow, slow_basis
from .significance import LARGE_N, band_mask, levels, max_ratio_null, max_ratio_null_asymptotic, \
    mc_p_value

#: Most peaks reported per series.
MAX_PEAKS = 8


def search_series(values: np.ndarray, band: tuple[float, float], n_sim: int, rng: np.random.Generator,
                  progress=None, label: str = "series") -> dict:
    """Search one series for significant cycles in the band ``(f_low, f_high)`` cycles per band.

    Returns
    -------
    dict
        ``x`` (series with variation slower than the band removed), ``basis``, ``n_fft``, ``frequency``, ``power``, ``background``, ``phi``,
        ``var_e``, ``null`` (n_sim maximum ratios), ``levels`` ({0.95, 0.99}), ``mask``,
        ``peaks`` (list of dicts: frequency, period_bands, ratio, p_value, amplitude; longest period
        first), ``max_ratio``, ``max_ratio_frequency``, ``p_value_max`` (of the largest ratio in the band).
    """
    values = np.asarray(values, dtype=float)
    n = values.size
    basis = slow_basis(n, n_cosines(n, band[0]))
    x = remove_slow(values, basis)
    n_fft = n_fft_for(n)
    fr = fft_frequencies(n_fft)
    P = fft_power(x, n_fft)
    large = n > LARGE_N
    fF = np.arange(n // 2 + 1) / n
    if large:   # fit on the Fourier grid, as the asymptotic null does
        phi, ve, corrF = fit_background(fft_power(x, n), fF, n)
        corrF = corrF[0]
        corr = np.interp(fr, fF, corrF)
    else:
        phi, ve, corr = fit_background(P, fr, n)
        corr = corr[0]
    phi, ve = float(phi[0]), float(ve[0])
    S = ar1_spectrum(fr, phi, ve) * corr
    mask = band_mask(fr, band[0], band[1])
    label = f"{label}: red-noise Monte Carlo"
    if large:
        # The statistic lives on the Fourier grid k/n, where the asymptotic null holds.
        null = max_ratio_null_asymptotic(n, phi, ve, band[0], band[1], n_sim, rng, progress, label)
    else:
        null = max_ratio_null(n, phi, ve, mask, n_fft, n_sim, rng, progress, label, basis=basis)
    lev = levels(null)

    def score(power_fine, series):
        """Test statistic at each fine-grid point: the ratio itself, or (large series) the larger
        ratio of the two Fourier frequencies around it."""
        if not large:
            return power_fine / S
        RF = fft_power(series, n) / (ar1_spectrum(fF, phi, ve) * corrF)
        k = np.minimum(np.floor(fr * n).astype(int), n // 2)
        return np.maximum(RF[k], RF[np.minimum(k + 1, n // 2)])

    ratio = score(P, x)
    i_max = int(np.flatnonzero(mask)[np.argmax(ratio[mask])])
    found: list[dict] = []
    resid = x
    allowed = mask.copy()
    for _ in range(MAX_PEAKS):
        Pr = P if resid is x else fft_power(resid, n_fft)
        Rr = Pr / S
        Sc = ratio if resid is x else score(Pr, resid)
        cand = find_peaks(Rr, fr, allowed & (Sc > lev[0.95]), lev[0.95] if not large else 0.0, n)
        if cand.size == 0:
            break
        i = int(cand[0])
        lo, hi = local_window(fr[i], n)
        f_hat = float(estimate_in_window(resid[None, :], Pr[None, :], fr, n_fft,
                                         np.array([lo]), np.array([hi]))[0])
        found.append({"frequency": f_hat, "grid_index": i, "ratio": float(Sc[i]),
                      "p_value": mc_p_value(float(Sc[i]), null)})
        allowed &= np.abs(fr - f_hat) > 3.0 / n
        model, amp = fit_sinusoids(x, [p["frequency"] for p in found])
        for p, a in zip(found, amp):
            p["amplitude"] = float(a)
        resid = remove_slow(x - model, basis)
    # Re-estimate each peak on the data with the other sinusoids removed (the same estimator the
    # interval Monte Carlo uses on its replicates, which keep all sinusoids).
    for p in found:
        others = [q["frequency"] for q in found if q is not p]
        y = remove_slow(x - fit_sinusoids(x, others)[0], basis) if others else x
        lo, hi = local_window(p["frequency"], n)
        p["window"] = (lo, hi)
        p["frequency"] = float(estimate_in_window(y[None, :], fft_power(y, n_fft)[None, :], fr, n_fft,
                                                  np.array([lo]), np.array([hi]))[0])
        p["period_bands"] = 1.0 / p["frequency"]
    found.sort(key=lambda p: -p["period_bands"])
    return {"x": x, "n": n, "n_fft": n_fft, "frequency": fr, "power": P, "background": S, "phi": phi,
            "var_e": ve, "null": null, "levels": lev, "mask": mask, "peaks": found,
            "max_ratio": float(ratio[i_max]), "max_ratio_frequency": float(fr[i_max]),
            "p_value_max": mc_p_value(float(ratio[i_max]), null), "band": tuple(band), "basis": basis,
            "n_slow_cosines": int(basis.shape[1] - 2)}


def is_constant(values: np.ndarray) -> bool:
    """True when a series has no variation left after removing a straight line."""
    x = np.asarray(values, dtype=float)
    r = detrend(x)
    scale = max(float(np.max(np.abs(x))), 1e-300)
    return bool(np.std(r) <= 1e-10 * scale)
