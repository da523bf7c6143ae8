"""Tidal cycles in the band series: a fortnightly (spring-neap) or monthly modulation of thickness gives
the number of days (bands) per synodic month.

Significant peaks come from the same family-wise search as the annual cycle. A peak is read as tidal
when it is shorter than the annual period, is not one of its harmonics, and lies in the tidal band
(default 9-45 bands per cycle; the boundaries, stated in the result, are wide enough for every
published Precambrian and Phanerozoic estimate of 29-32 days per synodic month and their halves). A peak
of 22-45 bands is read as the synodic month; one of 9-22 bands as the fortnight, half the month. When
both are present the month is the inverse-variance mean of the two readings.

References
----------
Williams, G. E. (2000) Geological constraints on the Precambrian history of Earth's rotation and the
Moon's orbit. Rev. Geophys. 38:37-59 (spring-neap and monthly cycles in tidal rhythmites).
Kvale, E. P. et al. (1999) J. Sediment. Res. 69:1154-1168 (fortnightly and monthly thickness cycles),
from memory.
"""
from __future__ import annotations

import numpy as np

from .annual import combine, period_estimate
from .select import MONTHS_PER_YEAR_RANGE, line_alpha  # the range lives in select: no import cycle

#: Periods (bands per cycle) searched for tidal cycles, and the split between fortnight and month.
TIDAL_BAND = (9.0, 45.0)
FORTNIGHT_MAX = 22.0


def _harmonic_of(period: float, annual: float | None, n: int | None = None) -> bool:
    if annual is None:
        return False
    from .select import is_harmonic

    return bool(is_harmonic(1.0 / period, 1.0 / annual, n or 10 ** 9)) or any(
        abs(period - annual / k) <= 0.03 * annual / k for k in range(2, 7))


def tidal_analysis(search: dict, annual_period: float | None, n_boot: int, rng, progress=None) -> dict:
    """Days per synodic month from significant tidal-band peaks of the thickness search.

    Returns
    -------
    dict
        ``days_per_synodic_month`` ({estimate, ci95, significant, p_value, method} or None),
        ``peaks`` (every significant tidal-band peak with its reading), ``searched_band_bands_per_cycle``,
        ``note``.
    """
    lo, hi = TIDAL_BAND
    searched = [max(lo, 1.0 / search["band"][1]), min(hi, 1.0 / search["band"][0])]
    out = {"days_per_synodic_month": None, "peaks": [], "searched_band_bands_per_cycle": searched,
           "note": ("peaks of 9-22 bands are read as the fortnightly (spring-neap) cycle, half a "
                    "synodic month; peaks of 22-45 bands as the synodic month; counts are minima")}
    if searched[0] >= searched[1]:
        out["note"] = "the searched band excludes the tidal periods (9-45 bands); no tidal test made"
        return out
    readings = []
    out["months_per_year_range"] = [round(MONTHS_PER_YEAR_RANGE[0], 2), round(MONTHS_PER_YEAR_RANGE[1], 2)]
    rejected = []
    for peak in search["peaks"]:
        P = peak["period_bands"]
        if not (searched[0] <= P <= searched[1]):
            continue
        if _harmonic_of(P, annual_period, search.get("n")):
            rejected.append({"period_bands": P, "reason": "harmonic of the annual cycle"})
            continue
        if annual_period is not None and P > 0.75 * annual_period:
            continue
        if annual_period is None:
            rejected.append({"period_bands": P, "reason": "no annual cycle, so its ratio to the year (synodic "
                             "months per year) cannot be checked; not read as tidal"})
            continue
        lt = peak.get("line_test")
        if lt is not None and (not lt["applicable"] or lt["p_value"] >= line_alpha(P and search["n"] / P)):
            rejected.append({"period_bands": P, "reason": "not a line (harmonic F-test)"})
            continue
        if annual_period is not None:
            kind0 = "fortnightly" if P < FORTNIGHT_MAX else "monthly"
            months = annual_period / (P * (2.0 if kind0 == "fortnightly" else 1.0))
            if not (MONTHS_PER_YEAR_RANGE[0] <= months <= MONTHS_PER_YEAR_RANGE[1]):
                rejected.append({"period_bands": P, "reason": f"read as {kind0}, it would give {months:.2f} "
                                 f"synodic months per year, outside the published range "
                                 f"{MONTHS_PER_YEAR_RANGE[0]:.1f}-{MONTHS_PER_YEAR_RANGE[1]:.1f}"})
                continue
        est = period_estimate(search, peak, n_boot, rng, with_cycles=False, progress=progress,
                              label="tidal")["spectrum"]
        kind = "fortnightly" if P < FORTNIGHT_MAX else "monthly"
        factor = 2.0 if kind == "fortnightly" else 1.0
        entry = {"period_bands": est["estimate"], "ci95": est["ci95"], "p_value": peak["p_value"],
                 "reading": kind, "days_per_synodic_month": factor * est["estimate"],
                 "days_per_synodic_month_ci95": [factor * est["ci95"][0], factor * est["ci95"][1]]}
        out["peaks"].append(entry)
        readings.append((factor * est["estimate"], factor * est["sd"], peak["p_value"], kind))
    out["rejected_peaks"] = rejected
    if not readings:
        return out
    # At most one reading of each kind: the most significant.
    best = {}
    for r in sorted(readings, key=lambda r: r[2]):
        best.setdefault(r[3], r)
    chosen = list(best.values())
    e = np.array([r[0] for r in chosen])
    C = np.diag([r[1] ** 2 for r in chosen])
    comb = combine(e, C)
    p = min(r[2] for r in chosen)
    kinds = " and ".join(sorted(best))
    block = {"estimate": comb["estimate"], "ci95": comb["ci95"], "significant": bool(p < 0.05),
             "p_value": float(p), "method": f"thickness spectrum, {kinds} peak(s); interval from AR(1) "
                                             "surrogates with the fitted sinusoid re-estimated",
             "is_minimum": True}
    if comb["p_value"] is not None:
        block["consistency"] = {"chi2": comb["chi2"], "dof": comb["dof"], "p_value": comb["p_value"]}
    out["days_per_synodic_month"] = block
    return out
