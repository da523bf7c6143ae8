"""Explicit repair rules for traced rings, and the confidence of each boundary.

Rules, applied in this order (each leaves a flag on the boundaries it touches):

R1 ``merged doubled ring``: two rings closer on the axis than ``DOUBLE_FRACTION`` of the local median
   spacing are one groove seen twice (e.g. both flanks of a wide groove, or a ring broken into two
   offset arcs): the one with the higher score is kept, with the union's coverage. Unless the wall
   rises between them by ``CONFIRM_CREST_Z`` standard errors or more, seen from either ring's plane
   (two grooves of a thin lamina; see R7), when a crest measure is given.
R2 ``dropped: poor fit``: a ring whose plane-fit rms exceeds ``MAX_RMS_FRACTION`` of the local spacing
   is not a ring (a noise streak or a bridge between two grooves).
R3 ``dropped: short arc``: a ring covering less than ``MIN_COVERAGE`` (half) of the circumference is
   too short to be a boundary: a real groove is traced wherever the wall exists, and holes or broken
   stretches take far less than half of it, while noise streaks rarely reach half way round.
   Where the wall itself is partial (a cut at a slant to the laminae: the wall reaches the ring's
   plane on under ``PARTIAL_WALL`` of the circumference), a ring tracing at least ``PARTIAL_TRACED`` of
   the wall that is there, and ``PARTIAL_MIN`` of the circumference, is kept (flagged ``partial ring``).
R4 ``gap filled``: where two neighbouring rings are more than ``GAP_FRACTION`` times the local median
   spacing apart, the strongest weak peak inside the gap is traced; it is added (with lowered
   confidence) if it passes R2 and R3, otherwise the gap is flagged as a possibly missed boundary.
R7 ``confirmed in its own frame``: a weak peak of the flattened profile (too faint there to be a ring by
   itself) is added when its own plane shows the groove: own-frame groove z-score at least
   ``CONFIRM_GROOVE_Z`` (the R5 statistic), profile z-score at least ``CONFIRM_PROFILE_Z``, R2 and R3
   passed, at least ``CONFIRM_MIN_SPLIT`` of the local spacing from the rings on either side, and a
   crest of the wall at least ``CONFIRM_CREST_Z`` standard errors high between it and each of them (one
   groove traced from both flanks has none; :func:`bandgeo.segment.trace.crest_z`); not within
   ``CONFIRM_END_LAMINAE`` spacings of the wall's ends (as R6: the relief sees the cut's rim there). A thin
   lamina next to a normal one leaves two rings under ``GAP_FRACTION`` spacings apart, so R4 never looks
   there, and the flattened profile, averaged around the column, blurs the thin lamina's grooves into
   one; each groove's own plane does not (independent generator, laminae of 0.4 x the mean).

Confidence (0..1) = coverage^(1/2) * min(1, prominence / reference prominence)
* exp(-(rms / (0.25 * local spacing))^2) * class_support^(1/2), times 0.7 for a gap-filled ring.
``class_support`` is the groove-class probability of the ring's groove vertices relative to the wall's
mean (capped at 1): a ring where the curvature clustering saw no groove is kept but trusted less.
"""
from __future__ import annotations

import numpy as np

DOUBLE_FRACTION = 0.4
MAX_RMS_FRACTION = 0.35
MIN_COVERAGE = 0.5
#: R3 near a slanted cut: the wall reaches the plane on less than this fraction of the circumference...
PARTIAL_WALL = 0.9
#: ... and the ring is traced on at least this fraction of the wall that is there ...
PARTIAL_TRACED = 0.8
#: ... and on at least this fraction of the whole circumference.
PARTIAL_MIN = 0.35
#: 1.5 rather than 1.75: a missed thin lamina of an annual cycle leaves a gap of 1.6-1.9 local spacings
#: (thin laminae next to thicker ones); the weak ring added must still fit a plane and cover the wall.
GAP_FRACTION = 1.5
#: R7: least own-frame groove z-score, profile z-score and distance to the rings either side (in local
#: spacings) of a weak peak added without a gap. Set on the independent generator's cells (12 columns,
#: 57 unused weak peaks with rings either side: 41 on a missed true boundary, 16 not): 27 of the 41 pass,
#: and 3 of the 16.
CONFIRM_GROOVE_Z = 5.0
CONFIRM_PROFILE_Z = 3.5
CONFIRM_MIN_SPLIT = 0.25
CONFIRM_CREST_Z = 3.0
SPLIT_BY_CREST = True
CONFIRM_END_LAMINAE = 2.0


