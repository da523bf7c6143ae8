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


#: Half-width, in samples, of the window examined around each vertex's guess (see :func:`nearest_sample`).
_WINDOW = 3
#: Vertices per block of the window search.
_BLOCK = 1 << 16
#: Above this many samples the table of sample pairs is not made: the k-d tree answers alone.
_MAX_PAIRS_SAMPLES = 8000
#: Below this many vertices per sample the k-d tree alone is quicker (the pair table costs about as
#: much as the tree's search of 300 vertices per sample; measured at 0.4 and 1 M vertices, 2000 samples).
_MIN_VERTICES_PER_SAMPLE = 300


def _reach(p, t, w, along_bound):
    """Per sample ``g``: a distance from the axis below which a vertex whose nearest sample among
    ``g-w..g+w`` is ``g``, at most ``along_bound`` along the tangent from it, has no nearer sample outside
    that window. With ``r = v - p_g`` and ``D = p_j - p_g``, ``|v - p_j|^2 - |v - p_g|^2 = |D|^2 - 2 r.D``,
    which is at least ``|D|^2 - 2 A |t.D| - 2 |r_perp| |D_perp|`` (``A`` the along bound); it is positive
    for every outside ``j`` while ``|r_perp|`` stays below the smallest ``(|D|^2 - 2 A |t.D|) / (2 |D_perp|)``."""
    k = len(p)
    out = np.empty(k)
    j = np.arange(k)
    pc = [np.ascontiguousarray(p[:, c]) for c in range(3)]
    for a in range(0, k, 256):
        g = np.arange(a, min(k, a + 256))
        d = [pc[c][None, :] - pc[c][g, None] for c in range(3)]          # (b, k) each
        tg = [t[g, c][:, None] for c in range(3)]
        along = d[0] * tg[0] + d[1] * tg[1] + d[2] * tg[2]
        dd = d[0] * d[0] + d[1] * d[1] + d[2] * d[2]
        perp = np.zeros_like(dd)
        for c in range(3):
            e = d[c] - along * tg[c]
            perp += e * e
        np.sqrt(perp, out=perp)
        num = dd - 2.0 * along_bound * np.abs(along)
        with np.errstate(divide="ignore", invalid="ignore"):
            rho = np.where(num > 0, num / np.maximum(2.0 * perp, 1e-300), -np.inf)
        rho[np.abs(j[None, :] - g[:, None]) <= w] = np.inf
        out[g] = rho.min(axis=1)
    return out


def _end_reach(p, t, w, end):
    """The bound of :func:`_reach` for a vertex beyond an end of the curve (``end`` 0 or -1), whose
    offset along the end tangent points away from the curve: then ``-2 a t.D >= 0`` for every sample on
    the curve's side of the end's normal plane, and the bound is the smallest ``|D|^2 / (2 |D_perp|)``
    (none when a sample lies beyond that plane)."""
    k = len(p)
    g = 0 if end == 0 else k - 1
    outside = np.arange(w + 1, k) if end == 0 else np.arange(0, k - 1 - w)
    d = p[outside] - p[g]
    along = d @ t[g]
    if (end == 0 and np.any(along <= 0)) or (end != 0 and np.any(along >= 0)):
        return -np.inf
    dd = np.einsum("ij,ij->i", d, d)
    d -= along[:, None] * t[g]
    perp = np.sqrt(np.einsum("ij,ij->i", d, d))
    return float(np.min(dd / np.maximum(2.0 * perp, 1e-300)))


