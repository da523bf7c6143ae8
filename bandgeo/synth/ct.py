"""CT-like mesh: the column voxelised and its isosurface extracted by marching cubes, in chunks.

Construction (specimen frame, mm):

1. A voxel grid (edge ``voxel_size_mm``) aligned with the specimen axes covers the column. The solid
   is ``f(x) < 0`` with ``f = max(rho - R(s), -s, s - top - dome(rho))``: ``rho`` is the distance from
   the centreline in the plane perpendicular to it, ``s`` that plane's arc length
   (:meth:`Centreline.locate`), ``R(s)`` the radius with its grooves (widened to half a voxel with
   their area kept) and ``dome`` the top lamina's rise. ``f`` is close to a signed distance (mm).
2. ``f`` is computed exactly only in a band about the wall (and on the slabs that hold the caps);
   voxels far inside or outside get a constant. CT noise: Gaussian noise of standard deviation
   ``scanner_noise_mm`` added to ``f`` in the band (a noisy density, so a bumpy isosurface).
3. ``skimage.measure.marching_cubes`` runs on chunks of slabs along z. Consecutive chunks share one
   slab (the same array, computed once), so the vertices on the shared plane coincide; they are welded
   by nearest-neighbour matching (scipy cKDTree, tolerance 2e-4 voxel; values within 2e-3 voxel of
   the level are nudged off it so that no two seam vertices are closer than that). The staircase of the voxel grid
   stays in the mesh, as in real micro-CT meshes.
4. An open base or top removes the cap faces afterwards; holes as for the other kinds.
"""
from __future__ import annotations

import math

import numpy as np

from .geometry import ColumnMesh
from .laminae import LaminaRecord
from .surface import Centreline, RadiusFunction, drop_unused, groove_relief, punch_holes

#: Voxels per marching-cubes chunk (about 16 bytes of working memory each).
CHUNK_VOXELS = 6_000_000


class _Solid:
    """The implicit solid; ``f(points)`` in mm, negative inside."""

    def __init__(self, record: LaminaRecord, centreline: Centreline, radius: RadiusFunction, ds: float):
        p = record.params
        self.record, self.cl, self.radius = record, centreline, radius
        self.top = float(record.boundary_heights_mm[-1])
        self.ds = ds
        self.dome = p.dome_height_mm if p.top == "domed" else 0.0
        # Radius with grooves on a fine grid (interpolated per voxel).
        step = min(ds, p.mean_thickness_mm / 8.0)
        self.grid = np.linspace(0.0, self.top, max(2, int(np.ceil(self.top / step)) + 1))
        relief, self.depth_eff, self.half_eff = groove_relief(record, self.grid, ds)
        self.r_grid = radius(self.grid) + relief

    def r_of_s(self, s):
        return np.interp(s, self.grid, self.r_grid)

    def f(self, x: np.ndarray, s0: float) -> np.ndarray:
        """``f`` at points ``x`` near the centreline plane at arc length ``s0`` (one slab's guess)."""
        s, rho = self.cl.locate_near(x, s0)
        r = self.r_of_s(s)
        f = np.maximum(rho - r, -s)
        lift = self.dome * np.clip(1.0 - (rho / r) ** 2, 0.0, None)
        return np.maximum(f, s - self.top - lift)


