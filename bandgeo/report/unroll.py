"""Unroll a column's side surface about its centreline: height along the axis × azimuth.

Azimuth is measured clockwise from north (specimen ``y``) looking down the axis, ``atan2(x, y)`` as in
DEVELOPERS.md; height is arc length along the centreline in millimetres.
"""
from __future__ import annotations

import numpy as np
from scipy.ndimage import gaussian_filter

from ..unroll import axis_at, unroll  # noqa: F401  (axis_at re-exported)


def _frames(tangents: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """East and north unit vectors perpendicular to each tangent (p, 3) (``bandgeo.unroll`` frames)."""
    t = np.asarray(tangents, float)
    t = t / np.linalg.norm(t, axis=1, keepdims=True)
    north = np.array([0.0, 1.0, 0.0]) - t[:, 1:2] * t
    bad = np.linalg.norm(north, axis=1) < 1e-6       # axis along y: fall back on x
    north[bad] = (np.array([1.0, 0.0, 0.0]) - t[bad, 0:1] * t[bad])
    north /= np.linalg.norm(north, axis=1, keepdims=True)
    return np.cross(north, t), north


def unroll_vertices(vertices_mm: np.ndarray, axis) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Height along the axis (mm), azimuth clockwise from north in [0, 360) degrees and distance from
    the axis (mm) of each vertex: :func:`bandgeo.unroll.unroll` (one implementation, cached)."""
    return tuple(unroll(vertices_mm, axis))


def grid_shape(n_points: int, span_mm: float, radius_mm: float, per_cell: float = 4.0) -> tuple[int, int]:
    """Cells along the axis and in azimuth so that each holds about ``per_cell`` vertices and the cells
    are roughly square on the surface (height span ``span_mm``, circumference ``2 pi radius_mm``)."""
    cells = max(n_points / per_cell, 1.0)
    aspect = max(2 * np.pi * max(radius_mm, 1e-6), 1e-6) / max(span_mm, 1e-6)   # width / height
    n_az = int(np.clip(np.sqrt(cells * aspect), 36, 720))
    n_s = int(np.clip(cells / n_az, 20, 1500))
    return n_s, n_az


def relief_image(s_mm, azimuth_deg, radius_mm, n_az=None, n_s=None, smooth_mm=None):
    """Relief of the side surface on a regular (height, azimuth) grid.

    Relief is the mean radius in each cell minus a smooth version of it (Gaussian, wrapping in
    azimuth), so it shows laminae and not the column's taper or ellipticity.

    Returns
    -------
    image : (n_s, n_az) float
        Relief in mm, NaN where no vertex falls.
    s_edges : (n_s + 1,) float
        Cell edges along the axis, mm.
    az_edges : (n_az + 1,) float
        Cell edges in azimuth, degrees.
    """
    s_mm = np.asarray(s_mm, float)
    lo, hi = float(np.min(s_mm)), float(np.max(s_mm))
    span = max(hi - lo, 1e-9)
    auto_s, auto_az = grid_shape(len(s_mm), span, float(np.median(radius_mm)))
    n_s = auto_s if n_s is None else int(n_s)
    n_az = auto_az if n_az is None else int(n_az)
    s_edges = np.linspace(lo, hi, n_s + 1)
    az_edges = np.linspace(0.0, 360.0, n_az + 1)
    si = np.clip(((s_mm - lo) / span * n_s).astype(np.int64), 0, n_s - 1)
    ai = np.clip((np.asarray(azimuth_deg) / 360.0 * n_az).astype(np.int64), 0, n_az - 1)
    flat = si * n_az + ai
    count = np.bincount(flat, minlength=n_s * n_az).reshape(n_s, n_az)
    total = np.bincount(flat, weights=radius_mm, minlength=n_s * n_az).reshape(n_s, n_az)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = total / count
    filled = np.where(count > 0, mean, 0.0)
    weight = (count > 0).astype(float)
    ds = span / n_s
    if smooth_mm is None:
        smooth_mm = span / 15.0
    sig = (max(smooth_mm / ds, 1.0), n_az / 24.0)
    num = gaussian_filter(filled, sig, mode=("nearest", "wrap"))
    den = gaussian_filter(weight, sig, mode=("nearest", "wrap"))
    with np.errstate(invalid="ignore", divide="ignore"):
        smooth = num / den
    image = np.where(count > 0, mean - smooth, np.nan)
    return fill_gaps(image), s_edges, az_edges


def fill_gaps(image: np.ndarray, max_sigma: float = 4.0) -> np.ndarray:
    """Fill empty cells (NaN) from their neighbours by normalised Gaussian convolution.

    Meshes sampled in rings (few vertices around, many along) or with holes leave empty cells on a
    regular grid; each empty cell takes the weighted mean of the filled cells within a few cells
    (sigma 1, then 2, then 4 cells, wrapping in azimuth). Cells farther than that from any data stay
    empty, so holes in the scan still show.
    """
    out = image.copy()
    sigma = 1.0
    while sigma <= max_sigma and np.isnan(out).any():
        have = np.isfinite(out)
        num = gaussian_filter(np.where(have, out, 0.0), sigma, mode=("nearest", "wrap"))
        den = gaussian_filter(have.astype(float), sigma, mode=("nearest", "wrap"))
        fill = (~have) & (den > 0.05)
        out[fill] = num[fill] / den[fill]
        sigma *= 2.0
    return out


def boundary_trace(boundary, axis, radius_mm: float, azimuth_deg: np.ndarray) -> np.ndarray:
    """Height (mm along the axis) at which a boundary plane meets a cylinder of ``radius_mm``.

    The plane passes through ``boundary.center_mm`` with normal ``boundary.normal``. At azimuth
    ``phi`` the cylinder point is ``a + R u(phi) + h t`` (axis point ``a``, tangent ``t``), and the
    plane condition gives ``h = -(n.(a - c) + R n.u) / (n.t)``: a sinusoid whose amplitude is
    ``R tan(tilt)``.

    Returns
    -------
    (k,) float
        Height along the axis for each azimuth, mm.
    """
    s0 = float(boundary.height_mm)
    a, t = axis_at(axis, [s0])
    east, north = _frames(t)
    phi = np.radians(np.asarray(azimuth_deg, float))
    u = np.sin(phi)[:, None] * east + np.cos(phi)[:, None] * north
    n = np.asarray(boundary.normal, float)
    n = n / np.linalg.norm(n)
    c = np.asarray(boundary.center_mm, float)
    nt = float(n @ t[0])
    if abs(nt) < 1e-3:
        return np.full(len(phi), np.nan)
    h = -(float(n @ (a[0] - c)) + radius_mm * (u @ n)) / nt
    return s0 + h
