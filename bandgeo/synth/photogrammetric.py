"""Photogrammetry-like mesh: near-isotropic triangles that know nothing of the laminae.

Construction (specimen frame, mm):

1. The side wall is unrolled to the domain ``u = R_mean theta`` in ``[0, C)`` (``C = 2 pi R_mean``,
   periodic) by ``v = s`` in ``[0, top]`` (arc length along the centreline).
2. Vertices: an equilateral lattice of edge ``edge_length_mm`` turned by a random angle of 20-40 degrees
   (so no lattice row runs along a lamina boundary), adjusted by a tiny rotation and scale so that
   ``(C, 0)`` is a lattice vector (the lattice closes around the column without a seam), then jittered
   by up to 0.15 edge lengths in each coordinate. The two end rows are evenly spaced rings at ``v = 0``
   and ``v = top``.
3. Triangles: the lattice's own triangles in the interior (with this little jitter they are also its
   Delaunay triangles), and a Delaunay triangulation (scipy.spatial.Delaunay, Qhull; periodic seam
   padded) of the two end strips, where the lattice meets the end rows. The seam between the two is
   checked (every edge in exactly two triangles); if it ever disagrees, the whole wall is
   Delaunay-triangulated instead (slower, same kind of mesh).
4. Each vertex is placed on the implicit surface (``bandgeo.synth.surface``): centreline, slowly
   varying radius, grooves widened to half an edge length with their area kept.
5. Caps (saw-cut base, domed or flat top) as in the ring mesh; scanner noise along the normal; then
   ``smoothing_iterations`` Taubin passes (the light smoothing of surface reconstruction); holes.

Memory is a few hundred bytes per vertex; 1 M vertices (2 M faces) takes seconds.
"""
from __future__ import annotations

import math

import numpy as np
from scipy.spatial import Delaunay

from .geometry import ColumnMesh, _cap
from .laminae import LaminaRecord
from .surface import (Centreline, RadiusFunction, drop_unused, groove_relief, punch_holes, taubin,
                      uniform_laplacian)

#: Jitter of the lattice points, fraction of the edge length (each coordinate, uniform).
JITTER = 0.15
#: Points per Delaunay chunk.
CHUNK_POINTS = 150_000


class _Lattice:
    """A periodic equilateral lattice on the unrolled wall: point (i, j) sits at ``i b1 + j b2``, and the
    lattice vector ``n1 b1 + n2 b2`` is exactly ``(C, 0)`` (one turn around the column)."""

    def __init__(self, C: float, edge: float, gen: np.random.Generator):
        alpha = math.radians(gen.uniform(20.0, 40.0))
        b = edge * np.array([[math.cos(alpha), math.cos(alpha + math.pi / 3)],
                             [math.sin(alpha), math.sin(alpha + math.pi / 3)]])  # columns b1, b2
        n = np.rint(np.linalg.solve(b, [C, 0.0]))
        if not n.any():
            n = np.array([1.0, 0.0])
        w = b @ n
        turn = -math.atan2(w[1], w[0])
        scale = C / math.hypot(w[0], w[1])
        rot = scale * np.array([[math.cos(turn), -math.sin(turn)], [math.sin(turn), math.cos(turn)]])
        self.b = rot @ b
        self.binv = np.linalg.inv(self.b)
        self.period = n.astype(np.int64)
        self.C = C
        self.edge = edge * scale
        self.angle_deg = math.degrees(alpha + turn)

    def uv(self, i, j):
        return self.b[0, 0] * i + self.b[0, 1] * j, self.b[1, 0] * i + self.b[1, 1] * j

    def canonical(self, i, j):
        """Reduce lattice indices to one representative per point of the cylinder, in exact integer
        arithmetic: the one with ``0 <= (i, j) . (n1, n2) < n1^2 + n2^2``."""
        n1, n2 = int(self.period[0]), int(self.period[1])
        k = np.floor_divide(i * n1 + j * n2, n1 * n1 + n2 * n2)
        return i - k * n1, j - k * n2

    def points(self, v0: float, v1: float):
        """Integer indices (i, j) of the canonical points with v in [v0, v1)."""
        out_i, out_j = [], []
        density = 2.0 / (math.sqrt(3.0) * self.edge ** 2)
        chunk_h = max(4.0 * self.edge, CHUNK_POINTS / (density * self.C))
        a = v0
        while a < v1:
            b = min(v1, a + chunk_h)
            ij = self.binv @ np.array([[0.0, self.C, 0.0, self.C], [a, a, b, b]])
            i = np.arange(math.floor(ij[0].min()) - 1, math.ceil(ij[0].max()) + 2)
            j = np.arange(math.floor(ij[1].min()) - 1, math.ceil(ij[1].max()) + 2)
            gi, gj = np.meshgrid(i, j, indexing="ij")
            gi, gj = gi.ravel(), gj.ravel()
            u, v = self.uv(gi, gj)
            ok = (u >= -0.01 * self.C) & (u < 1.01 * self.C) & (v >= a) & (v < b)
            ci, cj = self.canonical(gi[ok], gj[ok])
            _, first = np.unique(_keys(ci, cj), return_index=True)
            out_i.append(ci[first])
            out_j.append(cj[first])
            a = b
        return np.concatenate(out_i), np.concatenate(out_j)


