"""The annual cycle in bands: three estimates (thickness spectrum, cycle counting, sway), each with a
red-noise-respecting 95% interval, their combination when they agree and a consistency test.

Intervals come from :func:`bandgeo.spectral.peaks.peak_monte_carlo`: the fitted sinusoids (with their
harmonics) plus new noise with the residual's own spectrum, re-estimated exactly as on the data. The spectral and cycle-count estimates are computed on the
same replicates, so their covariance is known and used; the sway series has its own, independent noise.
Each estimate is reported bias-corrected (``2 e - median(replicates)``), the centre of its basic
bootstrap interval.

References
----------
Davison, A. C. & Hinkley, D. V. (1997) Bootstrap Methods and their Application, CUP, sec. 2.4 and 5.2.
Cochran, W. G. (1954) The combination of estimates from different experiments. Biometrics 10:101-129
(inverse-variance weights and the chi-square test of agreement).
"""
from __future__ import annotations

import numpy as np
from scipy import stats

from .cycles import count_cycles, cycle_periods
from .peaks import basic_interval, peak_monte_carlo

#: Relative half-width floor of an interval: numerical resolution of the frequency estimator.
REL_FLOOR = 1e-6


def _ci_with_floor(est: float, ci: list[float]) -> list[float]:
    lo, hi = ci
    floor = REL_FLOOR * abs(est)
    return [min(lo, est - floor), max(hi, est + floor)]


def period_estimate(search: dict, peak: dict, n_boot: int, rng, with_cycles: bool, progress=None,
                    label: str = "") -> dict:
    """Period of one peak with its Monte Carlo interval, and (optionally) the cycle count.

    Returns
    -------
    dict
        ``spectrum``: {estimate, ci95, raw_estimate, replicates}; ``cycles``: {estimate, ci95,
        per_cycle_counts, replicates, ...} or None; ``mc``: the Monte Carlo record.
    """
    x, n_fft, n = search["x"], search["n_fft"], search["n"]
    f_hat = peak["frequency"]
    others = [p["frequency"] for p in search["peaks"] if p is not peak]
    fn = (lambda X, fs: cycle_periods(X, fs, n_fft, n)) if with_cycles else None
    mc = peak_monte_carlo(x, f_hat, others, n_fft, n_boot, rng, cycle_fn=fn, progress=progress,
                          label=f"{label}: interval Monte Carlo", basis=search.get("basis"))
    p_rep = 1.0 / mc["f_star"]
    raw = 1.0 / f_hat
    check = phase_check(mc)
    out = {"mc": mc, "spectrum": _inflate(_bias_corrected(raw, p_rep), check["inflation"]), "cycles": None,
           "phase_check": check}
    out["spectrum"]["phase_check"] = check
    if with_cycles:
        cc = count_cycles(x, f_hat, n_fft)
        block = _inflate(_bias_corrected(cc["mean_period_bands"], mc["cycle_star"], correct=False),
                         check["inflation"])
        block.update({"per_cycle_counts": cc["per_cycle_counts"], "record": cc})
        out["cycles"] = block
    return out


def phase_check(mc: dict) -> dict:
    """Does the season keep time as well as the noise model says? Scatter of the per-cycle phases about
    their line on the data, against the same statistic on the Monte Carlo replicates. When the data
    scatter more than the replicates' median, the interval is widened by the square root of the ratio (a
    variance-inflation factor, as for overdispersion; McCullagh & Nelder 1989, sec. 4.5): phase wander -
    an early or late season, a changing shape - then adds to the frequency error what the stationary model
    lacks. It is applied whenever the ratio exceeds 1, not only when significant: with a few cycles the
    test has little power (four years of daily temperatures scatter three times more than the model,
    p = 0.11), and a refusal to widen would leave the interval too narrow."""
    d, ds = mc.get("phase_scatter"), np.asarray(mc.get("phase_scatter_star", []), dtype=float)
    ds = ds[np.isfinite(ds)]
    out = {"n_whole_cycles": mc.get("n_whole_cycles"), "scatter_rad2": d, "p_value": None, "inflation": 1.0,
           "method": "residual variance of per-cycle phases about a line, data against the Monte Carlo "
                     "replicates; interval widened by sqrt(data / median replicate) when above 1"}
    if d is None or not np.isfinite(d) or ds.size < 10:
        out["note"] = "fewer than three whole cycles: not tested"
        return out
    p = float((1 + np.count_nonzero(ds >= d)) / (ds.size + 1))
    med = float(np.median(ds))
    out.update({"p_value": p, "replicate_median_rad2": med})
    if med > 0 and d > med:
        out["inflation"] = float(np.sqrt(d / med))
    return out


