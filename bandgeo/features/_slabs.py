"""The engine of :func:`bandgeo.features.compute_features`: one pass for a mesh that fits, overlapping
slabs along the growth axis for a large one.

Pass 1 (per slab) computes the one-ring operators (cotangent Laplacian, angle deficit, mixed areas,
normals, boundary), the noise residual and the axial spread of one random-walk step for the slab's own
("core") vertices. Then, on whole-mesh vectors, the normals are oriented, the band spacing is estimated
and the scales (diffusion step counts) chosen. Pass 2 (per slab) runs the diffusion steps.

Exactness: a slab is taken as every face with a vertex within ``margin`` of its core along the axis.
Every vertex within ``margin`` then has all its faces, hence its complete one-ring, adjacency row and
boundary status. A value at a core vertex after ``T`` random-walk steps depends only on the rows of
vertices within ``T - 1`` edges, which lie within ``(T - 1) * max_step`` along the axis (``max_step``:
the longest axial extent of a face), so ``margin = (T + 1) * max_step`` makes the slab result the
whole-mesh result. Vertices keep their relative order, so even the sums run in the same order.
"""
from __future__ import annotations

import numpy as np

from ..progress import report
from .curvature import (FACE_BLOCK, adjacency_and_boundary, one_ring_curvature, orient_outward,
                        rough_axis, sampling_along)
from .spacing import estimate_spacing_from_profile, relief_profiles


def _face_ranges(s, f, block=FACE_BLOCK):
    """Per-face min and max of ``s`` over its vertices, and the largest face extent.

    Kept in float32 (half the memory on 40 M faces): the rounding, ~1e-7 of the coordinates, is far
    below the half step of slack in every margin, so a slab still holds every face it needs.
    """
    m = len(f)
    fmin = np.empty(m, dtype=np.float32)
    fmax = np.empty(m, dtype=np.float32)
    for a in range(0, m, block):
        fb = f[a:a + block]
        sa, sb, sc = s[fb[:, 0]], s[fb[:, 1]], s[fb[:, 2]]
        np.minimum(np.minimum(sa, sb), sc, out=fmin[a:a + block])
        np.maximum(np.maximum(sa, sb), sc, out=fmax[a:a + block])
    step = 0.0
    for a in range(0, m, block):
        step = max(step, float((fmax[a:a + block].astype(np.float64) - fmin[a:a + block]).max()))
    return fmin, fmax, step * (1.0 + 1e-6)


class _Slabs:
    """The slabs of a mesh along ``s`` (one slab holding everything when it fits)."""

    def __init__(self, v, f, s, chunk_faces):
        self.v, self.f, self.s = v, f, s
        self.n, self.m = len(v), len(f)
        self.count = max(1, int(np.ceil(self.m / max(int(chunk_faces), 1))))
        if self.count > 1:
            self.fmin, self.fmax, self.max_step = _face_ranges(s, f)
            qs = np.quantile(s, np.linspace(0.0, 1.0, self.count + 1))
            self.bounds = np.concatenate([[-np.inf], qs[1:-1], [np.inf]])
            self.mark = np.zeros(self.n, dtype=bool)
            self.local = np.empty(self.n, dtype=np.int64)
        else:
            self.max_step = float("nan")

    def get(self, k, margin):
        """(global vertex indices, local faces, core mask) of slab ``k`` with ``margin`` along ``s``."""
        if self.count == 1:
            return None, self.f, None
        lo, hi = self.bounds[k], self.bounds[k + 1]
        sel = np.flatnonzero((self.fmax >= lo - margin) & (self.fmin <= hi + margin))
        fs = self.f[sel]
        del sel
        self.mark[fs.ravel()] = True
        verts = np.flatnonzero(self.mark)
        self.mark[verts] = False
        self.local[verts] = np.arange(len(verts))
        fl = self.local[fs]
        del fs
        sv = self.s[verts]
        core = (sv >= lo) & (sv < hi)
        return verts, fl, core