def _keys(i, j):
    return (i.astype(np.int64) << 32) + (j.astype(np.int64) & 0xFFFFFFFF)


def _lattice_faces(lat: _Lattice, i: np.ndarray, j: np.ndarray, index: np.ndarray) -> np.ndarray:
    """Lattice triangles (i,j)(i+1,j)(i,j+1) and (i+1,j)(i+1,j+1)(i,j+1) whose corners all exist,
    as vertex ids (``index[k]`` is the vertex id of point (i[k], j[k]))."""
    key = _keys(i, j)
    order = np.argsort(key)
    skey, sid = key[order], index[order]

    def lookup(ii, jj):
        k = _keys(*lat.canonical(ii, jj))
        pos = np.clip(np.searchsorted(skey, k), 0, skey.size - 1)
        return np.where(skey[pos] == k, sid[pos], -1)

    a = index
    b = lookup(i + 1, j)
    c = lookup(i, j + 1)
    d = lookup(i + 1, j + 1)
    f1 = np.column_stack([a, b, c])
    f2 = np.column_stack([b, d, c])
    faces = np.concatenate([f1[(b >= 0) & (c >= 0)], f2[(b >= 0) & (c >= 0) & (d >= 0)]])
    return faces


def _delaunay_strip(u, v, ids, C, edge, keep_lo, keep_hi) -> np.ndarray:
    """Delaunay triangles (periodic in u) of the given points with centroid v in [keep_lo, keep_hi)."""
    pad = 4.0 * edge
    left, right = u > C - pad, u < pad
    gidx = np.concatenate([ids, ids[left], ids[right]])
    pts = np.column_stack([np.concatenate([u, u[left] - C, u[right] + C]),
                           np.concatenate([v, v[left], v[right]])])
    tri = Delaunay(pts).simplices
    cu, cv = pts[tri, 0].mean(axis=1), pts[tri, 1].mean(axis=1)
    tri = tri[(cu >= 0) & (cu < C) & (cv >= keep_lo) & (cv < keep_hi)]
    p0, p1, p2 = pts[tri[:, 0]], pts[tri[:, 1]], pts[tri[:, 2]]
    area = (p1[:, 0] - p0[:, 0]) * (p2[:, 1] - p0[:, 1]) - (p1[:, 1] - p0[:, 1]) * (p2[:, 0] - p0[:, 0])
    good = np.abs(area) > 1e-9 * edge * edge
    g = gidx[tri[good]]
    flip = area[good] < 0
    g[flip] = g[flip][:, ::-1]
    return g


def _seam_ok(faces: np.ndarray, v: np.ndarray, n_ring: int, near) -> bool:
    """True when the faces near a cut tile the strip: no directed edge twice, no edge in more than two
    triangles, and the only edges in one triangle (with both ends in ``near(v)``) are the ``n_ring``
    edges of the end row."""
    e = np.concatenate([faces[:, [0, 1]], faces[:, [1, 2]], faces[:, [2, 0]]])
    directed = np.sort(_keys(e[:, 0], e[:, 1]))
    if (np.diff(directed) == 0).any():
        return False
    lo, hi = np.minimum(e[:, 0], e[:, 1]), np.maximum(e[:, 0], e[:, 1])
    key = _keys(lo, hi)
    order = np.argsort(key, kind="stable")
    key = key[order]
    starts = np.flatnonzero(np.concatenate([[True], key[1:] != key[:-1], [True]]))
    counts = np.diff(starts)
    if (counts > 2).any():
        return False
    first = order[starts[:-1]]
    single = first[counts == 1]
    inside = near(v[lo[single]]) & near(v[hi[single]])
    return int(inside.sum()) == n_ring