def _inflate(block: dict, factor: float) -> dict:
    """Widen an interval about its estimate by ``factor`` (>= 1); the sd with it."""
    if factor <= 1.0 or block.get("ci95") is None or not np.all(np.isfinite(block["ci95"])):
        return block
    e = block["estimate"]
    lo, hi = block["ci95"]
    out = dict(block)
    out["ci95"] = [float(e - (e - lo) * factor), float(e + (hi - e) * factor)]
    out["ci95_before_phase_check"] = [float(lo), float(hi)]
    out["sd"] = float(block["sd"] * factor) if np.isfinite(block.get("sd", np.nan)) else block.get("sd")
    return out


def _bias_corrected(raw: float, reps: np.ndarray, correct: bool = True) -> dict:
    """Estimate and interval from Monte Carlo replicates.

    With ``correct`` the estimate is bias-corrected and the interval is the basic bootstrap interval.
    Without, the interval is the replicates' spread about their median, placed around the raw estimate:
    used for cycle counting, whose replicates (band-passed around their own spectral estimate) inherit a
    bias the data do not have (measured on forward-model series: noise-free bias < 0.3 band, while
    the replicate bias reached 2 bands).
    """
    reps = np.asarray(reps, dtype=float)
    good = reps[np.isfinite(reps)]
    if not correct and good.size >= 10:
        good = good - float(np.median(good)) + raw
    ci = basic_interval(raw, good)
    est = 2 * raw - float(np.median(good)) if good.size else raw
    if np.all(np.isfinite(ci)):
        ci = _ci_with_floor(est, ci)
    return {"estimate": float(est), "ci95": [float(ci[0]), float(ci[1])], "raw_estimate": float(raw),
            "replicates": reps, "sd": _robust_sd(good)}


def _robust_sd(r: np.ndarray) -> float:
    if r.size < 10:
        return float("nan")
    lo, hi = np.quantile(r, [0.025, 0.975])
    return float(max((hi - lo) / (2 * 1.959964), REL_FLOOR * abs(np.median(r))))


def covariance(blocks: list[dict]) -> np.ndarray:
    """Covariance of estimates: from paired replicates where they share them, zero across groups.

    ``blocks`` are dicts with ``replicates``, ``sd`` and ``group``; standard deviations are robust
    (from the central 95%), correlations from the paired replicates within a group.
    """
    k = len(blocks)
    C = np.zeros((k, k))
    for i, a in enumerate(blocks):
        C[i, i] = a["sd"] ** 2
        for j in range(i):
            b = blocks[j]
            if a["group"] != b["group"]:
                continue
            ra, rb = np.asarray(a["replicates"]), np.asarray(b["replicates"])
            ok = np.isfinite(ra) & np.isfinite(rb)
            if ok.sum() < 10:
                continue
            rho = stats.spearmanr(ra[ok], rb[ok]).statistic
            rho = float(np.clip(np.nan_to_num(rho), -0.999, 0.999))
            C[i, j] = C[j, i] = rho * a["sd"] * b["sd"]
    return C


def combine(estimates: np.ndarray, cov: np.ndarray) -> dict:
    """Inverse-variance weighted mean with its variance from the full covariance, and a chi-square test
    of agreement on the differences (variances only: conservative for positively correlated estimates).

    Returns
    -------
    dict
        ``estimate``, ``sd``, ``ci95``, ``weights``, ``chi2``, ``dof``, ``p_value`` (None for one estimate).
    """
    e = np.asarray(estimates, dtype=float)
    C = np.asarray(cov, dtype=float)
    w = 1.0 / np.diag(C)
    w = w / w.sum()
    est = float(w @ e)
    sd = float(np.sqrt(max(w @ C @ w, 0.0)))
    sd = max(sd, REL_FLOOR * abs(est))
    out = {"estimate": est, "sd": sd, "ci95": [est - 1.959964 * sd, est + 1.959964 * sd],
           "weights": w.tolist(), "chi2": None, "dof": 0, "p_value": None}
    if e.size >= 2:
        # The agreement test treats the estimates as independent (diagonal covariance). With their
        # positive correlation this overstates the variance of the differences, so it is conservative:
        # the cycle-count replicates carry a bias of their own (see _bias_corrected), which would make a
        # test with the full covariance reject agreement that is there.
        A = np.hstack([-np.ones((e.size - 1, 1)), np.eye(e.size - 1)])
        d = A @ e
        V = A @ np.diag(np.diag(C)) @ A.T
        chi2 = float(d @ np.linalg.pinv(V, rcond=1e-10) @ d)
        dof = e.size - 1
        out.update({"chi2": chi2, "dof": dof, "p_value": float(stats.chi2.sf(chi2, dof))})
    return out
