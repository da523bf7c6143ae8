"""Mesh of a laminated column in the specimen frame: centreline, grooved side wall, caps, holes, colour.

Construction (all lengths mm, specimen frame: x east, y north, z paleo-up, origin on the axis at the
base):

- The **centreline** ``c(s)`` is integrated in arc length ``s`` from the growth direction of each lamina
  (tilt components interpolated between lamina mid-heights), so a swaying column curves.
- The side wall is a stack of **rings**, each in the plane through ``c(s)`` perpendicular to the local
  tangent ``t(s)``. Lamina boundary ``i`` meets the wall in the ring at ``s = H_i``: each boundary is a
  dome ``s = H_i + D (1 - (rho / R)^2)`` over the column's cross-section (``D = dome_height_mm``), so
  the trace of a boundary on the wall is that tilted ring, and the top cap is the last dome.
- Each boundary carries a **groove**: a raised-cosine dip of the radius, full width
  ``groove_width_fraction`` times the thinner neighbouring lamina. A scanner cannot resolve relief finer
  than its vertex spacing, so the groove is widened to at least the ring spacing with its cross-section
  area kept (the effective depth and half-width go into the truth file).
- The radius varies slowly along the column (three long sinusoids, at most ``radius_variation``).
- **Sampling**: isotropic rings are offset by half a step every other ring, with an edge length that
  makes near-equilateral triangles; anisotropic rings are aligned and carry few vertices.
- Caps are Delaunay triangulations of a hexagonal grid inside the end rings; wall, caps and winding
  give outward normals. Holes remove the wall faces near a few random points.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial import Delaunay

from .laminae import LaminaRecord, tilt_to_direction
from .params import SynthParams
from .surface import Centreline, groove_relief, radius_profile

#: Vertices per ring of the anisotropic sampling unless ``ring_vertices`` is given.
ANISOTROPIC_RING_VERTICES = 24


@dataclass
class ColumnMesh:
    """A column mesh in the specimen frame (mm).

    Attributes
    ----------
    vertices_mm : (n, 3) float
    faces : (m, 3) int64
        Counter-clockwise seen from outside (outward normals).
    lamina_coord_mm : (n,) float
        Position of each vertex in lamina coordinates (arc length of the boundary dome through it).
    info : dict
        Sampling and relief figures for the truth file.
    centreline : Centreline or None
        The centreline the mesh was built about (the truth's boundary planes come from it).
    noise_applied : bool
        True when the builder already added the scanner noise (photogrammetric, CT).
    """

    vertices_mm: np.ndarray
    faces: np.ndarray
    lamina_coord_mm: np.ndarray
    info: dict
    centreline: Centreline | None = None
    noise_applied: bool = False


def ring_frames(record: LaminaRecord, s: np.ndarray):
    """Centreline points, tangents and a twist-free normal frame at arc lengths ``s``.

    Parameters
    ----------
    record : LaminaRecord
    s : (p,) float
        Increasing arc lengths from 0 to the top, mm.

    Returns
    -------
    points, tangents, e1, e2 : (p, 3) float each
        ``e1, e2, tangents`` form a right-handed orthonormal frame at each point.
    """
    cl = Centreline.from_record(record, s)
    return cl.points, cl.tangents, cl.e1, cl.e2


def tangent_at(record: LaminaRecord, s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Centreline points and unit tangents at arc lengths ``s`` (mm), consistent with the mesh."""
    grid = _ring_positions(record, _ring_spacing(record.params))
    points, t, _, _ = ring_frames(record, grid)
    out_p = np.column_stack([np.interp(s, grid, points[:, j]) for j in range(3)])
    out_t = np.column_stack([np.interp(s, grid, t[:, j]) for j in range(3)])
    return out_p, out_t / np.linalg.norm(out_t, axis=1, keepdims=True)


def _ring_spacing(p: SynthParams) -> float:
    return p.mean_thickness_mm / p.rings_per_lamina


def _ring_positions(record: LaminaRecord, ds: float) -> np.ndarray:
    top = float(record.boundary_heights_mm[-1])
    n = max(2, int(np.ceil(top / ds)) + 1)
    return np.linspace(0.0, top, n)


def _ring_count(p: SynthParams, mean_radius: float) -> int:
    if p.ring_vertices is not None:
        return p.ring_vertices
    if p.sampling == "anisotropic":
        return ANISOTROPIC_RING_VERTICES
    edge = _ring_spacing(p) * 2.0 / np.sqrt(3.0)  # equilateral: ring spacing = triangle height
    return max(8, int(round(2.0 * np.pi * mean_radius / edge)))


_radius = radius_profile
_groove = groove_relief


def _cap(ring_xyz: np.ndarray, centre: np.ndarray, t: np.ndarray, e1: np.ndarray, e2: np.ndarray,
         radius: float, edge: float, dome: float, outward_up: bool, first_index: int):
    """Triangulate a disc inside a closed ring; returns (new_vertices, faces, rho_fraction)."""
    rel = ring_xyz - centre
    u0, v0 = rel @ e1, rel @ e2
    r_in = np.hypot(u0, v0).min()
    step = edge
    nx = int(np.ceil(radius / step)) + 1
    gi, gj = np.meshgrid(np.arange(-nx, nx + 1), np.arange(-nx, nx + 1), indexing="ij")
    gu = (gi + 0.5 * (gj % 2)) * step
    gv = gj * step * np.sqrt(3.0) / 2.0
    inside = np.hypot(gu, gv) < r_in - 0.6 * step
    gu, gv = gu[inside], gv[inside]
    pts2 = np.column_stack([np.concatenate([u0, gu]), np.concatenate([v0, gv])])
    tri = Delaunay(pts2).simplices.astype(np.int64)
    a, b, c = pts2[tri[:, 0]], pts2[tri[:, 1]], pts2[tri[:, 2]]
    area = (b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1]) - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0])
    tri = tri[np.abs(area) > 1e-12 * step * step]
    area = area[np.abs(area) > 1e-12 * step * step]
    flip = (area < 0) if outward_up else (area > 0)
    tri[flip] = tri[flip][:, ::-1]
    n_ring = ring_xyz.shape[0]
    rho = np.hypot(gu, gv) / radius
    lift = dome * (1.0 - np.clip(rho, 0.0, 1.0) ** 2)
    new = centre + gu[:, None] * e1 + gv[:, None] * e2 + lift[:, None] * t
    # Map local indices: ring points are existing vertices, grid points are appended.
    index = np.concatenate([first_index[0] + np.arange(n_ring), first_index[1] + np.arange(gu.size)])
    return new, index[tri], rho