def _wall_mesh(C: float, top: float, edge: float, gen: np.random.Generator):
    """Vertices (u, v) of the unrolled wall and its triangles; end rows first/last (n_b each)."""
    lat = _Lattice(C, edge, gen)
    i, j = lat.points(-edge, top + edge)
    u, v = lat.uv(i, j)
    u = (u + gen.uniform(-JITTER, JITTER, u.size) * lat.edge) % C
    v = v + gen.uniform(-JITTER, JITTER, v.size) * lat.edge
    keep = (v >= 0.5 * edge) & (v <= top - 0.5 * edge)
    i, j, u, v = i[keep], j[keep], u[keep], v[keep]
    order = np.argsort(v, kind="stable")
    i, j, u, v = i[order], j[order], u[order], v[order]
    n_b = max(8, int(round(C / edge)))
    rows = [(np.arange(n_b) + gen.uniform()) * (C / n_b) for _ in range(2)]
    u = np.concatenate([rows[0], u, rows[1]])
    v = np.concatenate([np.zeros(n_b), v, np.full(n_b, top)])
    n = u.size
    lattice_ids = np.arange(n_b, n - n_b)
    method = "lattice + Delaunay ends"
    faces = None
    if top > 16.0 * edge:
        interior = _lattice_faces(lat, i, j, lattice_ids)
        cv = v[interior].mean(axis=1)
        # Where the lattice meets the Delaunay ends, the two must agree; with this little jitter they
        # nearly always do, and where a rare Delaunay flip sits on the cut, another cut avoids it.
        for cut in (3.0 * edge, 3.37 * edge, 3.71 * edge, 4.13 * edge):
            lo = np.searchsorted(v, cut + 4.0 * edge, side="right")
            hi = np.searchsorted(v, top - cut - 4.0 * edge, side="left")
            bottom = _delaunay_strip(u[:lo], v[:lo], np.arange(lo), C, edge, -np.inf, cut)
            topf = _delaunay_strip(u[hi:], v[hi:], np.arange(hi, n), C, edge, top - cut, np.inf)
            band = 3.0 * edge
            near_lo = interior[(cv >= cut) & (cv < cut + band)]
            near_hi = interior[(cv < top - cut) & (cv >= top - cut - band)]
            if _seam_ok(np.concatenate([bottom, near_lo]), v, n_b, lambda x: x < cut + 1.5 * edge) and \
                    _seam_ok(np.concatenate([topf, near_hi]), v, n_b, lambda x: x > top - cut - 1.5 * edge):
                faces = np.concatenate([bottom, interior[(cv >= cut) & (cv < top - cut)], topf])
                break
    if faces is None:  # short column, or the seam disagreed: one Delaunay of everything (slower)
        method = "Delaunay"
        faces = _delaunay_strip(u, v, np.arange(n), C, edge, -np.inf, np.inf)
    return u, v, faces.astype(np.int64), n_b, lat.angle_deg, method


