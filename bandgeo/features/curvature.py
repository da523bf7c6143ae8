"""One-ring discrete curvature operators and mesh helpers (cotangent Laplacian, angle deficit, areas).

References: Meyer, Desbrun, Schroeder & Barr (2003), "Discrete differential-geometry operators for
triangulated 2-manifolds", in Visualization and Mathematics III, 35-57.
"""
from __future__ import annotations

from typing import Optional

import numpy as np
import scipy.sparse as sp

from ..rowgeom import cross_rows

#: Faces processed per block by the one-ring operators (PERF-NOTES: 2^18-2^20 is fastest here).
FACE_BLOCK = 1 << 19
#: Faces per block of :func:`sampling_along` with local tangents (temporaries of this length stay in cache).
SAMPLING_BLOCK = 1 << 16
#: Above this many blocks, each block's per-vertex sums run over the vertices it touches only.
COMPACT_BLOCKS = 4


# ---------------------------------------------------------------------------- one-ring operators
def one_ring_curvature(vertices: np.ndarray, faces: np.ndarray, block: int = FACE_BLOCK, boundary=None):
    """Cotangent mean-curvature normal, angle-deficit Gaussian curvature and mixed areas.

    Parameters
    ----------
    vertices : (n, 3) float, mm
    faces : (m, 3) int
    block : int
        Faces per block (the temporaries are a few arrays of this length).
    boundary : (n,) bool or a callable returning it, optional
        The mesh's boundary vertices when already known (:func:`adjacency_and_boundary`); a callable is
        called once the sums are done.

    Returns
    -------
    lap : (n, 3) float
        Cotangent Laplacian of the position divided by the mixed area (= -2 H n), 1/mm.
    gauss : (n,) float
        Angle deficit over mixed area, 1/mm^2 (meaningless on boundary vertices).
    area : (n,) float
        Mixed Voronoi area, mm^2.
    normals : (n, 3) float
        Area-weighted unit vertex normals, oriented as the faces.
    boundary : (n,) bool
        Vertices on a mesh boundary (an edge used by one face).
    """
    vertices = np.asarray(vertices, dtype=np.float64)
    n = len(vertices)
    # accumulated per vertex: lap x, y, z, angle sum, normal x, y, z, mixed area (one bincount each per
    # block over the three corners together: 8 calls per block instead of 33)
    acc = np.zeros((8, n))
    # With many blocks (10 M faces and more), each block's sums are made over the vertices it touches
    # only, not over all n (8 whole-length passes per block were a third of the time at 10 M faces);
    # the same additions in the same order, so the same numbers.
    scratch = (np.zeros(n, dtype=bool), np.empty(n, dtype=np.int64)) if len(faces) > COMPACT_BLOCKS * block \
        else None
    for start in range(0, len(faces), block):
        fb = np.asarray(faces[start:start + block])
        _one_ring_block(vertices, fb, n, acc, scratch)
    lap = acc[0:3].T
    angle_sum = acc[3]
    normals = acc[4:7].T
    area = np.maximum(acc[7], 1e-300)
    if boundary is None:
        boundary = boundary_vertices(faces, n)
    elif callable(boundary):  # made elsewhere meanwhile (bandgeo.features._slabs builds it in a thread)
        boundary = boundary()
    deficit = np.where(boundary, np.pi, 2.0 * np.pi) - angle_sum
    nn = np.sqrt(np.einsum("ij,ij->i", normals, normals))[:, None]
    normals = normals / np.maximum(nn, 1e-300)
    return lap / area[:, None], deficit / area, area, normals, boundary


def _dot(a, b):
    return np.einsum("ij,ij->i", a, b)


