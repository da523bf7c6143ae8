"""Each boundary traced as its own curve on the wall and fitted by its own plane.

1. Grooves of the flattened wall (:mod:`bandgeo.segment.tilt`): the mean relief in fine bins of the
   flattened height ``s'`` is a groove profile averaged over the whole circumference; its minima seed
   the boundaries (strong ones) and the gap-filling candidates (weak ones).
2. Every candidate is traced and fitted at once (vectorised over all candidates): the wall vertices
   near a candidate's groove are weighted by their groove depth, their weighted centroids in azimuth
   columns are the groove points of that boundary, and a plane is fitted through them by least squares
   with one robust pass (columns farther than 3.5 robust sigma from the plane are dropped; the normal
   is the least-variance direction, common practice). A second round re-selects the groove vertices by
   their distance to the fitted plane, so the fit ends in the boundary's own frame, not the
   flattening's.
3. The in-plane circle through the groove points (Kasa 1976) gives the boundary's centre.
"""
from __future__ import annotations

import numpy as np
from scipy.ndimage import gaussian_filter1d
from scipy.signal import find_peaks

from .axis import circle_centres

#: Azimuth columns of the groove points of each boundary (coverage is counted in them).
FIT_COLUMNS = 48
#: Reach (in laminae, either side of the fitted planes) of the specimen's mean groove profile, whose
#: deepest point the planes are moved to.
DEEPEST_REACH = 0.3


def groove_profile(s_flat, relief, spacing_mm):
    """Mean relief in bins of a twelfth of a lamina along ``s'``, lightly smoothed.

    Returns
    -------
    centres_mm, deficit (= -mean relief, mm), counts : (q,) float
    """
    b = spacing_mm / 12.0
    s0 = float(s_flat.min())
    nb = int(np.ceil((s_flat.max() - s0) / b)) + 1
    ib = np.minimum(((s_flat - s0) / b).astype(np.int64), nb - 1)
    sums = np.bincount(ib, relief, minlength=nb)
    cnt = np.bincount(ib, minlength=nb).astype(float)
    sig = 0.06 * spacing_mm / b
    ss = gaussian_filter1d(sums, sig, mode="constant")
    cc = gaussian_filter1d(cnt, sig, mode="constant")
    prof = np.where(cc > 1e-9, ss / np.maximum(cc, 1e-9), 0.0)
    return s0 + (np.arange(nb) + 0.5) * b, -prof, cc


