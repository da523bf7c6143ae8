"""The side wall unrolled about a coarse centreline: arc length ``s``, azimuth ``theta``, radius and relief.

The coarse centreline (circle-fit centres of thin slabs, :func:`bandgeo.segment.axis.fit_centreline`)
needs to be right only to a few degrees: every later stage measures the laminae's own tilt locally.
The groove relief of a vertex is its radius minus a smooth trend of the radius over azimuth and height
(a high-pass along the wall), so that an off-centre or tilted centreline, a tapering or bulging column
and slow radius changes all drop out, while grooves a fraction of a radius apart stay.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.ndimage import gaussian_filter, map_coordinates

from .axis import Centreline, fit_centreline

#: Side-wall vertices: normal within 60 degrees of perpendicular to the axis.
WALL_MAX_AXIAL_NORMAL = 0.5

#: Smoothing (Gaussian sigma) of the coarse centreline, in column radii.
CENTRELINE_SMOOTH_RADII = 0.75

#: Side-wall vertices used for the coarse centreline on large scans.
AXIS_SUBSAMPLE = 400_000


@dataclass
class Wall:
    """Side-wall vertices in unrolled coordinates about a centreline.

    Attributes
    ----------
    idx : (m,) int64
        Indices of the side-wall vertices in the specimen.
    v : (m, 3) float
        Their positions, mm.
    s : (m,) float
        Arc length along the centreline, mm.
    theta : (m,) float
        Azimuth about the centreline in its twist-free frame, rad (-pi..pi).
    r : (m,) float
        Distance from the centreline, mm.
    relief : (m,) float
        Radius minus its smooth trend, mm (grooves negative).
    radius_mm : float
        Median radius.
    """

    idx: np.ndarray
    v: np.ndarray
    s: np.ndarray
    theta: np.ndarray
    r: np.ndarray
    relief: np.ndarray
    radius_mm: float

    @property
    def length_mm(self) -> float:
        return float(self.s.max() - self.s.min()) if len(self.s) else 0.0


def wall_mask(normals: np.ndarray, axis0: np.ndarray) -> np.ndarray:
    """Vertices whose normal is within 60 degrees of perpendicular to ``axis0``."""
    return np.abs(normals @ axis0) < WALL_MAX_AXIAL_NORMAL


def coarse_centreline(v: np.ndarray, wall: np.ndarray, axis0: np.ndarray, sampling_mm: float, noise_mm: float,
                      faces, rng: np.random.Generator) -> tuple[Centreline, dict | None]:
    """Centreline through slab circle centres, slabs about a tenth of the radius thick, and how its
    smoothing was chosen (None when there was only one candidate).

    Three smoothings are tried, from a slab and a half up to three quarters of a radius: slab centres
    of an elliptical or noisy section scatter by tenths of a millimetre (smoothing over a slab or two
    let the tangent swing by tens of degrees near a cut end), while a round, finely sampled column keeps
    following its meander only with little smoothing. The one whose ring-averaged relief keeps the most
    groove contrast wins. Sway faster than the smoothing is left to the tilt field
    (:mod:`bandgeo.segment.tilt`)."""
    wall_axis = wall.copy()
    idx = np.flatnonzero(wall)
    if len(idx) > AXIS_SUBSAMPLE:
        drop = rng.choice(idx, size=len(idx) - AXIS_SUBSAMPLE, replace=False)
        wall_axis[drop] = False
    c = v[idx[:: max(1, len(idx) // 20000)]]
    rad = np.linalg.norm((c - c.mean(axis=0)) - np.outer((c - c.mean(axis=0)) @ axis0, axis0), axis=1)
    radius = float(np.median(rad)) if len(rad) else 1.0
    slab = max(radius / 10.0, 5.0 * sampling_mm)
    length = float(np.ptp(c @ axis0)) if len(c) else 0.0
    # ... but over no more than an eighth of the stretch, so that a short stretch keeps its own bend
    smooth_max = max(1.5 * slab, min(CENTRELINE_SMOOTH_RADII * radius, length / 8.0))
    cands = sorted({round(x, 6) for x in np.geomspace(1.5 * slab, smooth_max, 3)})
    lines = fit_centreline(v, wall_axis, axis0, slab_mm=slab, smooth_mm=1.5 * slab, noise_mm=noise_mm,
                           faces=faces, candidates=cands)
    if len(lines) == 1:
        return lines[0], None
    # the smoothing whose centreline leaves the laminae most nearly square to it: the ring-averaged
    # relief keeps the most groove contrast (a tilted or wandering centreline smears the grooves of
    # a ring over one another; the noise is the same for every candidate)
    idx = np.flatnonzero(wall_axis)
    sub = idx[:: max(1, len(idx) // 200_000)]
    scores = [ring_contrast(v[sub], ln, sampling_mm) for ln in lines]
    best = int(np.argmax(scores))
    return lines[best], {"sigma_mm": float(cands[best] if len(cands) == len(lines) else float("nan")),
                         "candidates_mm": [float(c) for c in cands], "ring_contrast": [float(x) for x in scores]}


def ring_contrast(vw: np.ndarray, line: Centreline, sampling_mm: float) -> float:
    """Variance of the ring-averaged relief along ``line`` (bins of half a sampling interval), mm^2."""
    s, radial = line.project(vw)
    r = np.linalg.norm(radial, axis=1)
    e1, e2 = line.frame(s)
    theta = np.arctan2(np.einsum("ij,ij->i", radial, e2), np.einsum("ij,ij->i", radial, e1))
    rel = relief_highpass(s, theta, r, float(np.median(r)))
    b = max(0.5 * sampling_mm, 1e-6)
    ib = ((s - s.min()) / b).astype(np.int64)
    cnt = np.bincount(ib)
    mean = np.bincount(ib, rel) / np.maximum(cnt, 1)
    ok = cnt >= 3
    return float(np.sum(cnt[ok] * mean[ok] ** 2) / max(np.sum(cnt[ok]), 1))


def unroll(v: np.ndarray, wall_idx: np.ndarray, axis: Centreline) -> Wall:
    """Unrolled coordinates of the wall vertices and their relief (see :func:`relief_highpass`)."""
    vw = v[wall_idx]
    s, radial = axis.project(vw)
    r = np.linalg.norm(radial, axis=1)
    e1, e2 = axis.frame(s)
    theta = np.arctan2(np.einsum("ij,ij->i", radial, e2), np.einsum("ij,ij->i", radial, e1))
    keep = full_radius(s, r, theta)
    if keep.sum() >= 100 and not keep.all():
        wall_idx, vw, s, r, theta = wall_idx[keep], vw[keep], s[keep], r[keep], theta[keep]
    radius = float(np.median(r))
    relief = relief_highpass(s, theta, r, radius)
    return Wall(idx=wall_idx, v=vw, s=s, theta=theta, r=r, relief=relief, radius_mm=radius)


def full_radius(s: np.ndarray, r: np.ndarray, theta: np.ndarray | None = None, fraction: float = 0.9,
                n_az: int = 16) -> np.ndarray:
    """Vertices at least ``fraction`` of the column's running radius (in their azimuth sector) from the centreline.

    Drops the shoulders of a domed top or a rounded base (whose normals still pass as side wall) and
    stray inner surfaces: the running radius is a median filter of the mean radius in cells of
    ``n_az`` azimuth sectors by a sixteenth of the radius of height, over +-1 radius of height, so the
    few cells of a dome do not pull it down. Per sector, so that the flat sides of an elliptical section
    (a 7 x 5 mm ellipse is 0.83 of its mean radius across its short axis) are kept.
    """
    from scipy.ndimage import median_filter

    radius = float(np.median(r))
    cell = max(radius / 16.0, 1e-6)
    s0 = float(s.min())
    nb = int(np.ceil((s.max() - s0) / cell)) + 1
    ib = np.minimum(((s - s0) / cell).astype(np.int64), nb - 1)
    if theta is None:
        n_az = 1
        ia = np.zeros(len(s), dtype=np.int64)
    else:
        ia = np.minimum(((theta + np.pi) / (2 * np.pi) * n_az).astype(np.int64), n_az - 1)
    key = ia * nb + ib
    cnt = np.bincount(key, minlength=n_az * nb).reshape(n_az, nb)
    mean = np.bincount(key, r, minlength=n_az * nb).reshape(n_az, nb) / np.maximum(cnt, 1)
    # empty cells take their sector's median (then the filter ignores them in effect)
    sector = np.array([np.median(m[c > 0]) if (c > 0).any() else radius for m, c in zip(mean, cnt)])
    mean = np.where(cnt > 0, mean, sector[:, None])
    run = median_filter(mean, size=(1, 33), mode="nearest")
    return r >= fraction * run[ia, ib]


def relief_highpass(s: np.ndarray, theta: np.ndarray, r: np.ndarray, radius: float, n_az: int = 128) -> np.ndarray:
    """Radius minus its smooth trend over (azimuth, height).

    The trend is the mean radius in cells of ``n_az`` azimuths by ``radius / 16`` of height, smoothed by
    a Gaussian of one cell (wrapping around the column) and read back bilinearly at each vertex. Laminae
    are thinner than a twentieth of the radius on real columns, so the trend keeps their grooves. The
    cells are about as wide as they are tall (128 around: 2 pi / 128 of a radius), so that an
    elliptical or lobed section leaves no residue: with 32 around, a 7 x 5 mm ellipse left 0.08 mm rms
    in the relief of a column whose scanner noise was 0.015 mm.
    """
    cell = max(radius / 16.0, 1e-6)
    s0 = float(s.min())
    nb = int(np.ceil((s.max() - s0) / cell)) + 1
    ib = np.minimum(((s - s0) / cell).astype(np.int64), nb - 1)
    ia = np.minimum(((theta + np.pi) / (2 * np.pi) * n_az).astype(np.int64), n_az - 1)
    key = ia * nb + ib
    sums = np.bincount(key, r, minlength=n_az * nb).reshape(n_az, nb)
    cnt = np.bincount(key, minlength=n_az * nb).reshape(n_az, nb).astype(float)
    # smooth sums and counts alike (normalised convolution fills empty cells from their neighbours)
    pad = 3
    sums_p = np.concatenate([sums[-pad:], sums, sums[:pad]], axis=0)
    cnt_p = np.concatenate([cnt[-pad:], cnt, cnt[:pad]], axis=0)
    ss = gaussian_filter(sums_p, (1.0, 1.0), mode="nearest")
    cc = gaussian_filter(cnt_p, (1.0, 1.0), mode="nearest")
    trend = np.where(cc > 1e-9, ss / np.maximum(cc, 1e-9), radius)
    # cell centres: azimuth index (theta + pi) / (2 pi) * n_az - 0.5, height (s - s0) / cell - 0.5
    ya = (theta + np.pi) / (2 * np.pi) * n_az - 0.5 + pad
    xb = np.clip((s - s0) / cell - 0.5, 0.0, nb - 1.0)
    t = map_coordinates(trend, np.vstack([ya, xb]), order=1, mode="nearest")
    return r - t