def build_column(record: LaminaRecord, gen: np.random.Generator) -> ColumnMesh:
    """Build the column mesh (specimen frame, mm) for a lamina record.

    Parameters
    ----------
    record : LaminaRecord
    gen : numpy.random.Generator
        Draws, in order: radius variation, holes (scanner noise and pose are applied by the caller).

    Returns
    -------
    ColumnMesh
    """
    p = record.params
    ds = _ring_spacing(p)
    s = _ring_positions(record, ds)
    top = float(s[-1])
    n_rings = s.size
    radius = _radius(p, s, top, gen)
    n_around = _ring_count(p, float(radius.mean()))
    relief, depth_eff, half_eff = _groove(record, s, float(s[1] - s[0]))
    r_ring = radius + relief
    centreline = Centreline.from_record(record, s)
    points, t, e1, e2 = centreline.points, centreline.tangents, centreline.e1, centreline.e2

    offset = 0.5 * (np.arange(n_rings) % 2) if p.sampling == "isotropic" else np.zeros(n_rings)
    theta = 2.0 * np.pi * (np.arange(n_around)[None, :] + offset[:, None]) / n_around
    cos_t, sin_t = np.cos(theta), np.sin(theta)
    verts = (points[:, None, :]
             + r_ring[:, None, None] * (cos_t[..., None] * e1[:, None, :] + sin_t[..., None] * e2[:, None, :]))
    verts = verts.reshape(-1, 3)
    coord = np.repeat(s, n_around)

    faces = _wall_faces(n_rings, n_around, p.sampling == "isotropic")
    if p.holes:
        faces, hole_info = _punch_holes(faces, s, theta, r_ring, n_around, p, gen)
    else:
        hole_info = []

    edge = 2.0 * np.pi * float(radius.mean()) / n_around
    parts_v, parts_f, parts_c = [verts], [faces], [coord]
    n_total = verts.shape[0]
    if p.base == "cut":
        new, f, rho = _cap(verts[:n_around], points[0], t[0], e1[0], e2[0], float(r_ring[0]), edge, 0.0,
                           False, (0, n_total))
        # The flat cut at s = 0 lies below the first dome: it shows the substrate and older laminae.
        parts_v.append(new), parts_f.append(f)
        parts_c.append(-p.dome_height_mm * (1.0 - np.clip(rho, 0.0, 1.0) ** 2))
        n_total += new.shape[0]
    if p.top in ("domed", "flat"):
        dome = p.dome_height_mm if p.top == "domed" else 0.0
        first = (n_around * (n_rings - 1), n_total)
        new, f, rho = _cap(verts[first[0]:], points[-1], t[-1], e1[-1], e2[-1], float(r_ring[-1]), edge,
                           dome, True, first)
        parts_v.append(new), parts_f.append(f)
        # A domed cap is the top boundary itself; a flat cut crosses the domes of the last laminae.
        if p.top == "domed":
            parts_c.append(np.full(new.shape[0], top))
        else:
            parts_c.append(top - p.dome_height_mm * (1.0 - np.clip(rho, 0.0, 1.0) ** 2))
        n_total += new.shape[0]

    vertices = np.concatenate(parts_v)
    faces = np.concatenate(parts_f)
    coord = np.concatenate(parts_c)
    if hole_info:
        used = np.zeros(vertices.shape[0], dtype=bool)
        used[faces.ravel()] = True
        remap = np.cumsum(used) - 1
        vertices, coord, faces = vertices[used], coord[used], remap[faces]
    info = {
        "kind": "rings",
        "n_rings": int(n_rings),
        "ring_vertices": int(n_around),
        "ring_spacing_mm": float(s[1] - s[0]),
        "edge_around_mm": float(edge),
        "column_length_mm": top,
        "radius_mm_min": float(radius.min()),
        "radius_mm_max": float(radius.max()),
        "groove_depth_effective_mm": float(np.median(depth_eff)),
        "groove_halfwidth_effective_mm": float(np.median(half_eff)),
        "holes": hole_info,
        # Laminae this thin cannot show a separate groove at this ring spacing (a sampling limit).
        "laminae_thinner_than_two_ring_spacings": int((record.thickness_mm < 2.0 * (s[1] - s[0])).sum()),
    }
    info["sampling_step_mm"] = info["ring_spacing_mm"]
    return ColumnMesh(vertices, faces.astype(np.int64, copy=False), coord, info, centreline)


