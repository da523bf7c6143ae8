"""Growth axis: a smooth centreline through circle-fit centres of thin slabs of the side wall.

The column may lean and sway, so the axis is a curve. Each slab cut across the current axis is fitted
with a circle (Kasa 1976, "A circle fitting procedure and its error analysis", IEEE Trans. Instrum.
Meas. 25:8-14), which stays centred where a hole or a missing arc would drag a plain centroid aside.
The centres are smoothed along the axis; the tangent is the derivative of the smoothed curve.

The slabs are one band spacing thick, so the curve passes through the centre of every ring-shaped slice
of the column, the traced boundary rings included; it is fitted before the rings are traced because
the tracing needs it. The segmenter reports how far the fitted ring centres lie from it
(``resolution['axis_ring_offset_mm']``) as a check.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.ndimage import maximum_filter1d
from scipy.signal import savgol_filter

#: A slab counts for the centreline when it holds this fraction of a full slab's vertices: the end
#: slabs of a column cut across at a slant hold a partial ring, whose circle centre is pulled aside.
FULL_SLAB = 0.75
#: ... and its thinnest sixteenth of the circumference holds this fraction of the median sixteenth.
BALANCED_SLAB = 0.5
#: Vertices per block of :meth:`Centreline.project`.
PROJECT_BLOCK = 65_536


@dataclass
class Centreline:
    """A smooth curve through the column, parametrised by arc length.

    Attributes
    ----------
    heights_mm : (p,) float
        Increasing arc lengths of the samples, mm (0 at the lowest point of the mesh).
    points_mm : (p, 3) float
        Centreline points in the specimen frame, mm.
    tangents : (p, 3) float
        Unit tangents pointing up the column.
    """

    heights_mm: np.ndarray
    points_mm: np.ndarray
    tangents: np.ndarray

    def at(self, s):
        """Point(s) and unit tangent(s) at arc length ``s`` (scalar or (q,) array), mm.

        Beyond the ends the curve continues straight along the end tangents.
        """
        s_arr = np.atleast_1d(np.asarray(s, dtype=float))
        h = self.heights_mm
        # one search and one gather of a packed row (point, tangent and their steps to the next
        # sample) per query; linear interpolation, clamped (this runs on every vertex several times)
        table, inv_step = self._table()
        i = np.searchsorted(h, s_arr)
        np.clip(i, 1, len(h) - 1, out=i)
        i -= 1
        w = s_arr - h[i]
        w *= inv_step[i]
        np.clip(w, 0.0, 1.0, out=w)
        g = table[i]
        w = w[:, None]
        pts = g[:, 6:9]
        pts *= w
        pts += g[:, 0:3]
        tan = g[:, 9:12]
        tan *= w
        tan += g[:, 3:6]
        lo, hi = s_arr < h[0], s_arr > h[-1]
        if lo.any():
            pts[lo] = self.points_mm[0] + (s_arr[lo] - h[0])[:, None] * self.tangents[0]
        if hi.any():
            pts[hi] = self.points_mm[-1] + (s_arr[hi] - h[-1])[:, None] * self.tangents[-1]
        tan /= np.sqrt(np.einsum("ij,ij->i", tan, tan))[:, None]
        if np.ndim(s) == 0:
            return pts[0], tan[0]
        return pts, tan

    def _table(self):
        """Rows (point, tangent, step to the next point, step to the next tangent) and 1 / step in arc
        length, per sample; cached per curve."""
        cache = self.__dict__.get("_table_cache")
        if cache is None or cache[0] is not self.points_mm or cache[1] is not self.tangents:
            p, t = self.points_mm, self.tangents
            dp = np.vstack([np.diff(p, axis=0), np.zeros((1, 3))])
            dt = np.vstack([np.diff(t, axis=0), np.zeros((1, 3))])
            dh = np.diff(self.heights_mm)
            inv = np.r_[1.0 / dh, 0.0]
            cache = (p, t, np.ascontiguousarray(np.hstack([p, t, dp, dt])), inv)
            self.__dict__["_table_cache"] = cache
        return cache[2], cache[3]

    def approx_s(self, vertices: np.ndarray) -> np.ndarray:
        """Arc length of each vertex's position along the chord (no iterations): within a few tenths of
        a radius of :meth:`project` on a bent column; for tangents and coarse selections."""
        cache = self.__dict__.get("_chord_cache")
        if cache is None or cache[0] is not self.points_mm:
            h, p = self.heights_mm, self.points_mm
            chord = p[-1] - p[0]
            if np.linalg.norm(chord) < 1e-12:
                chord = self.tangents[0]
            chord = chord / np.linalg.norm(chord)
            u_pts = (p - p[0]) @ chord
            order = np.argsort(u_pts)
            cache = (self.points_mm, p[0].copy(), chord, u_pts[order], h[order])
            self.__dict__["_chord_cache"] = cache
        _, p0, chord, u_sorted, h_sorted = cache
        return np.interp((vertices - p0) @ chord, u_sorted, h_sorted)

    def project(self, vertices: np.ndarray, iterations: int = 3):
        """Arc length of the normal plane through each vertex, and the radial offset vector.

        Parameters
        ----------
        vertices : (n, 3) float, mm

        Returns
        -------
        s : (n,) float, mm
        radial : (n, 3) float, mm
            ``v - c(s)``, perpendicular to the tangent at ``s``.
        """
        vertices = np.asarray(vertices, dtype=float)
        n = len(vertices)
        s_out = np.empty(n)
        radial_out = np.empty((n, 3))
        # in blocks: every step of a block reuses a few MB that stay mapped (whole-length temporaries
        # of a 5 M-vertex wall are hundreds of MB each, and mapping them in costs more than the work)
        for a in range(0, n, PROJECT_BLOCK):
            v = vertices[a:a + PROJECT_BLOCK]
            s = self.approx_s(v)
            for _ in range(iterations):
                c, t = self.at(s)
                c -= v
                s -= np.einsum("ij,ij->i", c, t)
            c, t = self.at(s)
            np.subtract(v, c, out=c)
            c -= np.einsum("ij,ij->i", c, t)[:, None] * t
            s_out[a:a + PROJECT_BLOCK] = s
            radial_out[a:a + PROJECT_BLOCK] = c
        return s_out, radial_out

    def frame(self, s):
        """Orthonormal (e1, e2) perpendicular to the tangents at ``s`` (twist-free from +x)."""
        s = np.atleast_1d(np.asarray(s, dtype=float))
        e1_out, e2_out = np.empty((len(s), 3)), np.empty((len(s), 3))
        for a in range(0, len(s), PROJECT_BLOCK):  # in blocks, as project
            _, t = self.at(s[a:a + PROJECT_BLOCK])
            ref = np.where(np.abs(t[:, [0]]) < 0.9, np.array([[1.0, 0.0, 0.0]]), np.array([[0.0, 1.0, 0.0]]))
            e1 = ref - np.einsum("ij,ij->i", ref, t)[:, None] * t
            e1 /= np.linalg.norm(e1, axis=1, keepdims=True)
            e1_out[a:a + PROJECT_BLOCK] = e1
            e2_out[a:a + PROJECT_BLOCK] = np.cross(t, e1)
        return e1_out, e2_out

    def to_dict(self) -> dict:
        return {"heights_mm": self.heights_mm, "points_mm": self.points_mm, "tangents": self.tangents}

    @classmethod
    def from_dict(cls, d: dict) -> "Centreline":
        h = np.asarray(d["heights_mm"], float)
        p = np.asarray(d["points_mm"], float).reshape(-1, 3)
        t = np.asarray(d["tangents"], float).reshape(-1, 3)
        if len(h) < 2 or len(p) != len(h) or len(t) != len(h) or np.any(np.diff(h) <= 0):
            raise ValueError("centreline needs >= 2 samples with increasing heights")
        norm = np.linalg.norm(t, axis=1, keepdims=True)
        # keep stored unit vectors bit for bit (a reload must reproduce the run exactly)
        return cls(h, p, np.where(np.abs(norm - 1.0) > 1e-9, t / norm, t))


def circle_centres(u: np.ndarray, x: np.ndarray, y: np.ndarray, n_bins: int, min_count: int = 12):
    """Kasa circle fit in each bin of integer label ``u`` (0..n_bins-1), vectorised.

    Returns
    -------
    cx, cy, radius : (n_bins,) float, NaN where a bin has too few points.
    """
    def s(w):
        return np.bincount(u, w, minlength=n_bins)

    n = np.bincount(u, minlength=n_bins).astype(float)
    # centre the coordinates per bin for conditioning
    mx, my = s(x) / np.maximum(n, 1), s(y) / np.maximum(n, 1)
    xc, yc = x - mx[u], y - my[u]
    z = xc * xc + yc * yc
    sxx, syy, sxy = s(xc * xc), s(yc * yc), s(xc * yc)
    sxz, syz = s(xc * z), s(yc * z)
    # normal equations of x^2 + y^2 = 2 a x + 2 b y + c with centred data (sum x = sum y = 0)
    A = np.stack([np.stack([2 * sxx, 2 * sxy], -1), np.stack([2 * sxy, 2 * syy], -1)], -2)
    rhs = np.stack([sxz, syz], -1)
    det = A[:, 0, 0] * A[:, 1, 1] - A[:, 0, 1] * A[:, 1, 0]
    ok = (n >= min_count) & (np.abs(det) > 1e-12 * np.maximum(sxx * syy, 1e-300))
    a = np.full(n_bins, np.nan)
    b = np.full(n_bins, np.nan)
    a[ok] = (rhs[ok, 0] * A[ok, 1, 1] - rhs[ok, 1] * A[ok, 0, 1]) / det[ok]
    b[ok] = (A[ok, 0, 0] * rhs[ok, 1] - A[ok, 1, 0] * rhs[ok, 0]) / det[ok]
    c = s(z) / np.maximum(n, 1)
    radius = np.sqrt(np.maximum(a * a + b * b + c, 0.0))
    return mx + a, my + b, radius


def _straight(vertices: np.ndarray, axis: np.ndarray) -> Centreline:
    c = vertices.mean(axis=0)
    u = (vertices - c) @ axis
    p0, p1 = c + u.min() * axis, c + u.max() * axis
    length = max(float(u.max() - u.min()), 1e-9)
    return Centreline(np.array([0.0, length]), np.stack([p0, p1]), np.stack([axis, axis]))


def fit_centreline(vertices: np.ndarray, wall: np.ndarray, axis0: np.ndarray, slab_mm: float,
                   smooth_mm: float, passes: int = 2, noise_mm: float = 0.0, faces=None,
                   candidates=None):
    """Centreline through circle centres of slabs of the side wall.

    Parameters
    ----------
    vertices : (n, 3) float, mm
    wall : (n,) bool
        Side-wall vertices (caps excluded).
    axis0 : (3,) unit vector
        Rough axis to start from.
    slab_mm : float
        Slab thickness along the axis.
    smooth_mm : float
        Gaussian smoothing of the centres along the axis (mm, sigma).
    passes : int
        Each pass cuts the slabs across the previous pass's curve.
    noise_mm : float
        Scanner noise (rms), so that noise does not pull the origin below the true base.
    faces : (m, 3) int, optional
        With faces, an open base is found as the mesh's lowest boundary loop.

    candidates : sequence of float, optional
        Several smoothings (sigma, mm): the last pass returns one centreline for each (a list), the
        earlier passes use their median.

    Returns
    -------
    Centreline (or a list of them, with ``candidates``)
        Arc length 0 at the base: the lowest part of the whole mesh along the curve.
    """
    line = _straight(vertices[wall], axis0)
    vw = vertices[wall]
    c0 = vw - vw.mean(axis=0)
    radius_mm = float(np.median(np.linalg.norm(c0 - np.outer(c0 @ axis0, axis0), axis=1))) if len(vw) else 1.0
    lines = []
    for it in range(passes):
        s, radial = line.project(vw)
        e1, e2 = line.frame(s)
        x = np.einsum("ij,ij->i", radial, e1)
        y = np.einsum("ij,ij->i", radial, e2)
        s0 = float(s.min())
        nb = max(2, int(np.ceil((s.max() - s0) / slab_mm)))
        u = np.minimum(((s - s0) / slab_mm).astype(np.int64), nb - 1)
        cx, cy, _ = circle_centres(u, x, y, nb)
        # end slabs cut obliquely through the last rings hold a partial circle that pulls the centre
        # (and so the end tangents) aside: only slabs with most of a full slab's vertices count
        counts = np.bincount(u, minlength=nb)
        # against the fullest slab within two radii (a tapering column holds fewer vertices per slab
        # at its thin end; a slanted end cut leaves a ramp of partial slabs a radius or more long)
        ref = maximum_filter1d(counts.astype(float), size=max(5, int(4 * radius_mm / slab_mm) | 1), mode="nearest")
        full = counts >= FULL_SLAB * np.maximum(ref, 1.0)
        # ... and whose vertices go all round: an end cut at a slant leaves one side of the slab thin
        sec = np.minimum(((np.arctan2(y, x) + np.pi) / (2 * np.pi) * 16).astype(np.int64), 15)
        per = np.bincount(u * 16 + sec, minlength=nb * 16).reshape(nb, 16).astype(float)
        full &= per.min(axis=1) >= BALANCED_SLAB * np.maximum(np.median(per, axis=1), 1.0)
        ok = np.isfinite(cx) & full
        # a short stretch (a few slabs, all of them "ends") keeps the plain rule: most of a median slab
        loose = np.isfinite(cx) & (counts >= 0.7 * np.median(counts[counts > 0]))
        if ok.sum() < max(5, 0.5 * loose.sum()):
            ok = loose
        if ok.sum() < 2:
            break
        # centre of each slab in 3-D: point on the old curve at the slab's mean s, plus the offset
        ms = np.bincount(u, s, minlength=nb) / np.maximum(np.bincount(u, minlength=nb), 1)
        base, _ = line.at(ms[ok])
        be1, be2 = line.frame(ms[ok])
        pts = base + cx[ok, None] * be1 + cy[ok, None] * be2
        last = it == passes - 1
        if candidates is not None:
            sigmas = list(candidates) if last else [float(np.median(candidates))]
        else:
            sigmas = [smooth_mm]
        lines = [_curve(pts, sg / slab_mm, axis0) for sg in sigmas]
        line = lines[len(lines) // 2]
    # arc length 0 at the lowest point of the whole mesh along the curve
    out = []
    for ln in (lines if lines else [line]):
        shift = _base_height(ln, vertices, wall, noise_mm, faces)
        out.append(Centreline(ln.heights_mm - shift, ln.points_mm, ln.tangents))
    return out if candidates is not None else out[0]


def _curve(pts: np.ndarray, sigma_samples: float, axis0: np.ndarray) -> Centreline:
    """Smoothed centreline through slab centres, arc-length parametrised, pointing along ``axis0``."""
    pts = _smooth(pts, sigma_samples)
    seg = np.linalg.norm(np.diff(pts, axis=0), axis=1)
    keep = np.r_[True, seg > 1e-9]
    pts = pts[keep]
    arc = np.r_[0.0, np.cumsum(np.linalg.norm(np.diff(pts, axis=0), axis=1))]
    tan = np.gradient(pts, arc, axis=0) if len(pts) > 2 else np.repeat((pts[1:] - pts[:1]), 2, axis=0)
    tan /= np.linalg.norm(tan, axis=1, keepdims=True)
    if tan[:, 2].mean() < 0 and np.dot(tan.mean(axis=0), axis0) < 0:
        pts, tan, arc = pts[::-1], -tan[::-1], arc[-1] - arc[::-1]
    return Centreline(arc, pts, tan)


def _smooth(pts: np.ndarray, sigma_samples: float) -> np.ndarray:
    """Smooth a sampled curve: local quadratic fits (Savitzky & Golay 1964, Anal. Chem. 36:1627) over
    about four sigma, which, unlike padding, keep the curve's bend right up to its ends."""
    n = len(pts)
    win = int(2 * np.ceil(2.0 * max(sigma_samples, 0.5)) + 1)
    win = min(win, n if n % 2 else n - 1)
    if win < 5:
        return pts
    return savgol_filter(pts, win, 2, axis=0, mode="interp")


