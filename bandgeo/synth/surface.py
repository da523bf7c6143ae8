"""The implicit column shared by every mesh kind: centreline, wall radius, grooves, and helpers.

The column is described in *lamina coordinates* ``(s, theta)`` about a centreline ``c(s)`` (arc length
``s``, mm, specimen frame): the wall point is ``c(s) + R(s) (cos theta e1(s) + sin theta e2(s))`` with
``R(s) = radius(s) + groove(s)``, where ``(e1, e2, t)`` is the twist-free frame of the centreline.
Lamina boundary ``i`` meets the wall in the plane through ``c(H_i)`` perpendicular to ``t(H_i)``
(``H_i`` the boundary's arc length); that plane's centre and normal are the truth file's boundary
planes. The ring-aligned mesh samples this surface ring by ring, the photogrammetric mesh on a
lattice in the unrolled ``(R theta, s)`` domain, and the CT mesh voxelises the solid ``rho < R``.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .laminae import LaminaRecord, tilt_to_direction
from .params import SynthParams


@dataclass
class Centreline:
    """The column's centreline sampled on an increasing grid of arc lengths ``s`` (mm).

    Attributes
    ----------
    s : (p,) float
    points, tangents, e1, e2 : (p, 3) float
        ``e1, e2, tangents`` is a right-handed orthonormal frame at each point.
    """

    s: np.ndarray
    points: np.ndarray
    tangents: np.ndarray
    e1: np.ndarray
    e2: np.ndarray

    @classmethod
    def from_record(cls, record: LaminaRecord, s: np.ndarray) -> "Centreline":
        """Integrate the growth direction of each lamina (tilts interpolated between lamina mid-heights)."""
        h = record.boundary_heights_mm
        mid = 0.5 * (h[:-1] + h[1:])
        east = np.interp(s, mid, record.tilt_east_deg)
        north = np.interp(s, mid, record.tilt_north_deg)
        t = tilt_to_direction(east, north)
        points = np.zeros_like(t)
        ds = np.diff(s)[:, None]
        points[1:] = np.cumsum(0.5 * (t[1:] + t[:-1]) * ds, axis=0)
        # Minimal rotation taking z to t, applied to x and y (Rodrigues: R = I + [v]x + [v]x^2 / (1 + c)).
        vx, vy, c = -t[:, 1], t[:, 0], t[:, 2]
        k = 1.0 / (1.0 + c)
        e1 = np.column_stack([1.0 - k * vy * vy, k * vx * vy, -vy])
        e2 = np.column_stack([k * vx * vy, 1.0 - k * vx * vx, vx])
        return cls(np.asarray(s, float), points, t, e1, e2)

    def at(self, s: np.ndarray):
        """Points, unit tangents, e1, e2 at arc lengths ``s`` (linear interpolation, re-normalised)."""
        s = np.asarray(s, float)
        idx = np.clip(np.searchsorted(self.s, s, side="right") - 1, 0, self.s.size - 2)
        w = ((s - self.s[idx]) / (self.s[idx + 1] - self.s[idx]))[:, None]
        out = []
        for arr in (self.points, self.tangents, self.e1, self.e2):
            out.append(arr[idx] * (1.0 - w) + arr[idx + 1] * w)
        for k in (1, 2, 3):
            out[k] /= np.linalg.norm(out[k], axis=1, keepdims=True)
        return tuple(out)

    def point_tangent(self, s: np.ndarray):
        """Points and (not re-normalised) tangents at arc lengths ``s``: the cheap half of :meth:`at`."""
        s = np.asarray(s, float)
        idx = np.clip(np.searchsorted(self.s, s, side="right") - 1, 0, self.s.size - 2)
        w = ((s - self.s[idx]) / (self.s[idx + 1] - self.s[idx]))[:, None]
        c = self.points[idx] * (1.0 - w)
        c += self.points[idx + 1] * w
        t = self.tangents[idx] * (1.0 - w)
        t += self.tangents[idx + 1] * w
        return c, t

    def locate_near(self, x: np.ndarray, s0: float):
        """Arc length ``s`` and distance ``rho`` of points ``x`` that lie near the plane at ``s0``:
        one step along the tangent at ``s0``, then one Newton step (``theta`` is not computed). The
        distance is second-order insensitive to what error in ``s`` remains."""
        c0, t0 = self.point_tangent(np.array([float(s0)]))
        s = float(s0) + (x - c0[0]) @ t0[0]
        c, t = self.point_tangent(s)
        s += np.einsum("ij,ij->i", x - c, t)
        c, t = self.point_tangent(s)
        rel = x - c
        along = np.einsum("ij,ij->i", rel, t)
        rho = np.sqrt(np.maximum(np.einsum("ij,ij->i", rel, rel) - along * along, 0.0))
        return s, rho

    def curvature(self) -> np.ndarray:
        """Curvature |dt/ds| (1/mm) between grid points."""
        dt = np.linalg.norm(np.diff(self.tangents, axis=0), axis=1)
        return dt / np.diff(self.s)

    def locate(self, x: np.ndarray, iterations: int = 3):
        """Lamina coordinates of points ``x`` (n, 3): arc length ``s`` of the plane through each point
        perpendicular to the centreline, distance ``rho`` from the centreline, angle ``theta``.

        Newton steps ``s += (x - c(s)) . t(s)`` from the height-matched guess; converges in a few steps
        while the curvature times the radius stays well below 1."""
        z = self.points[:, 2]
        s = np.interp(x[:, 2], z, self.s)
        for _ in range(iterations):
            c, t = self.point_tangent(s)
            s = s + np.einsum("ij,ij->i", x - c, t) / np.einsum("ij,ij->i", t, t)
        c, t, e1, e2 = self.at(s)
        rel = x - c
        rel -= np.einsum("ij,ij->i", rel, t)[:, None] * t
        u, v = np.einsum("ij,ij->i", rel, e1), np.einsum("ij,ij->i", rel, e2)
        return s, np.hypot(u, v), np.arctan2(v, u)


def radius_profile(p: SynthParams, s: np.ndarray, top: float, gen: np.random.Generator) -> np.ndarray:
    """Slowly varying radius (mm): three sinusoids with wavelengths of 0.3-1.5 column lengths, times a
    linear taper from 1 at the base to ``1 + radius_taper`` at the top. Draws 6 numbers from ``gen``."""
    span = max(top, 10.0 * p.radius_mm)
    lam = gen.uniform(0.3, 1.5, 3) * span
    phase = gen.uniform(0.0, 2.0 * np.pi, 3)
    f = np.sin(2.0 * np.pi * s[:, None] / lam + phase).sum(axis=1) / 3.0
    taper = 1.0 + p.radius_taper * np.clip(s / max(top, 1e-12), 0.0, 1.0)
    return p.radius_mm * (1.0 + p.radius_variation * f) * taper


class RadiusFunction:
    """``radius(s)`` as a callable (interpolated on a fine grid drawn once)."""

    def __init__(self, p: SynthParams, top: float, gen: np.random.Generator, step: float):
        n = max(2, int(np.ceil(top / step)) + 1)
        self.s = np.linspace(0.0, top, n)
        self.r = radius_profile(p, self.s, top, gen)

    def __call__(self, s):
        return np.interp(s, self.s, self.r)


def groove_relief(record: LaminaRecord, s: np.ndarray, ds: float):
    """Groove relief (mm, <= 0) at arc lengths ``s``; returns (relief, depth_eff, halfwidth_eff).

    A raised-cosine dip centred on the nearest boundary, full width ``groove_width_fraction`` times the
    thinner neighbouring lamina, widened to at least the sampling step ``ds`` with its cross-section
    area kept (a scanner cannot show relief finer than its sampling)."""
    p = record.params
    h = record.boundary_heights_mm
    th = record.thickness_mm
    near = np.clip(np.searchsorted(h, s), 1, h.size - 1)
    near = np.where(np.abs(s - h[near - 1]) < np.abs(h[near] - s), near - 1, near)
    below = th[np.clip(near - 1, 0, th.size - 1)]
    above = th[np.clip(near, 0, th.size - 1)]
    local = np.minimum(below, above)
    half = 0.5 * p.groove_width_fraction * local
    half_eff = np.minimum(np.sqrt(half ** 2 + ds ** 2), 0.5 * local)
    depth_eff = p.groove_depth_mm * np.minimum(half / half_eff, 1.0)
    u = (s - h[near]) / half_eff
    relief = -depth_eff * 0.5 * (1.0 + np.cos(np.pi * np.clip(u, -1.0, 1.0)))
    return relief, depth_eff, half_eff


def uniform_laplacian(faces: np.ndarray, n: int):
    """Row-normalised adjacency (scipy CSR) of the mesh's vertices: ``A @ x`` is the neighbour mean.

    Built from the faces' directed edges (a -> b, b -> c, c -> a): on a consistently wound manifold
    each neighbour of a vertex is the head of exactly one of its outgoing edges, so no duplicates need
    summing; a vertex on an open border misses one neighbour (harmless for light smoothing)."""
    from scipy import sparse

    src = faces.ravel()
    dst = faces[:, [1, 2, 0]].ravel()
    deg = np.bincount(src, minlength=n).astype(np.float32)
    deg[deg == 0] = 1.0
    w = (1.0 / deg)[src]
    return sparse.csr_matrix((w, (src, dst)), shape=(n, n))


def taubin(x: np.ndarray, adjacency, iterations: int, lam: float = 0.33, mu: float = -0.34) -> np.ndarray:
    """Taubin's lambda|mu smoothing (Taubin 1995, "A signal processing approach to fair surface design"):
    ``iterations`` pairs of ``x += lam L x`` and ``x += mu L x`` with the uniform Laplacian ``L x =
    mean(neighbours) - x``. Works on (n,) or (n, 3) arrays; returns a new array."""
    x = np.array(x, dtype=float, copy=True)
    for _ in range(iterations):
        x += lam * (adjacency @ x - x)
        x += mu * (adjacency @ x - x)
    return x


def vertex_normals(vertices: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """Area-weighted unit vertex normals."""
    tri = vertices[faces]
    fn = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
    vn = np.zeros_like(vertices)
    for k in range(3):
        np.add.at(vn, faces[:, k], fn)
    norm = np.linalg.norm(vn, axis=1, keepdims=True)
    return vn / np.where(norm > 0, norm, 1.0)


def punch_holes(faces: np.ndarray, s_vertex: np.ndarray, theta_vertex: np.ndarray, wall: np.ndarray,
                p: SynthParams, top: float, gen: np.random.Generator):
    """Remove wall faces whose first vertex lies within a small radius of random (s, theta) points."""
    centres_s = gen.uniform(0.1 * top, 0.9 * top, p.holes)
    centres_t = gen.uniform(0.0, 2.0 * np.pi, p.holes)
    radii = gen.uniform(0.15, 0.35, p.holes) * p.radius_mm
    radii = np.minimum(radii, 0.2 * top)
    v = faces[:, 0]
    vs, vt, on_wall = s_vertex[v], theta_vertex[v], wall[faces].all(axis=1)
    keep = np.ones(faces.shape[0], dtype=bool)
    info = []
    for cs, ct, rr in zip(centres_s, centres_t, radii):
        dt = np.angle(np.exp(1j * (vt - ct)))
        hit = on_wall & ((vs - cs) ** 2 + (dt * p.radius_mm) ** 2 < rr * rr)
        keep &= ~hit
        info.append({"height_mm": float(cs), "angle_rad": float(ct), "radius_mm": float(rr),
                     "faces_removed": int(hit.sum())})
    return faces[keep], info


def drop_unused(vertices: np.ndarray, faces: np.ndarray, *per_vertex):
    """Remove vertices no face uses; returns (vertices, faces, *per_vertex arrays) re-indexed."""
    used = np.zeros(vertices.shape[0], dtype=bool)
    used[faces.ravel()] = True
    if used.all():
        return (vertices, faces, *per_vertex)
    remap = np.cumsum(used) - 1
    return (vertices[used], remap[faces], *(a[used] for a in per_vertex))