def nearest_sample(p, t, v) -> np.ndarray:
    """Index of the nearest of the curve's samples ``p`` (k, 3) (unit tangents ``t``) to each vertex of
    ``v`` (n, 3): the k-d tree's answer (``cKDTree(p).query(v)``), found faster.

    Each vertex starts from a guess (its position along the chord, then one step along the local
    tangent) and the window of ``2 * _WINDOW + 1`` samples around it is searched, re-centred on its
    nearest until that one sits in the middle. The nearest in the window is the nearest of all when the
    vertex lies within the distance from the axis that :func:`_reach` allows for its sample (a bound
    with a 1 % margin, checked per vertex); the k-d tree answers for every other vertex (a sharply bent
    curve, a vertex far off the axis, a window that did not settle). Exact ties, which either method may
    break its own way, aside, the indices are the same."""
    from scipy.spatial import cKDTree

    p = np.ascontiguousarray(p, dtype=float)
    v = np.asarray(v, dtype=float)
    k, n = len(p), len(v)
    w = _WINDOW
    if k < 4 * w + 2 or k > _MAX_PAIRS_SAMPLES or n < _MIN_VERTICES_PER_SAMPLE * k:
        return cKDTree(p).query(v, k=1, workers=2)[1]
    step = np.sqrt(np.einsum("ij,ij->i", np.diff(p, axis=0), np.diff(p, axis=0)))
    ds = float(np.median(step))
    chord = p[-1] - p[0]
    length = float(np.linalg.norm(chord))
    if not (ds > 0 and length > 0):
        return cKDTree(p).query(v, k=1, workers=2)[1]
    chord /= length
    u = (p - p[0]) @ chord
    if np.any(np.diff(u) <= 0):
        return cKDTree(p).query(v, k=1, workers=2)[1]
    along_bound = 0.75 * ds
    reach = 0.99 * _reach(p, t, w, along_bound)
    reach_ends = (0.99 * _end_reach(p, t, w, 0), 0.99 * _end_reach(p, t, w, -1))
    cum = np.concatenate([[0.0], np.cumsum(step)])
    px, py, pz = (np.ascontiguousarray(p[:, c]) for c in range(3))
    out = np.empty(n, dtype=np.intp)
    todo = []

    def search(a):
        vb = v[a:a + _BLOCK]
        g = np.interp((vb - p[0]) @ chord, u, np.arange(k, dtype=float))
        g = np.clip(np.rint(g), 0, k - 1).astype(np.intp)
        # one step along the tangent of the guess (arc length from the samples' own spacing)
        s1 = cum[g] + np.einsum("ij,ij->i", vb - p[g], t[g])
        c = np.clip(np.rint(np.interp(s1, cum, np.arange(k, dtype=float))), w, k - 1 - w).astype(np.intp)
        active = np.arange(len(vb))
        best = np.empty(len(vb), dtype=np.intp)
        vx, vy, vz = (np.ascontiguousarray(vb[:, c]) for c in range(3))
        for _ in range(8):
            d2 = np.empty((2 * w + 1, len(active)))
            ax, ay, az = vx[active], vy[active], vz[active]
            for o in range(2 * w + 1):               # squared distances summed x, y, z as the tree does
                q = c + (o - w)
                dx = ax - px[q]
                dy = ay - py[q]
                dz = az - pz[q]
                dx *= dx
                dy *= dy
                dz *= dz
                dx += dy
                dx += dz
                d2[o] = dx
            arg = np.argmin(d2, axis=0)
            g = c + (arg - w)
            # settled: the nearest sits mid-window, or off-centre in a window pinned at an end
            settled = (arg == w) | ((g < w) & (c == w)) | ((g > k - 1 - w) & (c == k - 1 - w))
            best[active[settled]] = g[settled]
            moved = ~settled
            if not moved.any():
                active = active[:0]
                break
            active = active[moved]
            c = np.clip(g[moved], w, k - 1 - w)
        if len(active):
            best[active] = -1
        ok = best >= 0
        gb = np.where(ok, best, 0)
        r = vb - p[gb]
        al = np.einsum("ij,ij->i", r, t[gb])
        r -= al[:, None] * t[gb]
        rp = np.sqrt(np.einsum("ij,ij->i", r, r))
        # (a window pinned at an end searched 0..2w or k-1-2w..k-1, more than the bound assumes: safe)
        inside = (np.abs(al) <= along_bound) & (rp < reach[gb])
        beyond = ((gb == 0) & (al <= 0) & (rp < reach_ends[0])) | ((gb == k - 1) & (al >= 0) & (rp < reach_ends[1]))
        ok &= inside | beyond
        out[a:a + _BLOCK] = gb
        bad = np.flatnonzero(~ok)
        if len(bad):
            todo.append(a + bad)   # (list.append is atomic: safe from the two threads)

    _in_threads(search, range(0, n, _BLOCK))
    if todo:
        rest = np.sort(np.concatenate(todo))
        out[rest] = cKDTree(p).query(v[rest], k=1, workers=2)[1]
    return out


def _compute(vertices: np.ndarray, axis) -> Unrolled:
    h = np.asarray(axis.heights_mm, float)
    fine = np.linspace(h[0], h[-1], max(len(h), FINE_SAMPLES))
    p, t, north, east = axis_frames(axis, fine)
    v = np.asarray(vertices, float)
    i = nearest_sample(p, t, v)
    n = len(v)
    s_out, az_out, r_out = np.empty(n), np.empty(n), np.empty(n)
    # in blocks (the same arithmetic per vertex; the (n, 3) temporaries stay in cache)
    def coordinates(a):
        ib = i[a:a + _BLOCK]
        tb = t[ib]
        d = v[a:a + _BLOCK] - p[ib]
        along = np.einsum("ij,ij->i", d, tb)
        r = d - along[:, None] * tb
        az = np.degrees(np.arctan2(np.einsum("ij,ij->i", r, east[ib]), np.einsum("ij,ij->i", r, north[ib])))
        s_out[a:a + _BLOCK] = fine[ib] + along
        az_out[a:a + _BLOCK] = np.mod(az, 360.0)
        r_out[a:a + _BLOCK] = np.linalg.norm(r, axis=1)

    _in_threads(coordinates, range(0, n, _BLOCK))
    return Unrolled(s_out, az_out, r_out)


#: Blocks of vertices from which the unrolling runs in two threads (numpy releases the GIL in its
#: loops; every vertex's numbers are its own, so the same whichever thread makes them).
_THREADED_BLOCKS = 4


def _in_threads(fn, starts) -> None:
    """``fn(a)`` for every block start ``a``: in two threads (interleaved blocks) when there are many."""
    starts = list(starts)
    if len(starts) < _THREADED_BLOCKS:
        for a in starts:
            fn(a)
        return
    from concurrent.futures import ThreadPoolExecutor

    def run(part):
        for a in part:
            fn(a)

    with ThreadPoolExecutor(max_workers=2, thread_name_prefix="bandgeo-unroll") as pool:
        done = [pool.submit(run, starts[k::2]) for k in range(2)]
        for d in done:
            d.result()


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