def _wall_faces(n_rings: int, n_around: int, offset: bool) -> np.ndarray:
    """Triangles between consecutive rings, counter-clockwise seen from outside."""
    i = np.arange(n_rings - 1)[:, None]
    j = np.arange(n_around)[None, :]
    jn = (j + 1) % n_around
    a = i * n_around + j            # (i, j)
    b = i * n_around + jn           # (i, j+1)
    c = (i + 1) * n_around + j      # (i+1, j)
    d = (i + 1) * n_around + jn     # (i+1, j+1)
    a, b, c, d = (np.broadcast_to(x, (n_rings - 1, n_around)) for x in (a, b, c, d))
    even = np.broadcast_to((i % 2 == 0) | (not offset), (n_rings - 1, n_around))
    # Even ring below (or no offsets): (a, b, c) and (b, d, c). Odd ring below: (a, b, d) and (a, d, c).
    f1 = np.where(even[..., None], np.stack([a, b, c], -1), np.stack([a, b, d], -1))
    f2 = np.where(even[..., None], np.stack([b, d, c], -1), np.stack([a, d, c], -1))
    return np.stack([f1, f2], axis=2).reshape(-1, 3).astype(np.int64)


def _punch_holes(faces, s, theta, r_ring, n_around, p, gen):
    """Remove wall faces whose first vertex lies within a small radius of random points."""
    top = s[-1]
    centres_s = gen.uniform(0.1 * top, 0.9 * top, p.holes)
    centres_t = gen.uniform(0.0, 2.0 * np.pi, p.holes)
    radii = gen.uniform(0.15, 0.35, p.holes) * p.radius_mm
    radii = np.minimum(radii, 0.2 * top)
    v = faces[:, 0]
    ring, col = v // n_around, v % n_around
    vs = s[ring]
    vt = theta[ring, col]
    keep = np.ones(faces.shape[0], dtype=bool)
    info = []
    for cs, ct, rr in zip(centres_s, centres_t, radii):
        dt = np.angle(np.exp(1j * (vt - ct)))
        hit = (vs - cs) ** 2 + (dt * p.radius_mm) ** 2 < rr * rr
        keep &= ~hit
        info.append({"height_mm": float(cs), "angle_rad": float(ct), "radius_mm": float(rr),
                     "faces_removed": int(hit.sum())})
    return faces[keep], info