def build_photogrammetric(record: LaminaRecord, gen: np.random.Generator, noise_gen: np.random.Generator,
                          progress=None) -> ColumnMesh:
    """Build the photogrammetry-like mesh (specimen frame, mm) of a lamina record.

    ``gen`` draws, in order: the radius variation, the lattice angle and jitter, the end-row phases,
    the holes; ``noise_gen`` the scanner noise."""
    p = record.params
    e = float(p.edge_length_mm)
    top = float(record.boundary_heights_mm[-1])
    step_c = min(e, p.mean_thickness_mm / 4.0) / 2.0
    grid = np.linspace(0.0, top, max(2, int(np.ceil(top / step_c)) + 1))
    centreline = Centreline.from_record(record, grid)
    radius = RadiusFunction(p, top, gen, step_c)
    r_mean = float(radius.r.mean())
    C = 2.0 * math.pi * r_mean
    if C < 8.0 * e * p.edge_aspect or top < 3.0 * e:
        from ..errors import ParameterError
        raise ParameterError(f"edge_length_mm {e:g} (x edge_aspect {p.edge_aspect:g} around) is too coarse for "
                             f"a column {2 * r_mean:.3g} mm across and {top:.3g} mm long; expected at most "
                             f"{min(C / 8 / p.edge_aspect, top / 3):.3g} mm")
    if progress is not None:
        progress("triangulating the wall", 0, 1)
    aspect = float(p.edge_aspect)
    u, v, faces, n_b, angle, method = _wall_mesh(C / aspect, top, e, gen)
    u = u * aspect  # stretched around the column (edge_aspect > 1), in the lattice's own frame
    n_wall = u.size

    s = v
    theta = 2.0 * math.pi * u / C
    c, t, e1, e2 = centreline.at(s)
    relief, depth_eff, half_eff = groove_relief(record, s, 0.5 * e)
    r = radius(s) + relief
    radial = np.cos(theta)[:, None] * e1 + np.sin(theta)[:, None] * e2
    del e1, e2
    wall = c + r[:, None] * radial
    del c

    parts_v, parts_f, parts_c, parts_n = [wall], [faces], [s], [radial]
    n_total = n_wall
    top_ring = np.arange(n_wall - n_b, n_wall)
    # The caps (saw cut, last dome) carry no laminae: sampled twice as coarsely inside (Delaunay grades
    # from the wall's end row to that spacing).
    cap_step = max(2.0 * e, e * aspect)
    if p.base == "cut":
        c0, t0, f1, f2 = (a[0] for a in centreline.at(np.array([0.0])))
        new, f, rho = _cap(wall[:n_b], c0, t0, f1, f2, float(r[:n_b].mean()), cap_step, 0.0, False,
                           (0, n_total))
        parts_v.append(new), parts_f.append(f), parts_n.append(np.tile(-t0, (new.shape[0], 1)))
        parts_c.append(-p.dome_height_mm * (1.0 - np.clip(rho, 0.0, 1.0) ** 2))
        n_total += new.shape[0]
    if p.top in ("domed", "flat"):
        dome = p.dome_height_mm if p.top == "domed" else 0.0
        c1, t1, f1, f2 = (a[0] for a in centreline.at(np.array([top])))
        new, f, rho = _cap(wall[top_ring], c1, t1, f1, f2, float(r[top_ring].mean()), cap_step, dome, True,
                           (int(top_ring[0]), n_total))
        parts_v.append(new), parts_f.append(f), parts_n.append(np.tile(t1, (new.shape[0], 1)))
        if p.top == "domed":
            parts_c.append(np.full(new.shape[0], top))
        else:
            parts_c.append(top - p.dome_height_mm * (1.0 - np.clip(rho, 0.0, 1.0) ** 2))
        n_total += new.shape[0]
    vertices = np.concatenate(parts_v)
    faces = np.concatenate(parts_f)
    coord = np.concatenate(parts_c)
    normal = np.concatenate(parts_n)
    del parts_v, parts_n, wall, radial
    on_wall = np.zeros(vertices.shape[0], bool)
    on_wall[:n_wall] = True
    theta_all = np.zeros(vertices.shape[0])
    theta_all[:n_wall] = theta

    noise = noise_gen.standard_normal(vertices.shape[0]) * p.scanner_noise_mm if p.scanner_noise_mm > 0 \
        else np.zeros(vertices.shape[0])
    vertices += noise[:, None] * normal
    del normal
    info_smooth = {"smoothing_iterations": int(p.smoothing_iterations)}
    if p.smoothing_iterations > 0:
        if progress is not None:
            progress("smoothing", 0, 1)
        adj = uniform_laplacian(faces, vertices.shape[0])
        vertices = taubin(vertices, adj, p.smoothing_iterations)
        # The smoothing is linear: apply it to the noise and to the groove relief alone to report what
        # survives of each (the relief as a least-squares gain on the wall).
        noise_s = taubin(noise, adj, p.smoothing_iterations)
        rel = np.zeros(vertices.shape[0])
        rel[:n_wall] = relief
        rel_s = taubin(rel, adj, p.smoothing_iterations)
        inner = on_wall.copy()
        inner[:n_wall] &= (s > 2 * e) & (s < top - 2 * e)
        denom = float((rel[inner] ** 2).sum())
        info_smooth["groove_gain_after_smoothing"] = float((rel_s[inner] * rel[inner]).sum() / denom) \
            if denom > 0 else 1.0
        info_smooth["noise_mm_after_smoothing"] = float(noise_s[inner].std()) if inner.any() else 0.0
        del adj
    else:
        info_smooth["groove_gain_after_smoothing"] = 1.0
        info_smooth["noise_mm_after_smoothing"] = float(p.scanner_noise_mm)

    hole_info = []
    if p.holes:
        faces, hole_info = punch_holes(faces, coord, theta_all, on_wall, p, top, gen)
        vertices, faces, coord = drop_unused(vertices, faces, coord)
    edges = vertices[faces[:, [1, 2, 0]]] - vertices[faces]
    lengths = np.linalg.norm(edges, axis=2)
    step = e * math.sqrt(3.0) / 2.0
    info = {
        "kind": "photogrammetric",
        "edge_length_mm_target": e,
        "edge_length_mm_mean": float(lengths.mean()),
        "edge_length_mm_rms_spread": float(lengths.std() / lengths.mean()),
        "lattice_angle_deg": float(angle),
        "edge_aspect": aspect,
        "triangulation": method,
        "sampling_step_mm": step,
        "ring_spacing_mm": step,
        "column_length_mm": top,
        "radius_mm_min": float(radius.r.min()),
        "radius_mm_max": float(radius.r.max()),
        # What the mesh shows: the groove widened to the sampling, then attenuated by the smoothing.
        "groove_depth_effective_mm": float(np.median(depth_eff)) * info_smooth["groove_gain_after_smoothing"],
        "groove_depth_before_smoothing_mm": float(np.median(depth_eff)),
        "groove_halfwidth_effective_mm": float(np.median(half_eff)),
        "holes": hole_info,
        "laminae_thinner_than_two_sampling_steps": int((record.thickness_mm < 2.0 * step).sum()),
        **info_smooth,
    }
    return ColumnMesh(vertices, faces, coord, info, centreline, noise_applied=True)