def local_spacing(heights: np.ndarray, fallback: float, window: int = 5) -> np.ndarray:
    """Median of the ``window`` + 1 intervals nearest each height (fallback if fewer than 3 heights)."""
    h = np.sort(np.asarray(heights, float))
    if len(h) < 3:
        return np.full(len(h), fallback)
    d = np.diff(h)
    half = window // 2 + 1
    # intervals lo..hi-1 around height i, with lo = max(0, i - half), hi = min(len(d), i + half),
    # as in a sliding window clipped at the ends: pad with NaN and take nan-medians
    pad = np.concatenate([np.full(half, np.nan), d, np.full(half, np.nan)])
    win = np.lib.stride_tricks.sliding_window_view(pad, 2 * half)[: len(h)]
    return np.nanmedian(win, axis=1)


def confidence(ring: dict, ref_prominence: float, spacing: float) -> float:
    cov = float(np.clip(ring["coverage"], 0.0, 1.0)) ** 0.5
    prom = min(1.0, ring.get("prominence", 0.0) / max(ref_prominence, 1e-12))
    fit = float(np.exp(-(ring["rms_mm"] / (0.25 * spacing)) ** 2)) if np.isfinite(ring["rms_mm"]) else 0.5
    support = float(np.clip(ring.get("class_support", 1.0), 0.0, 1.0)) ** 0.5
    c = cov * prom * fit * support * (0.7 if "gap filled" in ring["flags"] else 1.0)
    return float(np.clip(c, 0.0, 1.0))


