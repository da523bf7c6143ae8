"""Which significant peak is the annual cycle: a line, not a slope, and not a harmonic.

Every significant peak of a series (family-wise over the searched band) is read:

1. **line test** - Thomson's harmonic F-test at the peak (:func:`bandgeo.spectral.multitaper.line_test`,
   bandwidth below the frequency). A slow drift, a curved trend or a broad hump of red noise has
   power at the long-period end but is not a line, and fails. A peak whose line test is not applicable
   (fewer than about two cycles) cannot be the annual cycle either.
2. of the peaks that pass, the strongest (largest ratio to the background) is the **annual** candidate -
   not the longest, which is where a trend's remnant or a slow quasi-cycle sits - unless a longer line
   stands to it in the ratio of a year to a synodic month or a fortnight (12.0-15.45 months per year):
   then the longer line is the year and the strongest its tidal cycle. Other longer lines are reported
   as such, with a warning. Shorter peaks at 2-6 times its frequency
   (within one Fourier spacing, or 3%) are its **harmonics** - a season is rarely a sine - and are
   labelled so, never read as tidal. Peaks with fewer than three cycles in the record are never taken as
   the annual cycle (slow variation cannot be told from a cycle there).
3. **sub-harmonic check** - a strongly non-sinusoidal season (a short growth season) can put more power
   in a harmonic than in the fundamental. When a line at 1/2, 1/3 or 1/4 of the candidate's frequency,
   with at least two cycles in the record, passes the line test and stands above the pointwise 99% level of
   the background, the candidate is read as its harmonic and the longer line becomes the annual cycle.

References
----------
Thomson, D. J. (1982) Proc. IEEE 70:1055-1096.
Percival, D. B. & Walden, A. T. (1993) Spectral Analysis for Physical Applications, CUP, sec. 10.11.
"""
from __future__ import annotations

import numpy as np
from scipy import stats

from .multitaper import line_test

#: Synodic months per year accepted for a tidal reading: from today's 12.37 (29.53-day month in a
#: 365.24-day year; Meeus) to 14.5 +- 0.5 at about 2450 Ma (Williams 2000 Rev. Geophys. 38:37-59), the
#: oldest published value; 13.1 +- 0.1 at about 620 Ma lies inside. Widened by 3% for estimation error.
#: (Used by ``tidal`` too, which imports it from here.)
MONTHS_PER_YEAR_RANGE = (12.37 / 1.03, 15.0 * 1.03)

#: Pointwise level of the line test a peak must pass to be read as a cycle. Stricter than 5% because
#: near the long end of the band the continuum is steep (drift, red noise) and the F-test, which assumes
#: it flat across its bandwidth, rejects too often there; chosen on generator seeds other than the
#: calibration set (benchmarks/series_generator.py, seed 2), where true annual lines had p < 4e-4.
LINE_ALPHA = 0.001
#: Level far from the long end of the band: with at least LINE_FAR_CYCLES cycles the line test's
#: bandwidth (4/n) stays well clear of zero and of the removed slow variation, and the spectral test
#: (family-wise 5%) has already been passed, so the plain 5% level applies. A quasi-periodic cycle
#: (the solar cycle in monthly sunspot numbers, F-test p = 0.035) is then still read as a cycle.
LINE_ALPHA_FAR = 0.05
LINE_FAR_CYCLES = 10.0


def line_alpha(cycles: float) -> float:
    """Level of the line test for a peak with ``cycles`` cycles in the record."""
    return LINE_ALPHA_FAR if cycles >= LINE_FAR_CYCLES else LINE_ALPHA


#: Line-test level of the sub-harmonic check: one test at a frequency fixed in advance (f / k), not a
#: search, so a plain 1% level.
SUBHARMONIC_LINE_ALPHA = 0.01
#: Fewest cycles in the record for a peak to be read as the annual cycle (about three: the default
#: search ends at a third of the record, and a three-year record's own estimate may fall a little
#: short of 3.0), and for a sub-harmonic to be looked for (below MIN_CYCLES its interval is refused).
MIN_CYCLES = 2.75
SUBHARMONIC_MIN_CYCLES = 2.0
#: Largest harmonic number recognised.
MAX_HARMONIC = 6
#: Pointwise level (ratio of periodogram to background) a sub-harmonic must exceed.
SUBHARMONIC_RATIO = float(stats.chi2.ppf(0.99, 2) / 2.0)


def is_harmonic(f: float, f_annual: float, n: int) -> int:
    """Harmonic number ``k`` (2..6) when ``f`` is within ``max(1/n, 3%)`` of ``k f_annual``, else 0."""
    for k in range(2, MAX_HARMONIC + 1):
        if abs(f - k * f_annual) <= max(1.0 / n, 0.03 * k * f_annual):
            return k
    return 0


