"""Tracing the groove class into rings: a groove profile along the axis, its peaks, and plane fits.

Each boundary's groove is a ring around the column, perpendicular to the local growth axis. Along the
arc length ``s`` of the centreline, the groove-class probability of the side-wall vertices therefore
peaks once per boundary. Each peak seeds a ring; the ring is the set of groove vertices near it, fitted
by a weighted plane (normal = least-variance direction, common practice) and an in-plane circle whose
centre is the ring centre.
"""
from __future__ import annotations

import numpy as np
from scipy.ndimage import gaussian_filter1d
from scipy.signal import find_peaks

from .axis import circle_centres

#: Angular bins used to measure how much of the circumference a ring covers.
COVERAGE_BINS = 72

#: Largest angle (deg) between a fitted ring normal and the local axis before the axis is used instead.
MAX_NORMAL_ANGLE_DEG = 8.0


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


def relief_profile(s: np.ndarray, radius: np.ndarray, p_groove: np.ndarray, bin_mm: float, sigma_mm: float,
                   detrend_mm: float):
    """Groove evidence along the axis: the ring-averaged relief deficit, and the groove-class share.

    Around each ring the radius of the side wall is averaged (noise falls with the square root of the
    vertices in a ring, and an off-centre axis cancels to first order); the column's slow changes of
    radius are removed with a Gaussian of ``detrend_mm``. Grooves are the minima of this relief. Its
    peaks locate the rings (the per-vertex groove class is blurred where bands are only two or three
    samples thick); the ring-averaged groove-class probability (second output) confirms each one.

    Returns
    -------
    centres_mm, evidence (0..1 scaled by its 1-99 % range), counts, groove_share : (q,) float
    """
    c, r_mean, cnt = groove_profile(s, radius, bin_mm, sigma_mm)
    _, p_mean, _ = groove_profile(s, p_groove, bin_mm, sigma_mm)
    trend = gaussian_filter1d(r_mean, max(detrend_mm / bin_mm, 1.0), mode="nearest")
    deficit = trend - r_mean
    pm = p_mean / max(float(np.mean(p_mean[cnt > 0])) if np.any(cnt > 0) else 1.0, 1e-12)
    ev = deficit
    lo, hi = np.percentile(ev[cnt > 0], [1, 99]) if np.any(cnt > 0) else (0.0, 1.0)
    ev = (ev - lo) / max(hi - lo, 1e-12)
    return c, ev, cnt, pm


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


def profile_peaks(centres: np.ndarray, profile: np.ndarray, counts: np.ndarray, spacing_mm: float,
                  min_prominence: float = 0.08, relative: float = 0.3):
    """Peaks of the groove profile at least ``0.35 * spacing`` apart.

    A peak counts when its prominence is at least ``min_prominence`` and at least ``relative`` times the
    median prominence of the counted peaks (so faint noise wiggles never pass on a strong record).

    Returns
    -------
    heights_mm : (r,) float
    prominence : (r,) float
    weak : dict
        All smaller local maxima (heights, prominences), for the gap-filling repair rule.
    """
    b = centres[1] - centres[0] if len(centres) > 1 else 1.0
    populated = counts > 0.25 * np.median(counts[counts > 0]) if np.any(counts > 0) else counts > 0
    prof = np.where(populated, profile, 0.0)
    idx, props = find_peaks(prof, distance=max(1, int(0.35 * spacing_mm / b)), prominence=0.0)
    prom = props["prominences"]
    strong = prom >= min_prominence
    if strong.any():
        ref = float(np.median(prom[strong]))
        strong &= prom >= relative * ref
    # sub-bin peak position by a parabola through the three highest bins
    h = centres[idx].astype(float)
    ok = (idx > 0) & (idx < len(prof) - 1)
    y0, y1, y2 = prof[idx[ok] - 1], prof[idx[ok]], prof[idx[ok] + 1]
    den = y0 - 2 * y1 + y2
    shift = np.where(np.abs(den) > 1e-12, 0.5 * (y0 - y2) / np.where(np.abs(den) > 1e-12, den, 1.0), 0.0)
    h[ok] += np.clip(shift, -0.5, 0.5) * b
    weak = {"heights_mm": h[~strong], "prominence": prom[~strong]}
    return h[strong], prom[strong], weak


class SortedWall:
    """Side-wall vertices sorted by arc length, so that each ring reads a contiguous window."""

    def __init__(self, v, s, angle, radius, p_groove):
        order = np.argsort(s, kind="stable")
        self.v, self.s, self.angle = v[order], s[order], angle[order]
        self.r, self.p = radius[order], p_groove[order]

    def window(self, lo, hi) -> slice:
        return slice(int(np.searchsorted(self.s, lo)), int(np.searchsorted(self.s, hi, side="right")))