def build_ct(record: LaminaRecord, gen: np.random.Generator, noise_gen: np.random.Generator,
             progress=None) -> ColumnMesh:
    """Build the CT-like marching-cubes mesh (specimen frame, mm) of a lamina record.

    ``gen`` draws the radius variation, then the holes; ``noise_gen`` the density noise."""
    from scipy.spatial import cKDTree
    from skimage import measure

    p = record.params
    vox = float(p.voxel_size_mm)
    top = float(record.boundary_heights_mm[-1])
    step_c = min(vox, p.mean_thickness_mm / 4.0) / 2.0
    grid = np.linspace(0.0, top, max(2, int(np.ceil(top / step_c)) + 1))
    cl = Centreline.from_record(record, grid)
    radius = RadiusFunction(p, top, gen, step_c)
    solid = _Solid(record, cl, radius, 0.5 * vox)
    r_max = float(radius.r.max()) + vox
    noise = float(p.scanner_noise_mm)
    # Voxels are classified from cheap bounds (distance from the axis point at the slab's height,
    # arc length along the local tangent); only the band between the bounds gets the exact f.
    margin = 2.0 * vox + 3.0 * noise + 0.005 * r_max
    far = margin + vox  # value given to voxels surely inside (-far) or outside (+far)
    dome = p.dome_height_mm if p.top == "domed" else 0.0

    # Bounding box of the solid: the end rings and the dome apex, padded.
    pts = cl.points
    lo = pts.min(axis=0) - (r_max + p.dome_height_mm + 3 * vox)
    hi = pts.max(axis=0) + (r_max + p.dome_height_mm + 3 * vox)
    origin = np.floor(lo / vox) * vox
    nz = int(np.ceil((hi[2] - origin[2]) / vox)) + 1
    z_of = origin[2] + vox * np.arange(nz)
    tilt = np.arccos(np.clip(cl.tangents[:, 2], -1.0, 1.0))
    s_of_z_z = cl.points[:, 2]
    cos_tilt = np.cos(tilt)

    area_xy = ((hi[0] - lo[0]) / vox) * ((hi[1] - lo[1]) / vox)
    per_chunk = max(2, int(CHUNK_VOXELS / max(area_xy * 0.5, 1.0)))

    verts_all, faces_all = [], []
    n_vert = 0
    prev = None  # (slab array, (ix0, iy0), global ids and xy of the top-plane vertices)
    welded = unmatched = 0
    k0 = 0
    n_chunks = 0
    while k0 < nz - 1:
        k1 = min(nz - 1, k0 + per_chunk)
        z0c, z1c = z_of[k0], z_of[k1]
        # xy box: centreline points within reach of these heights, plus the radius.
        near = (s_of_z_z >= z0c - r_max - margin) & (s_of_z_z <= z1c + r_max + margin)
        cpts = cl.points[near] if near.any() else cl.points[[0, -1]]
        bx0 = int(np.floor((cpts[:, 0].min() - r_max - margin - origin[0]) / vox)) - 1
        bx1 = int(np.ceil((cpts[:, 0].max() + r_max + margin - origin[0]) / vox)) + 2
        by0 = int(np.floor((cpts[:, 1].min() - r_max - margin - origin[1]) / vox)) - 1
        by1 = int(np.ceil((cpts[:, 1].max() + r_max + margin - origin[1]) / vox)) + 2
        nx, ny = bx1 - bx0, by1 - by0
        vol = np.full((k1 - k0 + 1, ny, nx), far, dtype=np.float32)
        first_new = 0
        if prev is not None:
            pslab, (px0, py0) = prev[0], prev[1]
            # Copy the shared slab on the intersection of the two boxes (both hold the whole section).
            ix0, ix1 = max(bx0, px0), min(bx1, px0 + pslab.shape[1])
            iy0, iy1 = max(by0, py0), min(by1, py0 + pslab.shape[0])
            vol[0, iy0 - by0:iy1 - by0, ix0 - bx0:ix1 - bx0] = pslab[iy0 - py0:iy1 - py0, ix0 - px0:ix1 - px0]
            first_new = 1
        xs = origin[0] + vox * np.arange(bx0, bx1)
        ys = origin[1] + vox * np.arange(by0, by1)
        gx, gy = np.meshgrid(xs, ys)
        for kk in range(first_new, k1 - k0 + 1):
            z = z_of[k0 + kk]
            s0 = float(np.interp(z, s_of_z_z, cl.s))
            c, t = cl.point_tangent(np.array([s0]))
            c, t = c[0], t[0] / np.linalg.norm(t[0])
            rho_xy = np.hypot(gx - c[0], gy - c[1])
            s_lin = s0 + (gx - c[0]) * t[0] + (gy - c[1]) * t[1] + (z - c[2]) * t[2]
            r0 = float(radius(np.array([s0]))[0])
            ct = float(np.interp(s0, cl.s, cos_tilt))
            inside = ((rho_xy < r0 - p.groove_depth_mm - margin) & (s_lin > margin)
                      & (s_lin < top - margin))
            outside = ((rho_xy * ct > r0 + margin) | (s_lin < -margin) | (s_lin > top + dome + margin))
            vol[kk][inside] = -far
            band = ~(inside | outside)
            if band.any():
                q = np.column_stack([gx[band], gy[band], np.full(int(band.sum()), z)])
                f = solid.f(q, s0)
                if noise > 0:
                    f = f + noise_gen.standard_normal(f.size) * noise
                # No value exactly on the level: a vertex on a grid point would be shared by several
                # cube edges, and the seam welding below matches vertices by position.
                f = np.where(np.abs(f) < 2e-3 * vox, 2e-3 * vox, f)
                vol[kk][band] = np.clip(f, -far, far)
        # Marching cubes on -f (skimage treats larger values as inside with gradient_direction
        # 'descent'); vertices in voxel index units (z, y, x).
        if vol.min() < 0.0 < vol.max():
            v, faces, _, _ = measure.marching_cubes(-vol, level=0.0)
        else:  # no surface in this chunk
            v, faces = np.zeros((0, 3), np.float32), np.zeros((0, 3), np.int64)
        v = v.astype(np.float64)
        gv = np.column_stack([v[:, 2] + bx0, v[:, 1] + by0, v[:, 0] + k0])  # global index units (x, y, z)
        ids = np.arange(n_vert, n_vert + gv.shape[0])
        if prev is not None and prev[2][0].size and gv.shape[0]:
            on_plane = np.abs(v[:, 0]) < 1e-6
            if on_plane.any():
                tree = cKDTree(prev[2][1])
                d, j = tree.query(gv[on_plane, :2], distance_upper_bound=2e-4)
                hit = np.isfinite(d)
                sel = np.flatnonzero(on_plane)
                ids[sel[hit]] = prev[2][0][j[hit]]
                welded += int(hit.sum())
                unmatched += int((~hit).sum())
        # Renumber the new (unwelded) vertices consecutively.
        new = ids >= n_vert
        ids[new] = n_vert + np.arange(int(new.sum()))
        verts_all.append(gv[new])
        faces_all.append(ids[faces])
        n_vert += int(new.sum())
        top_plane = np.abs(v[:, 0] - (k1 - k0)) < 1e-6
        prev = (vol[-1].copy(), (bx0, by0), (ids[top_plane], gv[top_plane, :2]))
        n_chunks += 1
        if progress is not None:
            progress("marching cubes", k1, nz - 1)
        del vol, v, faces, gv
        k0 = k1

    vertices = np.concatenate(verts_all) * vox + origin
    faces = np.concatenate(faces_all).astype(np.int64)
    del verts_all, faces_all
    # Drop triangles that welding made degenerate (two corners on one vertex).
    good = (faces[:, 0] != faces[:, 1]) & (faces[:, 1] != faces[:, 2]) & (faces[:, 2] != faces[:, 0])
    faces = faces[good]

    s, rho, theta = cl.locate(vertices)
    r_here = solid.r_of_s(s)
    cap = (rho < r_here - 1.5 * vox) & ((s < 1.5 * vox) | (s > top - 1.5 * vox))
    if p.base == "open":
        bottom = cap & (s < 0.5 * top)
        faces = faces[~bottom[faces].all(axis=1)]
    if p.top == "open":
        upper = cap & (s > 0.5 * top)
        faces = faces[~upper[faces].all(axis=1)]
    on_wall = ~cap
    coord = s.copy()
    hole_info = []
    if p.holes:
        faces, hole_info = punch_holes(faces, s, theta, on_wall, p, top, gen)
    vertices, faces, coord = drop_unused(vertices, faces, coord)
    info = {
        "kind": "ct",
        "voxel_size_mm": vox,
        "chunks": n_chunks,
        "seam_vertices_welded": welded,
        "seam_vertices_unmatched": unmatched,
        "sampling_step_mm": vox,
        "ring_spacing_mm": vox,
        "column_length_mm": top,
        "radius_mm_min": float(radius.r.min()),
        "radius_mm_max": float(radius.r.max()),
        "groove_depth_effective_mm": float(np.median(solid.depth_eff)),
        "groove_halfwidth_effective_mm": float(np.median(solid.half_eff)),
        "density_noise_mm": noise,
        "holes": hole_info,
        "laminae_thinner_than_two_sampling_steps": int((record.thickness_mm < 2.0 * vox).sum()),
    }
    return ColumnMesh(vertices, faces, coord, info, cl, noise_applied=True)