def repair(rings: list, spacing: float, trace_weak, log: list, ends=None, weak=None, crest=None) -> list:
    """Apply rules R1-R4 to ring dicts (``height``, ``prominence``, ``rms_mm``, ``coverage``, ``flags``).

    Parameters
    ----------
    rings : list of dict
    spacing : float
        Expected band spacing, mm (fallback for the local spacing).
    trace_weak : callable
        ``trace_weak(lo_mm, hi_mm) -> ring dict or None``: the strongest weak peak inside a gap.
    log : list
        Receives one line per rule application.
    ends : (float, float), optional
        The wall's lowest and highest height (mm): the stretches between them and the first and last
        rings are gaps too (R4), less ``DOUBLE_FRACTION`` of a lamina at the end (the cut's rim).
    weak : list of dict, optional
        The weak peaks (with ``z`` and ``groove_z``) for R7.
    crest : callable, optional
        ``crest(ring_a, ring_b) -> z`` for R7 (see :func:`bandgeo.segment.trace.crest_z`); without it R7
        is not applied.

    Returns
    -------
    rings : list of dict, sorted by height, each with ``confidence``
    gaps : list of [s0_mm, s1_mm, reason] for gaps R4 could not fill
    """
    rings = sorted(rings, key=lambda r: r["height"])
    for r in rings:
        r.setdefault("flags", [])
    # R2 and R3 first on single rings
    kept = []
    loc = local_spacing(np.array([r["height"] for r in rings]), spacing)
    for r, ls in zip(rings, loc):
        if r["rms_mm"] > MAX_RMS_FRACTION * ls:
            log.append(f"R2 dropped ring at {r['height']:.3f} mm: plane-fit rms {r['rms_mm']:.3f} mm "
                       f"> {MAX_RMS_FRACTION} x local spacing {ls:.3f} mm")
            continue
        if r["coverage"] < MIN_COVERAGE and _partial(r):
            r["flags"].append("partial ring")
            log.append(f"R3 kept a partial ring at {r['height']:.3f} mm: covers {100 * r['coverage']:.0f}% of the "
                       f"circumference, where the wall reaches its plane on {100 * r['available']:.0f}%")
        elif r["coverage"] < MIN_COVERAGE:
            log.append(f"R3 dropped ring at {r['height']:.3f} mm: covers {100 * r['coverage']:.0f}% "
                       f"of the circumference (< {100 * MIN_COVERAGE:.0f}%)")
            continue
        kept.append(r)
    rings = kept
    # R1: doubled rings (not two grooves with a crest of the wall between them)
    apart = {}

    def two_grooves(a, b):
        key = (id(a), id(b))
        if key not in apart:
            apart[key] = bool(crest is not None and SPLIT_BY_CREST
                              and min(crest(a, b), crest(b, a)) >= CONFIRM_CREST_Z)
        return apart[key]

    changed = True
    while changed and len(rings) > 1:
        changed = False
        h = np.array([r["height"] for r in rings])
        loc = local_spacing(h, spacing)
        gaps = np.diff(h)
        ref = np.minimum(loc[:-1], loc[1:])
        close = np.flatnonzero(gaps < DOUBLE_FRACTION * ref)
        for i in close[np.argsort(gaps[close] / ref[close], kind="stable")]:
            a, b = rings[i], rings[i + 1]
            if two_grooves(a, b):
                continue
            keep, drop = (a, b) if _score(a) >= _score(b) else (b, a)
            keep["coverage"] = min(1.0, max(a["coverage"], b["coverage"]) + 0.5 * min(a["coverage"], b["coverage"]))
            keep["flags"].append("merged doubled ring")
            log.append(f"R1 merged rings at {a['height']:.3f} and {b['height']:.3f} mm "
                       f"({gaps[i]:.3f} mm apart < {DOUBLE_FRACTION} x local spacing {ref[i]:.3f} mm)")
            rings = [r for r in rings if r is not drop]
            changed = True
            break
    # R4: gaps
    gaps_flagged = []
    if len(rings) >= 3:
        i = 0
        h = np.array([r["height"] for r in rings])
        loc = local_spacing(h, spacing, window=7)  # recomputed only after a ring is added
        while i < len(rings) - 1:
            gap = h[i + 1] - h[i]
            ref = 0.5 * (loc[i] + loc[i + 1])
            if gap > GAP_FRACTION * ref:
                new = _gap_ring(trace_weak, h[i], h[i + 1], ref)
                if new is not None:
                    log.append(f"R4 filled a {gap:.3f} mm gap with a weak ring at {new['height']:.3f} mm")
                    rings.insert(i + 1, new)
                    h = np.array([r["height"] for r in rings])
                    loc = local_spacing(h, spacing, window=7)
                    continue  # re-check the two halves
                log.append(f"R4 gap of {gap:.3f} mm between {h[i]:.3f} and {h[i + 1]:.3f} mm "
                           f"(> {GAP_FRACTION} x local spacing {ref:.3f} mm): possible missed boundary")
                gaps_flagged.append([float(h[i]), float(h[i + 1]), "possible missed boundary"])
            i += 1
    if ends is not None and len(rings) >= 3:
        h = np.array([r["height"] for r in rings])
        loc = local_spacing(h, spacing, window=7)
        for where in ("base", "top"):
            i = 0 if where == "base" else len(rings) - 1
            ref = float(loc[i])
            lo, hi = (ends[0], h[0]) if where == "base" else (h[-1], ends[1])
            new = _gap_ring(trace_weak, lo, hi, ref) if hi - lo > GAP_FRACTION * ref else None
            if new is not None:
                log.append(f"R4 filled the {hi - lo:.3f} mm at the {where} with a weak ring at {new['height']:.3f} mm")
                rings.insert(0 if where == "base" else len(rings), new)
                h = np.array([r["height"] for r in rings])
                loc = local_spacing(h, spacing, window=7)
    if weak and crest is not None and len(rings) >= 3:
        rings = _confirm_weak(rings, weak, spacing, log, crest, ends)
        gaps_flagged = [g for g in gaps_flagged
                        if not any(g[0] < r["height"] < g[1] for r in rings)]
    if rings:
        ref_prom = float(np.median([r["prominence"] for r in rings if "gap filled" not in r["flags"]] or [1.0]))
        loc = local_spacing(np.array([r["height"] for r in rings]), spacing)
        for r, ls in zip(rings, loc):
            r["confidence"] = confidence(r, ref_prom, ls)
    return rings, gaps_flagged