def _one_ring_block(vertices, fb, n, acc, scratch=None):
    """Add one block of faces' corner contributions to ``acc`` (8, n) (see :func:`one_ring_curvature`).

    ``scratch``: (n,) bool all False and (n,) int64, to sum over the block's own vertices only."""
    p = [vertices[fb[:, i]] for i in range(3)]
    # edge opposite vertex i: e[i] = p[i+2] - p[i+1]
    e = [p[2] - p[1], p[0] - p[2], p[1] - p[0]]
    del p
    a, b = e[0], e[1]
    cross = cross_rows(a, b)  # np.cross(e[0], e[1]) without its temporaries
    dbl = np.sqrt(_dot(cross, cross))
    tri_area = 0.5 * dbl
    safe = np.maximum(dbl, 1e-300)
    l2 = [_dot(x, x) for x in e]
    # angle at vertex i lies between -e[i+2] and e[i+1]
    dots = [-_dot(e[(i + 2) % 3], e[(i + 1) % 3]) for i in range(3)]
    cots = [d / safe for d in dots]
    m = len(fb)
    idx = np.concatenate([fb[:, 0], fb[:, 1], fb[:, 2]])
    if scratch is None:
        def add(row, weights):
            acc[row] += np.bincount(idx, weights, minlength=n)
    else:
        mark, pos = scratch
        mark[idx] = True
        touched = np.flatnonzero(mark)
        mark[touched] = False
        pos[touched] = np.arange(len(touched))
        local = pos[idx]

        def add(row, weights):  # the same per-vertex sums (same order), added to the touched vertices
            acc[row, touched] += np.bincount(local, weights, minlength=len(touched))
    w = np.empty(3 * m)
    # edge (j, k) opposite corner i carries weight cot(angle_i) / 2 and adds +d_i at j, -d_i at k, so the
    # corner c gains d_{c+2} - d_{c+1} with d_i = e[i] cot_i / 2
    half = [0.5 * c for c in cots]
    for comp in range(3):
        for c in range(3):
            c1, c2 = (c + 1) % 3, (c + 2) % 3
            np.subtract(e[c2][:, comp] * half[c2], e[c1][:, comp] * half[c1], out=w[c * m:(c + 1) * m])
        add(comp, w)
    for c in range(3):
        w[c * m:(c + 1) * m] = np.arctan2(safe, cots[c] * safe)
    add(3, w)
    for comp in range(3):
        for c in range(3):
            w[c * m:(c + 1) * m] = cross[:, comp]
        add(4 + comp, w)
    # mixed Voronoi area (Meyer et al. 2003, Fig. 4)
    obtuse = [c < 0 for c in cots]
    any_obtuse = obtuse[0] | obtuse[1] | obtuse[2]
    for i in range(3):
        j, k = (i + 1) % 3, (i + 2) % 3
        # Voronoi part: (|e_ij|^2 cot(angle_k) + |e_ik|^2 cot(angle_j)) / 8
        vor = (l2[k] * cots[k] + l2[j] * cots[j]) / 8.0
        w[i * m:(i + 1) * m] = np.where(any_obtuse, np.where(obtuse[i], tri_area / 2.0, tri_area / 4.0), vor)
    add(7, w)


def adjacency_and_boundary(faces: np.ndarray, n: int, dtype=np.float32):
    """Symmetric (n, n) 0/1 vertex adjacency of the mesh graph and the (n,) bool boundary vertices.

    The adjacency sums each undirected edge's faces before its entries are set to 1, so the edges used
    by one face (the boundary) come with it at no extra sort.
    """
    faces = np.asarray(faces)
    i = np.concatenate([faces[:, 0], faces[:, 1], faces[:, 2]])
    j = np.concatenate([faces[:, 1], faces[:, 2], faces[:, 0]])
    a = sp.csr_matrix((np.ones(len(i), dtype=dtype), (i, j)), shape=(n, n))
    del i, j
    a = a + a.T
    boundary = np.zeros(n, dtype=bool)
    single = a.data == 1
    if single.any():
        boundary[a.indices[single]] = True  # symmetric: the columns of the single edges are their ends
    a.data[:] = 1.0
    return a, boundary


def boundary_vertices(faces: np.ndarray, n: int) -> np.ndarray:
    """(n,) bool: vertices on an edge that belongs to exactly one face."""
    return adjacency_and_boundary(faces, n)[1]


def adjacency(faces: np.ndarray, n: int) -> sp.csr_matrix:
    """Symmetric (n, n) 0/1 vertex adjacency of the mesh graph."""
    return adjacency_and_boundary(faces, n)[0]


def orient_outward(vertices: np.ndarray, normals: np.ndarray, axis=None) -> float:
    """+1 if the normals point away from the column axis (or the centroid) on average, else -1."""
    c = vertices.mean(axis=0)
    d = vertices - c
    if axis is not None:
        d = d - np.outer(d @ axis, axis)
    return 1.0 if np.einsum("ij,ij->", d, normals) >= 0 else -1.0


