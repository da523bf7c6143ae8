"""Unrolling about the centreline, in one place: height along the axis, azimuth and radius of points.

Used by the series (relief profile), the report (unrolled side surface) and the review page.

- *height* ``s_mm``: arc length along the centreline of the nearest point of the curve, sampled finely
  (at least :data:`FINE_SAMPLES` points, linear between the centreline's own samples), plus the offset
  along the local tangent, in mm;
- *azimuth* ``azimuth_deg``: clockwise from north (specimen ``y``) looking down the axis, ``atan2(east,
  north)`` in [0, 360) degrees, in a frame that follows the tangent (DEVELOPERS.md, "Frames");
- *radius* ``radius_mm``: distance from the axis, perpendicular to the local tangent, in mm.

:func:`unroll` caches its answer for the last few (vertices, centreline) pairs used, so the report, the
series and the review page unroll a mesh once per segmentation axis; :func:`height_order` keeps the
vertices' order along the height beside it (the relief profile bins by height after each review save).
"""
from __future__ import annotations

import threading
from dataclasses import dataclass

import numpy as np

#: The centreline is resampled to at least this many points before the nearest-point search.
FINE_SAMPLES = 2000
_CACHE_SIZE = 4


@dataclass(frozen=True)
class Unrolled:
    """Per-vertex cylindrical coordinates about a centreline (all (n,) float64)."""

    s_mm: np.ndarray
    azimuth_deg: np.ndarray
    radius_mm: np.ndarray

    def __iter__(self):  # ``s, az, r = unroll(...)``
        return iter((self.s_mm, self.azimuth_deg, self.radius_mm))


def axis_frames(axis, s):
    """Point (k, 3), unit tangent, north and east (k, 3) of the centreline at heights ``s`` (k,) mm.

    North is specimen ``y`` made perpendicular to the tangent (``x`` where the axis lies along ``y``);
    east = north x tangent, so azimuth = atan2(east, north) runs clockwise seen from above.
    """
    h = np.asarray(axis.heights_mm, float)
    pts, tan = np.asarray(axis.points_mm, float), np.asarray(axis.tangents, float)
    s = np.atleast_1d(np.asarray(s, float))
    p = np.stack([np.interp(s, h, pts[:, j]) for j in range(3)], axis=1)
    t = np.stack([np.interp(s, h, tan[:, j]) for j in range(3)], axis=1)
    t /= np.linalg.norm(t, axis=1, keepdims=True)
    north = np.array([0.0, 1.0, 0.0]) - t[:, 1:2] * t
    bad = np.linalg.norm(north, axis=1) < 1e-6
    north[bad] = np.array([1.0, 0.0, 0.0]) - t[bad, 0:1] * t[bad]
    north /= np.linalg.norm(north, axis=1, keepdims=True)
    return p, t, north, np.cross(north, t)


def axis_at(axis, s):
    """Point (k, 3) and unit tangent (k, 3) of the centreline at arc lengths ``s`` (k,) mm."""
    p, t, _, _ = axis_frames(axis, s)
    return p, t


def _compute(vertices: np.ndarray, axis) -> Unrolled:
    from scipy.spatial import cKDTree

    h = np.asarray(axis.heights_mm, float)
    fine = np.linspace(h[0], h[-1], max(len(h), FINE_SAMPLES))
    p, t, north, east = axis_frames(axis, fine)
    v = np.asarray(vertices, float)
    _, i = cKDTree(p).query(v, k=1, workers=2)
    d = v - p[i]
    along = np.einsum("ij,ij->i", d, t[i])
    r = d - along[:, None] * t[i]
    az = np.degrees(np.arctan2(np.einsum("ij,ij->i", r, east[i]), np.einsum("ij,ij->i", r, north[i])))
    return Unrolled(fine[i] + along, np.mod(az, 360.0), np.linalg.norm(r, axis=1))


_lock = threading.Lock()
_cache: list = []  # [(vertices, axis, Unrolled)], most recent last; identity of the two objects is the key


def unroll(vertices, axis) -> Unrolled:
    """Height along the axis (mm), azimuth clockwise from north (deg) and radius (mm) of each vertex.

    Parameters
    ----------
    vertices : (n, 3) array
        Specimen frame, mm.
    axis : bandgeo.segment.Centreline
        ``heights_mm (p,)``, ``points_mm (p, 3)``, ``tangents (p, 3)``.

    The answer for the same two objects (by identity, arrays not changed in place) is cached.
    """
    with _lock:
        for i, entry in enumerate(_cache):
            if entry[0] is vertices and entry[1] is axis:
                _cache.append(_cache.pop(i))  # most recently used last: kept longest
                return entry[2]
    value = _compute(vertices, axis)
    with _lock:
        _cache.append((vertices, axis, value))
        del _cache[:-_CACHE_SIZE]
    return value


_orders: list = []  # [(Unrolled, order)], most recent last


def height_order(unrolled: Unrolled) -> np.ndarray:
    """Indices that sort ``unrolled.s_mm`` (stable), kept for the last few unrolled meshes."""
    with _lock:
        for i, (u, order) in enumerate(_orders):
            if u is unrolled:
                _orders.append(_orders.pop(i))
                return order
    order = np.argsort(unrolled.s_mm, kind="stable")
    with _lock:
        _orders.append((unrolled, order))
        del _orders[:-_CACHE_SIZE]
    return order


def clear_cache() -> None:
    with _lock:
        _cache.clear()
        _orders.clear()