def _confirm_weak(rings: list, weak: list, spacing: float, log: list, crest, ends=None) -> list:
    """R7 (see the module docstring): weak peaks whose own plane shows the groove, strongest first; none
    within ``CONFIRM_END_LAMINAE`` spacings of the wall's ends (where the relief sees the cut's rim)."""
    used = {id(r) for r in rings}
    lo_end, hi_end = (-np.inf, np.inf) if ends is None else (ends[0] + CONFIRM_END_LAMINAE * spacing,
                                                              ends[1] - CONFIRM_END_LAMINAE * spacing)
    pool = [w for w in weak if id(w) not in used and w.get("z", 0.0) >= CONFIRM_PROFILE_Z
            and w.get("groove_z", 0.0) >= CONFIRM_GROOVE_Z and w["rms_mm"] <= MAX_RMS_FRACTION * spacing
            and (w["coverage"] >= MIN_COVERAGE or _partial(w)) and lo_end < w["height"] < hi_end]
    for w in sorted(pool, key=lambda r: -r["groove_z"]):
        h = np.array([r["height"] for r in rings])
        i = int(np.searchsorted(h, w["height"]))
        if i == 0 or i == len(h):
            continue  # beyond the end rings: R4's end gaps look there
        loc = local_spacing(h, spacing, window=7)
        ref = 0.5 * (loc[i - 1] + loc[i])
        split = min(w["height"] - h[i - 1], h[i] - w["height"]) / ref
        if split < CONFIRM_MIN_SPLIT or w["rms_mm"] > MAX_RMS_FRACTION * ref:
            continue
        cz = min(crest(w, rings[i - 1]), crest(w, rings[i]))
        if not cz >= CONFIRM_CREST_Z:  # NaN: too few vertices to judge
            continue
        w.setdefault("flags", []).append("confirmed in its own frame")
        log.append(f"R7 added a weak ring at {w['height']:.3f} mm between {h[i - 1]:.3f} and {h[i]:.3f} mm: "
                   f"groove z-score {w['groove_z']:.1f} in its own frame, profile z-score {w['z']:.1f}, "
                   f"crest z-score {cz:.1f}")
        rings.insert(i, w)
    return rings


def _gap_ring(trace_weak, lo: float, hi: float, ref: float):
    """The strongest weak ring between ``lo`` and ``hi`` (less ``DOUBLE_FRACTION`` of the local spacing
    ``ref`` at each side) if it passes R2 and R3, flagged ``gap filled``; else None."""
    a, b = lo + DOUBLE_FRACTION * ref, hi - DOUBLE_FRACTION * ref
    new = trace_weak(a, b) if b > a else None
    if new is None or new["rms_mm"] > MAX_RMS_FRACTION * ref or new["coverage"] < MIN_COVERAGE:
        return None
    new.setdefault("flags", []).append("gap filled")
    return new


def _partial(r: dict) -> bool:
    avail = float(r.get("available", 1.0))
    return (avail < PARTIAL_WALL and r["coverage"] >= PARTIAL_MIN
            and r["coverage"] >= PARTIAL_TRACED * avail)


def _score(r: dict) -> float:
    return float(r["coverage"] * r.get("prominence", 0.0))