def select_annual(search: dict) -> tuple[dict | None, list[dict]]:
    """The annual peak of one searched series and the reading of every significant peak.

    Returns
    -------
    annual : dict or None
        The chosen peak (a dict of ``search['peaks']``, with ``line_test`` added).
    readings : list of dict
        One per significant peak: ``period_bands``, ``p_value``, ``line_test`` (p-value or None),
        ``reading`` ('annual', 'harmonic k of the annual cycle', 'not a line (slow variation or
        noise)', 'line test not applicable', 'other cycle').
    """
    x, n = search["x"], search["n"]
    readings = []
    eligible = []
    for p in search["peaks"]:          # longest period first
        lt = line_test(x, p["frequency"])
        p["line_test"] = lt
        r = {"period_bands": p["period_bands"], "p_value": p["p_value"], "ratio": p.get("ratio"),
             "line_test_p_value": lt["p_value"], "line_test_applicable": lt["applicable"]}
        if _on_outer_flank(search, p["frequency"]):
            r["reading"] = ("on the flank of a stronger peak outside the searched band (the cycle may be "
                            "longer than the band: give a longer record, or widen the band)")
        elif p["frequency"] * n < MIN_CYCLES:
            r["reading"] = (f"fewer than {MIN_CYCLES:g} cycles in the record: not read as the annual cycle "
                            f"(slow variation cannot be told from a cycle)")
        elif not lt["applicable"]:
            r["reading"] = "line test not applicable (too few cycles in the record)"
        elif lt["p_value"] >= line_alpha(p["frequency"] * n):
            r["reading"] = "not a line (slow variation or broad-band noise)"
        else:
            r["reading"] = "line"
            eligible.append(p)
        readings.append((p, r))
    annual = max(eligible, key=lambda p: p["ratio"]) if eligible else None
    if annual is not None:
        # A strong tidal line may outshine the year. A longer line standing to the strongest in the ratio
        # of a year to a synodic month (or to a fortnight) is the year, the strongest its tidal cycle.
        lo, hi = MONTHS_PER_YEAR_RANGE
        longer = [p for p in eligible if p["frequency"] < annual["frequency"]
                  and any(lo <= annual["frequency"] / p["frequency"] / k <= hi for k in (1, 2))]
        if longer:
            annual = max(longer, key=lambda p: p["ratio"])
    for p, r in readings:
        if annual is None or r["reading"] != "line" and p is not annual:
            if annual is not None:
                k = is_harmonic(p["frequency"], annual["frequency"], n)
                if k:
                    r["reading"] = f"harmonic {k} of the annual cycle"
                p["harmonic_of_annual"] = k
            continue
        if p is annual:
            r["reading"] = "annual"
            continue
        k = is_harmonic(p["frequency"], annual["frequency"], n)
        p["harmonic_of_annual"] = k
        if k:
            r["reading"] = f"harmonic {k} of the annual cycle"
        elif p["frequency"] < annual["frequency"]:
            r["reading"] = "a longer line, weaker than the annual cycle (another cycle, or a trend's remnant)"
        else:
            r["reading"] = "other cycle"
    readings = [r for _, r in readings]
    if annual is not None:
        sub = _subharmonic(search, annual)
        if sub is not None:
            for r in readings:
                if r["reading"] == "annual":
                    r["reading"] = f"harmonic {sub['harmonic']} of a longer line (sub-harmonic check)"
            readings.append({"period_bands": sub["period_bands"], "p_value": None,
                             "line_test_p_value": sub["line_test"]["p_value"], "line_test_applicable": True,
                             "reading": "annual (sub-harmonic of the strongest line)"})
            annual = sub
            for p in search["peaks"]:
                k = is_harmonic(p["frequency"], annual["frequency"], n)
                p["harmonic_of_annual"] = k
    return annual, readings


def _on_outer_flank(search: dict, f: float) -> bool:
    """True when the periodogram within one Fourier spacing of ``f`` peaks outside the searched band:
    the peak found is the flank of a cycle the band does not hold (a record of fewer than three cycles,
    or a band set too narrow), and its frequency would be pulled towards the band's edge."""
    fr, P, n = search["frequency"], search["power"], search["n"]
    near = np.abs(fr - f) <= 1.0 / n
    if not np.any(near):
        return False
    g = fr[near][np.argmax(P[near])]
    lo, hi = search["band"]
    return bool(g < lo or g > hi)


def _subharmonic(search: dict, peak: dict) -> dict | None:
    """A line at ``f / k`` (k = 4, 3, 2, longest first) inside the band, above the pointwise 99% level
    and passing the line test, or None."""
    from .lomb_scargle import refine_ls

    x, n = search["x"], search["n"]
    fr, P, S = search["frequency"], search["power"], search["background"]
    for k in (4, 3, 2):
        f0 = peak["frequency"] / k
        if f0 * n < SUBHARMONIC_MIN_CYCLES:
            continue
        near = np.abs(fr - f0) <= 0.5 / n
        if not np.any(near):
            continue
        i = np.flatnonzero(near)[np.argmax(P[near])]
        if P[i] / S[i] < SUBHARMONIC_RATIO:
            continue
        f1 = float(refine_ls(x[None, :], np.array([fr[i]]), n_iter=4)[0])
        if abs(f1 - f0) > 0.2 / n or not (P[i] >= P[max(i - 1, 0)] and P[i] >= P[min(i + 1, P.size - 1)]):
            continue
        lt = line_test(x, f1)
        if lt["applicable"] and lt["p_value"] < SUBHARMONIC_LINE_ALPHA:
            return {"frequency": f1, "period_bands": 1.0 / f1, "grid_index": int(i),
                    "ratio": float(P[i] / S[i]), "p_value": peak["p_value"], "amplitude": None,
                    "window": (f1 - min(3.0 / n, 0.4 * f1), f1 + min(3.0 / n, 0.4 * f1)),
                    "line_test": lt, "harmonic": k, "from_subharmonic_check": True}
    return None