def compute_in_slabs(v, f, choose_scales, chunk_faces, max_steps, progress=None) -> dict:
    """Everything :func:`bandgeo.features.compute_features` needs, in one piece or in slabs.

    ``choose_scales(est_spacing, info, samp) -> (scales, spacing, method)`` picks the scales once the
    spacing is estimated.
    """
    n = len(v)
    axis = rough_axis(v)
    s = v @ axis
    slabs = _Slabs(v, f, s, chunk_faces)
    # ---- pass 1: one-ring operators, noise residual, step spread (per slab, core vertices)
    normals = np.empty((n, 3))
    h0 = np.empty(n)
    gauss = np.empty(n)
    area = np.empty(n)
    boundary = np.empty(n, dtype=bool)
    r_all = np.empty(n)
    r_s = np.empty(n)
    deg = np.empty(n)
    ea2_sum, entries = 0.0, 0
    keep_adj = None
    margin1 = 2.5 * slabs.max_step if slabs.count > 1 else 0.0
    for k in range(slabs.count):
        report(progress, "curvature: one ring", k / slabs.count, 4)
        verts, fl, core = slabs.get(k, margin1)
        vs = v if verts is None else v[verts]
        nl = len(vs)
        if nl >= PARALLEL_DIFFUSION_VERTICES:
            # the adjacency (sparse conversions that release the GIL) is built in a thread while the
            # one-ring sums run here; the boundary it gives is read only at their end
            from concurrent.futures import ThreadPoolExecutor

            with ThreadPoolExecutor(max_workers=1, thread_name_prefix="bandgeo-adjacency") as pool:
                built = pool.submit(adjacency_and_boundary, fl, nl, np.float64)
                lap, g, ar, nrm, _ = one_ring_curvature(vs, fl, boundary=lambda: built.result()[1])
                adj, bnd = built.result()
        else:
            adj, bnd = adjacency_and_boundary(fl, nl, dtype=np.float64)
            lap, g, ar, nrm, _ = one_ring_curvature(vs, fl, boundary=bnd)
        hu = -0.5 * np.einsum("ij,ij->i", lap, nrm)
        del lap
        valid = ~bnd & np.isfinite(hu) & np.isfinite(g)
        # noise residual (bandgeo.features.noise_estimate, same arithmetic): offset from the neighbour
        # mean along the normal, and its neighbour sum over valid vertices
        dg = np.diff(adj.indptr).astype(np.float64)
        mean_nb = (adj @ vs) / np.maximum(dg, 1)[:, None]
        rr = np.einsum("ij,ij->i", vs - mean_nb, nrm)
        del mean_nb
        rs = adj @ np.where(valid, rr, 0.0)
        # axial spread of one random-walk step: squared axial edge lengths over the core rows
        p = s if verts is None else s[verts]
        rows = np.repeat(np.arange(nl, dtype=np.int32 if nl < 2 ** 31 else np.int64), np.diff(adj.indptr))
        d2 = (p[rows] - p[adj.indices]) ** 2
        if core is None:
            ea2_sum += float(d2.sum())
            entries += len(d2)
            normals[:], h0[:], gauss[:], area[:], boundary[:] = nrm, hu, g, ar, bnd
            r_all[:], r_s[:], deg[:] = rr, rs, dg
            keep_adj = adj
        else:
            in_core = core[rows]
            ea2_sum += float(d2[in_core].sum())
            entries += int(np.count_nonzero(in_core))
            idx = verts[core]
            normals[idx], h0[idx], gauss[idx], area[idx], boundary[idx] = \
                nrm[core], hu[core], g[core], ar[core], bnd[core]
            r_all[idx], r_s[idx], deg[idx] = rr[core], rs[core], dg[core]
        del rows, d2, adj, nrm, hu, g, ar, bnd, rr, rs, dg
    # ---- whole mesh: orientation, validity, noise, band spacing, scales
    sign = orient_outward(v, normals, axis)
    normals *= sign
    h0 *= sign
    valid = ~boundary & np.isfinite(h0) & np.isfinite(gauss)
    h0 = np.where(valid, h0, 0.0)
    gauss = np.where(valid, gauss, 0.0)
    noise = _noise(r_all, r_s, deg, valid, sign)
    del r_all, r_s
    report(progress, "curvature: band spacing", 1, 4)
    samp = sampling_along(v, f, axis)
    prof = relief_profiles(v, h0, valid, axis, samp, normals=normals)
    est_spacing, info = estimate_spacing_from_profile(prof)
    del prof
    info["sampling_along_mm"] = samp
    info["axis"] = axis.tolist()
    scales, spacing, method = choose_scales(est_spacing, info, samp)
    ea2 = ea2_sum / max(entries, 1)
    dmean = float(deg.mean())
    del deg
    step_var = ea2 * dmean / (dmean + 1.0)
    targets = []
    for sc in scales:
        t = 0 if sc <= 0 else int(np.ceil(sc * sc / max(step_var, 1e-300)))
        t = max(t, 1 if sc > 0 else 0)
        targets.append(min(t, max_steps))
    # ---- pass 2: diffusion (per slab)
    report(progress, "curvature: scales", 2, 4)
    w_area = np.where(valid, area, 0.0)
    del area
    H = np.empty((n, len(scales)))
    K = np.empty((n, len(scales)))
    reach = max(max(targets), 1)
    margin2 = (reach + 1.5) * slabs.max_step if slabs.count > 1 else 0.0
    for k in range(slabs.count):
        verts, fl, core = slabs.get(k, margin2)
        if verts is None:
            adj = keep_adj
            keep_adj = None
            hk, kk = _diffuse(adj, h0, gauss, w_area, valid, targets)
            H[:], K[:] = hk, kk
        else:
            adj, _ = adjacency_and_boundary(fl, len(verts), dtype=np.float64)
            del fl
            hk, kk = _diffuse(adj, h0[verts], gauss[verts], w_area[verts], valid[verts], targets)
            idx = verts[core]
            H[idx], K[idx] = hk[core], kk[core]
        del adj, hk, kk
        report(progress, "curvature: scales", 2 + (k + 1) / slabs.count, 4)
    processing = {"mode": "direct" if slabs.count == 1 else "slabs along the growth axis",
                  "slabs": int(slabs.count), "chunk_faces": int(chunk_faces)}
    processing["note"] = "the whole mesh at once"
    if slabs.count > 1:
        processing["margin_mm"] = float(margin2)
        processing["note"] = (f"in {slabs.count} overlapping slabs along the growth axis of about "
                              f"{int(chunk_faces):,} faces each (margin {margin2:.3g} mm, wider than every "
                              "diffusion step's reach): the numbers of the whole mesh, with bounded memory")
    return {"scales": scales, "H": H, "K": K, "normals": normals, "spacing": spacing, "method": method,
            "samp": samp, "noise": noise, "info": info, "est_spacing": est_spacing, "steps": targets,
            "step_var": step_var, "processing": processing}