def _base_height(line: Centreline, vertices: np.ndarray, wall: np.ndarray, noise_mm: float, faces=None) -> float:
    """Arc length of the column's base on ``line``.

    A cut base is a cap across the axis: its vertices near the axis (within a third of the radius)
    give the base where the axis meets it, even when the cut is not square to the axis. An open base
    has no such vertices; then the lowest boundary loop of the mesh (the rim of the open end) is used,
    or without faces the lowest side-wall vertices. Medians keep scanner noise from pulling the base
    below the surface (common practice).
    """
    # Only the vertices near the low end matter: select them by the cheap chord position (good to a
    # fraction of a radius), then project just those (a full projection of a 10 M-vertex mesh is slow).
    wall = wall if wall.any() else np.ones(len(vertices), bool)
    s_apx = line.approx_s(vertices)
    widx = np.flatnonzero(wall)
    sub = widx[:: max(1, len(widx) // 50_000)]
    r_wall = float(np.median(np.linalg.norm(line.project(vertices[sub])[1], axis=1)))
    cand = np.flatnonzero(s_apx < float(s_apx[widx].min()) + 2.5 * r_wall)
    vertices, wall = vertices[cand], wall[cand]
    s_all, radial = line.project(vertices)
    rho = np.linalg.norm(radial, axis=1)
    s_wall = s_all[wall] if wall.any() else s_all
    low_wall = float(s_wall.min())
    tol = 6.0 * noise_mm if np.isfinite(noise_mm) and noise_mm > 0 else 0.0
    # tilt allowance: a fifth of the radius, but never reaching the far end of a short, wide stretch
    allow = min(0.2 * r_wall, 0.25 * float(s_apx[widx].max() - low_wall))
    # cap vertices near the axis, below the lowest part of the side wall plus the tilt allowance
    near = (rho < r_wall / 3.0) & (s_all < low_wall + allow)
    if near.sum() >= 3:
        cap = s_all[near]
        lo = float(cap.min())
        return float(np.median(cap[cap <= lo + tol + 0.5 * allow]))
    if faces is not None and len(faces):
        from ..features.curvature import boundary_vertices

        rim = boundary_vertices(np.asarray(faces), len(s_apx))[cand] & (s_all < low_wall + allow)
        if rim.sum() >= 3:
            return float(np.median(s_all[rim]))
    ring = s_wall[s_wall <= low_wall + max(tol, 1e-9)]
    return float(np.median(ring))