def candidates(centres, deficit, counts, spacing_mm, noise_mm):
    """Minima of the relief profile: heights, prominences (mm) and their noise level (mm).

    Returns
    -------
    heights_mm, prominence_mm, se_mm : (c,) float
        ``se_mm`` is the standard error of the profile at each candidate (noise / sqrt(vertices in a
        groove width)).
    """
    b = centres[1] - centres[0] if len(centres) > 1 else 1.0
    populated = counts > 0.2 * np.median(counts[counts > 0]) if np.any(counts > 0) else counts > 0
    prof = np.where(populated, deficit, np.min(deficit))
    idx, props = find_peaks(prof, distance=max(1, int(0.25 * spacing_mm / b)), prominence=0.0)
    prom = props["prominences"]
    h = centres[idx].astype(float)
    ok = (idx > 0) & (idx < len(prof) - 1)
    y0, y1, y2 = prof[idx[ok] - 1], prof[idx[ok]], prof[idx[ok] + 1]
    den = y0 - 2 * y1 + y2
    shift = np.where(np.abs(den) > 1e-15, 0.5 * (y0 - y2) / np.where(np.abs(den) > 1e-15, den, 1.0), 0.0)
    h[ok] += np.clip(shift, -0.5, 0.5) * b
    # vertices within a groove width (0.3 lamina) of the candidate
    width_bins = max(1, int(0.3 * spacing_mm / b))
    csum = np.r_[0.0, np.cumsum(counts)]
    lo = np.clip(idx - width_bins // 2, 0, len(counts))
    hi = np.clip(idx + width_bins // 2 + 1, 0, len(counts))
    n_near = np.maximum(csum[hi] - csum[lo], 1.0)
    se = noise_mm / np.sqrt(n_near)
    return h, prom, se


def _plane_fit(P, W, groups, n_groups, axis_t):
    """Weighted least-squares planes through points ``P`` grouped by ``groups``; vectorised.

    Returns centre (g,3), unit normal (g,3) oriented along ``axis_t`` (g,3), weight sum (g,).
    """
    ws = np.bincount(groups, W, minlength=n_groups)
    c = np.stack([np.bincount(groups, W * P[:, i], minlength=n_groups) for i in range(3)], 1)
    c /= np.maximum(ws, 1e-300)[:, None]
    d = P - c[groups]
    cov = np.empty((n_groups, 3, 3))
    for i in range(3):
        for j in range(i, 3):
            cov[:, i, j] = cov[:, j, i] = np.bincount(groups, W * d[:, i] * d[:, j], minlength=n_groups)
    cov /= np.maximum(ws, 1e-300)[:, None, None]
    cov += 1e-18 * np.eye(3)[None]
    _, vec = np.linalg.eigh(cov)
    n = vec[:, :, 0]
    sgn = np.sign(np.einsum("ij,ij->i", n, axis_t))
    n *= np.where(sgn == 0, 1.0, sgn)[:, None]
    return c, n, ws


def fit_boundaries(wall, s_flat, heights, spacing_local, axis, rounds=3, score=None, fixed_normal=None, only=None,
                   deepest_fraction=None, laminae=None):
    """Trace and fit every candidate boundary at once.

    Parameters
    ----------
    wall : bandgeo.segment.unroll.Wall
    s_flat : (m,) float
        Flattened heights of the wall vertices.
    heights : (c,) float
        Candidate groove heights on ``s'`` (increasing).
    spacing_local : (c,) float
        Local lamina thickness at each candidate, mm.
    axis : Centreline
        Coarse centreline (for the up direction of the normals).

    fixed_normal : (c, 3) float, optional
        Normals to keep (rows of NaN are fitted): only the plane's offset is fitted for the others.
    only : (c,) bool, optional
        Fit these candidates only (the vertices nearest the others are left out; their rows are junk).
    deepest_fraction : (float, str), optional
        The mean groove's deepest point from the fitted planes, in laminae, and which lamina it is
        counted in (``"local"``, ``"above"``, ``"below"``) (default: measured here).
    laminae : ((c,) float, (c,) float), optional
        The laminae below and above each candidate (mm, e.g. to the nearest strong candidates). When
        given, the deepest point is counted in the lamina on the groove's slow side (see
        :func:`_deepest_fraction`).

    Returns
    -------
    dict of arrays, one row per candidate: ``center (c,3)``, ``normal (c,3)``, ``rms_mm``, ``coverage``,
    ``n_points`` (columns used), ``weight``, ``score`` (weighted mean of ``score`` over each groove),
    and ``samples``: (candidate, distance to its plane, relief) of the vertices near each boundary, for
    the resolution check in each boundary's own frame.
    """
    c = len(heights)
    # columns: at most n_col, and about six vertices of a lamina's ring in each (anisotropic
    # meshes have few vertices around)
    per_lamina = len(s_flat) * float(np.median(spacing_local)) / max(wall.length_mm, 1e-9) if c else 0.0
    n_col = int(np.clip(per_lamina / 6.0, 8, FIT_COLUMNS))
    out = {"center": np.full((c, 3), np.nan), "normal": np.full((c, 3), np.nan), "rms_mm": np.full(c, np.nan),
           "coverage": np.zeros(c), "n_points": np.zeros(c, int), "weight": np.zeros(c), "available": np.zeros(c)}
    if c == 0:
        out.update(samples=(np.zeros(0, np.int64), np.zeros(0), np.zeros(0)), deepest_fraction=(0.0, "local"))
        return out
    # nearest candidate of each vertex on s', and the half-window of that candidate
    mids = 0.5 * (heights[1:] + heights[:-1])
    k = np.searchsorted(mids, s_flat)
    gap_lo = np.r_[spacing_local[0], np.diff(heights)]
    gap_hi = np.r_[np.diff(heights), spacing_local[-1]]
    du = s_flat - heights[k]
    half = np.where(du < 0, gap_lo[k], gap_hi[k]) * 0.5
    sel = np.abs(du) < half
    if only is not None:
        sel &= np.asarray(only, bool)[k]
    fx = None if fixed_normal is None else np.isfinite(np.asarray(fixed_normal, float)[:, 0])
    kk, du, v, rel, half = k[sel], du[sel], wall.v[sel], wall.relief[sel], half[sel]
    th = wall.theta[sel]
    col = np.minimum(((th + np.pi) / (2 * np.pi) * n_col).astype(np.int64), n_col - 1)
    _, t_up = axis.at(heights)  # s' differs from s by the tilt lag only
    t_up = np.atleast_2d(t_up)
    sigma = 0.25 * spacing_local
    centre, normal = None, None
    for rnd in range(rounds):
        dist = du if rnd == 0 else np.einsum("ij,ij->i", v - centre[kk], normal[kk])
        inside = np.abs(dist) < half
        w = np.maximum(-rel, 0.0) * np.exp(-0.5 * (dist / sigma[kk]) ** 2) * inside
        g = kk * n_col + col
        ng = c * n_col
        wsum = np.bincount(g, w, minlength=ng)
        pts = np.stack([np.bincount(g, w * v[:, i], minlength=ng) for i in range(3)], 1)
        pts /= np.maximum(wsum, 1e-300)[:, None]
        has = wsum > 0
        # columns with a real groove: weight at least a fifth of the boundary's median column weight
        wk = wsum.reshape(c, n_col)
        med = np.median(np.where(wk > 0, wk, np.nan), axis=1)
        med = np.where(np.isfinite(med), med, 0.0)
        use = has & (wsum >= 0.2 * np.repeat(med, n_col))
        gid = np.repeat(np.arange(c), n_col)
        for robust in range(2):
            ui = np.flatnonzero(use)
            centre, normal, _ = _plane_fit(pts[ui], wsum[ui], gid[ui], c, t_up)
            if fx is not None:
                normal[fx] = fixed_normal[fx]
            res = np.einsum("ij,ij->i", pts - centre[gid], normal[gid])
            if robust == 0:
                r_abs = np.abs(res)
                mad = np.array([0.0] * c)
                if len(ui):
                    mad_i = np.full(c, np.nan)
                    # robust sigma per boundary: median absolute residual of its used columns
                    order = np.lexsort((r_abs[ui], gid[ui]))
                    gs, rs = gid[ui][order], r_abs[ui][order]
                    starts = np.searchsorted(gs, np.arange(c))
                    ends = np.searchsorted(gs, np.arange(c), side="right")
                    midx = (starts + ends - 1) // 2
                    okm = ends > starts
                    mad_i[okm] = rs[np.clip(midx[okm], 0, len(rs) - 1)]
                    mad = np.where(np.isfinite(mad_i), mad_i, 0.0)
                lim = np.maximum(3.5 * 1.4826 * mad, 0.05 * spacing_local)
                use = use & (np.abs(res) <= lim[gid])
    ui = np.flatnonzero(use)
    res = np.einsum("ij,ij->i", pts - centre[gid], normal[gid])
    cnt = np.bincount(gid[ui], minlength=c)
    ws = np.bincount(gid[ui], wsum[ui], minlength=c)
    rms = np.sqrt(np.bincount(gid[ui], wsum[ui] * res[ui] ** 2, minlength=c) / np.maximum(ws, 1e-300))
    # centre: circle through the groove points in the plane
    e1 = np.cross(normal, np.where(np.abs(normal[:, [0]]) < 0.9, [[1.0, 0, 0]], [[0, 1.0, 0]]))
    e1 /= np.linalg.norm(e1, axis=1, keepdims=True)
    e2 = np.cross(normal, e1)
    rel_p = pts[ui] - centre[gid[ui]]
    cx, cy, _ = circle_centres(gid[ui], np.einsum("ij,ij->i", rel_p, e1[gid[ui]]),
                               np.einsum("ij,ij->i", rel_p, e2[gid[ui]]), c, min_count=6)
    ok = np.isfinite(cx) & (cnt >= 0.5 * n_col)
    centre = centre + np.where(ok[:, None], cx[:, None] * e1 + cy[:, None] * e2, 0.0)
    dist = np.einsum("ij,ij->i", v - centre[kk], normal[kk])
    # the planes go through the deepest point of the grooves, not their depth-weighted centroid: on an
    # asymmetric groove (a steep side and a slow one) the centroid sits on the slow side (independent
    # generator, laminae of 0.22 mm: a median 0.02 mm off the true plane)
    # (an asymmetric groove's slow side spans a share of the lamina it leads into: next to a thin lamina
    # and a thick one, the centroid's pull scales with the lamina on the slow side, not the local median)
    if deepest_fraction is None:
        frac, side = _deepest_fraction(kk, dist, rel, spacing_local), "local"
        if laminae is not None and frac != 0.0:
            side = "above" if frac < 0 else "below"
            frac = _deepest_fraction(kk, dist, rel, _side_lamina(laminae, side, spacing_local))
        deepest_fraction = (frac, side)
    frac, side = deepest_fraction
    shift = frac * (_side_lamina(laminae, side, spacing_local) if side != "local" else np.asarray(spacing_local, float))
    centre = centre + shift[:, None] * normal
    dist = dist - shift[kk]
    w = np.maximum(-rel, 0.0) * np.exp(-0.5 * (dist / sigma[kk]) ** 2) * (np.abs(dist) < half)
    if score is not None:
        sc = score[sel]
        out["score"] = np.bincount(kk, w * sc, minlength=c) / np.maximum(np.bincount(kk, w, minlength=c), 1e-300)
    # columns where the wall exists within a groove width of the plane (fewer near a slanted cut); g: the
    # (candidate, column) groups of the rounds above
    near = np.abs(dist) < 0.15 * spacing_local[kk]
    avail = np.bincount(g[near], minlength=c * n_col).reshape(c, n_col) > 0
    out.update(center=centre, normal=normal, rms_mm=rms, coverage=cnt / n_col, n_points=cnt, weight=ws,
               available=avail.sum(axis=1) / n_col, samples=(kk, dist, rel), deepest_fraction=deepest_fraction)
    return out


def _side_lamina(laminae, side, spacing_local):
    L = np.asarray(laminae[1] if side == "above" else laminae[0], float)
    return np.where(np.isfinite(L) & (L > 0), L, np.asarray(spacing_local, float))


def _deepest_fraction(kk, dist, rel, spacing_local, reach=DEEPEST_REACH, n_bins=48):
    """Offset along the boundaries' normals of the deepest point of the specimen's mean groove (laminae).

    The relief of the vertices within ``reach`` laminae of their boundary's plane, against their
    distance to it in laminae, pooled over every boundary (a specimen's grooves share one shape; one
    boundary's own profile is too noisy to place its minimum better than its centroid), in ``n_bins``
    bins, lightly smoothed; the minimum is refined by a parabola through its bin and the two beside it.
    Returns that offset in laminae (0 with fewer than 20 vertices per bin)."""
    u = dist / spacing_local[kk]
    inside = np.abs(u) < reach
    u, r = u[inside], rel[inside]
    if len(u) < 20 * n_bins:
        return 0.0
    b = np.minimum(((u + reach) / (2 * reach) * n_bins).astype(np.int64), n_bins - 1)
    sums = np.bincount(b, r, minlength=n_bins)
    cnt = np.bincount(b, minlength=n_bins).astype(float)
    prof = gaussian_filter1d(sums, 1.0, mode="nearest") / np.maximum(gaussian_filter1d(cnt, 1.0, mode="nearest"), 1e-9)
    m = int(np.clip(np.argmin(prof), 1, n_bins - 2))
    y0, y1, y2 = prof[m - 1], prof[m], prof[m + 1]
    den = y0 - 2 * y1 + y2
    delta = float(np.clip(0.5 * (y0 - y2) / den, -1.0, 1.0)) if den > 1e-15 else 0.0
    return float((m + 0.5 + delta) * (2 * reach / n_bins) - reach)


def crest_z(v, relief, s_flat, a, b, n_bins=6):
    """How far (standard errors) the wall between rings ``a`` and ``b`` rises above their grooves.

    The wall vertices between the two planes, along ``a``'s normal, in ``n_bins`` bins; the highest
    inner bin's mean relief less the higher of the two end bins', over its standard error (pooled
    within-bin scatter). Two grooves have a crest between them; one groove traced from both its flanks
    has none. NaN when a bin holds fewer than 5 vertices (too few to judge).
    """
    c, n = np.asarray(a["center"], float), np.asarray(a["normal"], float)
    d_b = float(np.dot(np.asarray(b["center"], float) - c, n))
    if abs(d_b) < 1e-12:
        return float("nan")
    lo, hi = sorted((float(a["height"]), float(b["height"])))
    pad = 0.5 * (hi - lo) + abs(d_b)
    pre = np.flatnonzero((s_flat > lo - pad) & (s_flat < hi + pad))
    t = ((v[pre] - c) @ n) / d_b
    m = (t >= 0.0) & (t < 1.0)
    ib = (t[m] * n_bins).astype(np.int64)
    r = relief[pre][m]
    cnt = np.bincount(ib, minlength=n_bins).astype(float)
    if cnt.min() < 5:
        return float("nan")
    mean = np.bincount(ib, r, minlength=n_bins) / cnt
    var = float(np.sum((r - mean[ib]) ** 2) / max(len(r) - n_bins, 1))
    k = 1 + int(np.argmax(mean[1:-1]))
    e = 0 if mean[0] >= mean[-1] else n_bins - 1
    se = np.sqrt(var * (1.0 / cnt[k] + 1.0 / cnt[e]))
    return float((mean[k] - mean[e]) / max(se, 1e-300))


def local_spacing_at(heights, spacing_mm, window=5):
    """Median spacing of the ``window`` nearest intervals at each height (the band spacing if too few)."""
    from .repair import local_spacing

    return local_spacing(heights, spacing_mm, window=window)