def _noise(r_all, r_s, deg, valid, sign) -> float:
    """:func:`bandgeo.features.noise_estimate` from the per-vertex residuals (unoriented normals: the
    sign flips both residuals, which leaves the median absolute deviation as it is)."""
    if not valid.any():
        return float("nan")
    r = r_all[valid] * sign
    rs = r_s[valid] * sign / np.maximum(deg[valid], 1)
    dev = r - rs
    mad = np.median(np.abs(dev - np.median(dev)))
    dmed = float(np.median(deg[valid]))
    return float(1.4826 * mad / np.sqrt(1.0 + 1.0 / max(dmed, 1.0)))


def _step(adj, x):
    """One lazy random-walk step (A + I) x / 8 of a vector.

    The division by 8, a power of two, is exact in floating point, so the ratios the features are
    made of are the same bits as without it; it only keeps the sums from growing about 7-fold per
    step, which overflowed float64 after ~360 steps (``MAX_STEPS`` is 400 on very fine meshes).
    """
    out = adj @ x
    out += x
    out *= 0.125
    return out


def _diffuse(adj, h0, k0, w_area, valid, targets):
    """(H, K) (n, k): area-weighted random-walk means of the one-ring fields after ``targets`` steps."""
    nl = len(h0)
    H = np.empty((nl, len(targets)))
    K = np.empty((nl, len(targets)))
    # one lazy random-walk step is (A + I) x; the weighted fields and their weights walk together
    # (three contiguous vectors: three one-vector products are faster than one three-column product)
    cur = [h0 * w_area, k0 * w_area, w_area]
    done = 0
    # the three vectors walk independently: one thread each on a large mesh (the sparse products and
    # the in-place steps release the GIL), the same steps in the same order for each, so the same numbers
    pool = None
    if nl >= PARALLEL_DIFFUSION_VERTICES and max(targets, default=0) > 0:
        from concurrent.futures import ThreadPoolExecutor

        pool = ThreadPoolExecutor(max_workers=3, thread_name_prefix="bandgeo-diffusion")
    try:
        for si, target in enumerate(targets):
            if done < target:
                steps = target - done
                if pool is not None:
                    cur = list(pool.map(lambda x: _walk(adj, x, steps), cur))
                else:
                    cur = [_walk(adj, x, steps) for x in cur]
                done = target
            _record(si, done, cur, adj, h0, k0, valid, H, K)
    finally:
        if pool is not None:
            pool.shutdown(wait=True)
    return H, K


#: From this many vertices on, the diffusion's three vectors walk in threads of their own (and the
#: adjacency is built in a thread beside the one-ring sums).
PARALLEL_DIFFUSION_VERTICES = 200_000


def _walk(adj, x, steps):
    """``steps`` lazy random-walk steps of one vector (:func:`_step`)."""
    for _ in range(steps):
        x = _step(adj, x)
    return x


def _record(si, done, cur, adj, h0, k0, valid, H, K):
    """Column ``si`` of H and K from the walked vectors ``cur`` after ``done`` steps."""
    if done == 0:
        # one ring: boundary vertices take the mean of their valid neighbours
        if valid.all():
            hv, kv = h0, k0
        else:
            fill = [_step(adj, x) for x in cur]
            wv = np.maximum(fill[2], 1e-300)
            hv = np.where(valid, h0, fill[0] / wv)
            kv = np.where(valid, k0, fill[1] / wv)
    else:
        wv = np.maximum(cur[2], 1e-300)
        hv = cur[0] / wv
        kv = cur[1] / wv
    H[:, si], K[:, si] = hv, kv