def _groove_weights(u, r, ang, halfwin, bins):
    """Per-vertex groove weight and traced coverage in a window of along-axis offsets ``u``.

    In each angular bin the mean radius over the window is the local wall; a vertex's deficit below it,
    tapered by a Gaussian in ``u`` (sigma half the window), is its weight. A bin is traced when the
    vertices near the ring (|u| < 0.4 window) lie below the local wall on average.
    """
    b = np.minimum(((ang + np.pi) / (2 * np.pi) * bins).astype(np.int64), bins - 1)
    n_b = np.bincount(b, minlength=bins)
    wall_r = np.bincount(b, r, minlength=bins) / np.maximum(n_b, 1)
    deficit = wall_r[b] - r
    near = np.abs(u) < 0.4 * halfwin
    dn = np.bincount(b[near], deficit[near], minlength=bins)
    nn = np.bincount(b[near], minlength=bins)
    traced = (nn > 0) & (dn > 0)
    w = np.maximum(deficit, 0.0) * np.exp(-0.5 * (u / (0.5 * halfwin)) ** 2)
    return w, float(traced.mean())


def fit_ring(wall: SortedWall, axis, h0, halfwin_mm, radius_mm, bins=COVERAGE_BINS):
    """Fit one ring near arc length ``h0``.

    Parameters
    ----------
    wall : SortedWall
        Side-wall vertices (mm) with their arc lengths, angles around the axis (rad), distances from
        the axis (mm) and groove-class probabilities.
    axis : Centreline
    h0 : float
        Seed height, mm.
    halfwin_mm : float
        Half-width of the window around the seed (half the local spacing).
    radius_mm : float
        Column radius: a ring tilted by up to MAX_NORMAL_ANGLE_DEG spans this times its tangent in s.
    bins : int
        Angular bins for the coverage (at most the number of vertices around a ring).

    Returns
    -------
    dict with ``center``, ``normal``, ``rms_mm``, ``coverage``, ``groove_share``, ``n``,
    ``normal_from``; None when the window holds no groove.
    """
    sl = wall.window(h0 - halfwin_mm, h0 + halfwin_mm)
    if sl.stop - sl.start < 3:
        return None
    _, t_axis = axis.at(h0)
    normal, center, normal_from = t_axis, None, "axis"
    for it in range(2):
        v, ang, r, pg = wall.v[sl], wall.angle[sl], wall.r[sl], wall.p[sl]
        u = wall.s[sl] - h0 if it == 0 else (v - center) @ normal
        keep = np.abs(u) < halfwin_mm
        v, ang, r, pg, u = v[keep], ang[keep], r[keep], pg[keep], u[keep]
        if len(v) < 3:
            return None
        w, cover = _groove_weights(u, r, ang, halfwin_mm, bins)
        if w.sum() <= 0:
            return None
        c = (w[:, None] * v).sum(axis=0) / w.sum()
        if it == 0:
            if cover >= 0.5 and len(v) >= 12:
                d = v - c
                cov = (d * w[:, None]).T @ d / w.sum()
                _, vec = np.linalg.eigh(cov)
                nrm = vec[:, 0] * np.sign(np.dot(vec[:, 0], t_axis) or 1.0)
                if np.degrees(np.arccos(np.clip(np.dot(nrm, t_axis), -1, 1))) <= MAX_NORMAL_ANGLE_DEG:
                    normal, normal_from = nrm, "plane fit"
                else:
                    normal, normal_from = t_axis, "axis (plane fit too oblique)"
            else:
                normal, normal_from = t_axis, "axis (ring too short for a plane fit)"
            center = c
            # re-select by distance to the fitted plane: follows rings tilted against the axis
            cos_t = max(float(np.dot(normal, t_axis)), 1e-6)
            reach = halfwin_mm + radius_mm * np.sqrt(max(1.0 - cos_t ** 2, 0.0)) / cos_t
            sl = wall.window(h0 - reach, h0 + reach)
        else:
            # the plane stays as fitted; its offset moves to the weighted groove centre
            center = c
    d = (v - center) @ normal
    rms = float(np.sqrt(np.sum(w * d * d) / w.sum()))
    # ring centre: circle fit in the plane (robust to holes), moved into the plane
    e1 = np.cross(normal, [1.0, 0.0, 0.0] if abs(normal[0]) < 0.9 else [0.0, 1.0, 0.0])
    e1 /= np.linalg.norm(e1)
    e2 = np.cross(normal, e1)
    rel = v - center
    strong = w > np.median(w)
    if strong.sum() >= 12:
        cx, cy, _ = circle_centres(np.zeros(int(strong.sum()), dtype=np.int64), rel[strong] @ e1,
                                   rel[strong] @ e2, 1)
        if np.isfinite(cx[0]):
            center = center + cx[0] * e1 + cy[0] * e2
    share = float(np.sum(w * pg) / w.sum())
    return {"center": center, "normal": normal, "rms_mm": rms, "coverage": cover, "groove_share": share,
            "n": int(len(v)), "normal_from": normal_from}


def _coverage(angle: np.ndarray, p: np.ndarray, bins: int = COVERAGE_BINS) -> float:
    """Fraction of ``bins`` angular bins holding at least one vertex with p > 0.5."""
    if len(angle) == 0:
        return 0.0
    b = np.minimum(((angle + np.pi) / (2 * np.pi) * bins).astype(np.int64), bins - 1)
    hit = np.bincount(b[p > 0.5], minlength=bins) > 0
    return float(hit.mean())