# ---------------------------------------------------------------------------- geometry helpers
def rough_axis(vertices: np.ndarray) -> np.ndarray:
    """Unit direction of the column's long axis (principal direction), pointing up (+z)."""
    d = vertices - vertices.mean(axis=0)
    step = max(1, len(d) // 200_000)
    w, vec = np.linalg.eigh(np.cov(d[::step].T))
    a = vec[:, -1]
    if w[-1] < 2.0 * w[-2]:  # squat specimen: trust the paleo-vertical of the specimen frame
        a = np.array([0.0, 0.0, 1.0])
    return a if a[2] >= 0 else -a


def sampling_along(vertices: np.ndarray, faces: np.ndarray, axis: np.ndarray, only=None) -> float:
    """Sampling interval of the mesh along ``axis``, mm.

    For each vertex the longest projection on the axis of its incident edges is the distance to the
    next row of samples along the axis; the median over vertices is robust to anisotropic meshes
    (rings of few vertices) where the median edge length is dominated by the long circumferential edges.

    Parameters
    ----------
    vertices : (n, 3) float, mm
    faces : (m, 3) int
    axis : (3,) unit vector, or (n, 3) unit tangents of the growth axis at each vertex (a leaning,
        swaying column: long edges around a ring must not pick up the local tilt)
    only : (n,) bool, optional
        The median runs over these vertices only (a sample of a large mesh: then ``faces`` need hold
        only the faces that touch them, and ``axis`` need be right only at those faces' vertices).
    """
    n = len(vertices)
    axis = np.asarray(axis, dtype=float)
    local = axis.ndim == 2
    proj = np.zeros(n)
    if not local:
        p = vertices @ axis  # one scalar per vertex: the edge projections are differences of these
        for a_col, b_col in ((0, 1), (1, 2), (2, 0)):
            fa, fb = faces[:, a_col], faces[:, b_col]
            d = np.abs(p[fb] - p[fa])
            np.maximum.at(proj, fa, d)
            np.maximum.at(proj, fb, d)
        used = proj > 0
        return float(np.median(proj[used])) if used.any() else float("nan")
    # local tangents: in blocks of faces, on coordinate columns (a row gather of (n, 3) arrays and the
    # (faces, 3) temporaries cost about five times as much). The same numbers as t /= |t|, |e . t| on
    # rows with einsum("ij,ij->i"), which sums a row of three as (x + z) + y (its loop takes the terms
    # in pairs): added in that order here
    vc = [np.ascontiguousarray(vertices[:, c], dtype=float) for c in range(3)]
    tc = [np.ascontiguousarray(axis[:, c]) for c in range(3)]
    for start in range(0, len(faces), SAMPLING_BLOCK):
        fblock = faces[start:start + SAMPLING_BLOCK]
        for a_col, b_col in ((0, 1), (1, 2), (2, 0)):
            fa, fb = np.ascontiguousarray(fblock[:, a_col]), np.ascontiguousarray(fblock[:, b_col])
            t = [tc[c][fa] + tc[c][fb] for c in range(3)]
            nrm = t[0] * t[0]
            nrm += t[2] * t[2]
            nrm += t[1] * t[1]
            np.sqrt(nrm, out=nrm)
            e = []
            for c in range(3):
                t[c] /= nrm
                ec = vc[c][fb] - vc[c][fa]
                ec *= t[c]
                e.append(ec)
            d = e[0]
            d += e[2]
            d += e[1]
            np.abs(d, out=d)
            np.maximum.at(proj, fa, d)
            np.maximum.at(proj, fb, d)
    used = proj > 0
    if only is not None:
        used &= np.asarray(only, dtype=bool)
    return float(np.median(proj[used])) if used.any() else float("nan")


def luminance_from_colors(colors) -> Optional[np.ndarray]:
    """Relative luminance (0..1) of sRGB colours.

    ITU-R BT.709 weights on linearised sRGB (IEC 61966-2-1 transfer function).
    """
    if colors is None:
        return None
    raw = np.asarray(colors)
    if raw.ndim != 2 or raw.shape[1] < 3:
        return None
    if raw.dtype == np.uint8 and len(raw) > 1024:
        # 8-bit channels: the transfer function of the 256 levels, looked up (the same float64
        # numbers as computing it per vertex, without a power of every channel of every vertex)
        levels = np.arange(256, dtype=np.float64)
        if raw.max() > 1:
            levels = levels / 255.0
        table = np.where(levels <= 0.04045, levels / 12.92, ((levels + 0.055) / 1.055) ** 2.4)
        return table[raw[:, :3]] @ np.array([0.2126, 0.7152, 0.0722])
    c = np.asarray(raw, dtype=np.float64)
    if c.max() > 1.0:
        c = c / 255.0
    c = c[:, :3]
    lin = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    return lin @ np.array([0.2126, 0.7152, 0.0722])


def shape_index_curvedness(k1: np.ndarray, k2: np.ndarray):
    """Shape index (2/pi) atan((k1+k2)/(k1-k2)) in [-1, 1] and curvedness sqrt((k1^2+k2^2)/2)."""
    s = (2.0 / np.pi) * np.arctan2(k1 + k2, k1 - k2)
    # k1 == k2 (umbilic): arctan2(2k, 0) gives +-1 already; flat points give 0
    return s, np.sqrt(0.5 * (k1 * k1 + k2 * k2))


