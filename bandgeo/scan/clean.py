"""Vectorized mesh cleanup: duplicates, degenerate faces, pieces, consistent outward winding, holes.

Everything here is numpy and scipy.sparse.csgraph on whole arrays: no Python loop over vertices or
faces, so a 10 M-face scan cleans in seconds. The sorting and graph kernels live in
:mod:`bandgeo.scan.meshgraph`; this module runs the steps and counts every change.
"""
from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..progress import report
from .meshgraph import (_components, _edge_ends, _edge_runs, _Edges, _face_area_volume,  # noqa: F401
                        _face_components, _run_members, first_of_equal_rows)



@dataclass
class CleanResult:
    """Output of :func:`clean_mesh` (file units; nothing scaled or rotated yet)."""

    vertices: np.ndarray          # (n, 3) float64
    faces: np.ndarray             # (m, 3) int64, outward winding
    scan_index: np.ndarray        # (n,) int64 index of each kept vertex in the scan
    counts: dict = field(default_factory=dict)
    stats: dict = field(default_factory=dict)
    boundary_edges: np.ndarray = None  # (b, 2) int64 into ``vertices``


#: Largest coordinate magnitude accepted, in file units: 1e15 micrometres is a million km, so no unit
#: makes a larger value part of a hand specimen, and squares of such numbers approach float overflow.
MAX_COORDINATE = 1e15
#: Smallest extent accepted, in file units (below it, areas underflow to zero in float64).
MIN_EXTENT = 1e-60
#: Largest ratio of coordinate magnitude to extent: beyond it float64 keeps under ~4 digits of the shape.
MAX_OFFSET_RATIO = 1e12


def _finite_rows(vertices: np.ndarray, faces: np.ndarray):
    """(mask of vertices with finite coordinates, count of others), refusing non-finite vertices used by
    faces and coordinates no length unit or float arithmetic can handle (each with one line)."""
    n = len(vertices)
    lo = np.array([vertices[:, k].min() for k in range(3)])  # NaN and inf propagate: one pass finds both
    hi = np.array([vertices[:, k].max() for k in range(3)])
    if np.isfinite(lo).all() and np.isfinite(hi).all():
        finite = np.ones(n, dtype=bool)
    else:
        finite = np.isfinite(vertices).all(axis=1)
    n_bad = int(n - np.count_nonzero(finite))
    if n_bad:
        used_bad = ~finite[faces].all(axis=1)
        if used_bad.any():
            first = int(np.flatnonzero(~finite)[0])
            raise InputError(f"{n_bad} vertices have NaN or infinite coordinates (the first is vertex {first}) "
                             f"and {int(used_bad.sum())} faces use them; repair or re-export the scan")
        kept = vertices[finite]
        lo, hi = kept.min(axis=0), kept.max(axis=0)
    big = float(max(np.abs(lo).max(), np.abs(hi).max()))
    extent = float((hi - lo).max())
    if big > MAX_COORDINATE:
        raise InputError(f"coordinates reach {big:.3g} file units, more than any length unit allows for a hand "
                         "specimen (and too large for the arithmetic); check the export's unit and scale and "
                         "re-export the scan in mm, cm or m")
    if extent < MIN_EXTENT:
        raise InputError(f"the mesh spans only {extent:.3g} file units (all vertices at nearly one point); check the "
                         "export's unit and scale and re-export the scan at its real size in mm, cm or m")
    if big > MAX_OFFSET_RATIO * extent:
        raise InputError(f"the coordinates are about {big:.3g} file units from the origin but the mesh spans only "
                         f"{extent:.3g}, so float precision has lost its shape; move the scan near the origin "
                         "before exporting it")
    return finite, n_bad


@dataclass
class _Job:
    """What every cleanup step reads (the input and its finite rows) and adds to (counts, stats).

    ``pool`` is a one-thread executor for work that overlaps the main thread (or None for small
    meshes); ``early`` is a future of ``_edge_runs(faces, n)`` started on it before step 1.
    """

    vertices: np.ndarray
    faces: np.ndarray
    finite: np.ndarray
    n_bad: int
    progress: object = None
    pool: object = None
    early: object = None
    counts: dict = field(default_factory=dict)
    stats: dict = field(default_factory=dict)

    @property
    def n(self) -> int:
        return len(self.vertices)


@dataclass
class _Pieces:
    """Edge pairing and pieces of the (duplicate-free) faces ``f`` (steps 3-4)."""

    f: np.ndarray             # (m, 3) faces after steps 1-3, scan vertex numbering
    area2: np.ndarray         # (m,) twice each face's area
    vol: np.ndarray           # (m,) each face's signed volume term
    edges: _Edges
    ea: np.ndarray            # directed-edge positions of the two faces of each manifold edge
    eb: np.ndarray
    same_dir: np.ndarray      # (pairs,) bool, the two faces walk the shared edge the same way
    nm_runs: np.ndarray       # runs of non-manifold edges
    referenced: np.ndarray    # (n,) bool, vertex used by a face
    piece: np.ndarray = None  # (m,) piece label of each face
    keep_face: np.ndarray = None
    n_pieces: int = 1


def clean_mesh(vertices: np.ndarray, faces: np.ndarray, progress=None) -> CleanResult:
    """Clean a triangle mesh and report every change with counts.

    Steps: refuse non-finite vertices used by faces (drop unused ones); merge exactly coincident
    vertices; drop faces with a repeated vertex or zero area, and repeated faces; split into pieces
    (faces joined by edges) and keep the largest by area; wind every face consistently with the normals
    pointing outward (per patch, by the sign of the enclosed volume); drop unreferenced vertices.

    Parameters
    ----------
    vertices : (n, 3) float64
    faces : (m, 3) int64

    Returns
    -------
    CleanResult
    """
    report(progress, "cleaning: duplicates", 0, 6)
    with np.errstate(all="ignore"):
        finite, n_bad = _finite_rows(vertices, faces)
    job = _Job(vertices=vertices, faces=faces, finite=finite, n_bad=n_bad, progress=progress)
    job.counts["nonfinite_vertices_removed"] = n_bad
    # The edge sort, the largest single cost, does not depend on steps 1-2 when they change nothing (the
    # usual case): start it on a second thread (numpy releases the GIL) and use it only in that case.
    if faces.dtype == np.int64 and len(faces) >= 1 << 16:
        job.pool = ThreadPoolExecutor(max_workers=1)
    try:
        if job.pool is not None:
            job.early = job.pool.submit(_edge_runs, faces, job.n)
        rep, merged = _merge_vertices(job)                            # 1
        f, area2, vol = _drop_degenerate(job, rep, merged)            # 2
        pieces = _pair_edges(job, f, area2, vol, merged)              # 3
        _find_pieces(job, pieces)                                     # 4
        f = _wind_outward(job, pieces)                                # 5
        return _compact(job, pieces, f)                               # 6
    finally:
        if job.pool is not None:
            job.pool.shutdown(wait=True)


def _merge_vertices(job: _Job):
    """Step 1: (representative of each vertex, mask of merged ones); exactly coincident finite vertices
    are merged onto the first of them."""
    n = job.n
    arange_n = np.arange(n, dtype=np.int64)
    if job.n_bad:
        idx = np.flatnonzero(job.finite)
        rep = arange_n.copy()
        rep[idx] = idx[first_of_equal_rows(job.vertices[idx])]
    else:
        rep = first_of_equal_rows(job.vertices)
    merged = rep != arange_n
    job.counts["duplicate_vertices_merged"] = int(np.count_nonzero(merged))
    return rep, merged


def _drop_degenerate(job: _Job, rep, merged):
    """Step 2: faces (renumbered by ``rep``) without a repeated vertex or zero area, with twice their
    areas and their volume terms."""
    report(job.progress, "cleaning: degenerate faces", 1, 6)
    vertices, n, n_bad = job.vertices, job.n, job.n_bad
    f = rep[job.faces] if job.counts["duplicate_vertices_merged"] else np.asarray(job.faces, dtype=np.int64)
    repeated = (f[:, 0] == f[:, 1]) | (f[:, 1] == f[:, 2]) | (f[:, 0] == f[:, 2])
    center = vertices[job.finite].mean(axis=0) if n_bad else vertices.mean(axis=0)
    area2, vol = _face_area_volume(vertices, f, center)
    sample = vertices[job.finite] if n_bad else vertices[:: max(1, n // 200_000)]
    span = np.array([np.ptp(sample[:, k]) for k in range(3)])  # sets the zero-area tolerance only
    degenerate = repeated | (area2 <= 1e-13 * float(np.dot(span, span)))
    job.counts["degenerate_faces_removed"] = int(np.count_nonzero(degenerate))
    if degenerate.any():
        keep = ~degenerate
        f, area2, vol = f[keep], area2[keep], vol[keep]
    if len(f) == 0:
        raise InputError("no usable faces are left after removing degenerate ones (all have zero area or repeat "
                         "a vertex); the mesh is broken, re-export the scan")
    return f, area2, vol


def _repeated_faces(edges: _Edges, f: np.ndarray):
    """(m,) bool marking the later face of each pair with the same three vertices, or None when none.

    Two such faces share all three edges, so each of those edges is non-manifold unless the pair touches
    nothing else (an isolated two-face piece, which the piece step removes): only non-manifold runs
    need a look.
    """
    nm = np.flatnonzero(edges.runlen > 2)
    if not len(nm):
        return None
    _, member = _run_members(edges, nm)
    run_id = np.repeat(np.arange(len(nm)), edges.runlen[nm])
    face = (edges.order[member] // 3).astype(np.int64)
    # two faces sharing an edge have the same three vertices exactly when their index sums agree
    fsum = f[face, 0] + f[face, 1] + f[face, 2]
    srt = np.lexsort((face, fsum, run_id))
    run_id, fsum, face = run_id[srt], fsum[srt], face[srt]
    same = (run_id[1:] == run_id[:-1]) & (fsum[1:] == fsum[:-1]) & (face[1:] != face[:-1])
    if not same.any():
        return None
    dup = np.zeros(len(f), dtype=bool)
    dup[face[1:][same]] = True  # the later of each equal pair (faces sorted ascending within ties)
    return dup


def _pair_edges(job: _Job, f, area2, vol, merged) -> _Pieces:
    """Step 3: sort the edges (one packed sort), drop repeated faces, pair each manifold edge's faces."""
    report(job.progress, "cleaning: edges", 2, 6)
    counts, n = job.counts, job.n
    counts["duplicate_faces_removed"] = 0
    reuse = job.early is not None and not counts["duplicate_vertices_merged"] \
        and not counts["degenerate_faces_removed"]
    if job.early is not None and not reuse:
        job.early.result()  # finish (and drop) the speculative sort before the real one
    while True:
        edges = job.early.result() if reuse else _edge_runs(f, n)
        reuse = False
        dup = _repeated_faces(edges, f)
        if dup is None:
            break
        counts["duplicate_faces_removed"] += int(np.count_nonzero(dup))
        keep = ~dup
        f, area2, vol = f[keep], area2[keep], vol[keep]
    pair_pos = edges.starts[edges.runlen == 2]
    ea, eb = edges.order[pair_pos], edges.order[pair_pos + 1]
    pieces = _Pieces(f=f, area2=area2, vol=vol, edges=edges, ea=ea, eb=eb, same_dir=None,
                     nm_runs=np.flatnonzero(edges.runlen > 2), referenced=None)
    # pieces of a mesh without non-manifold edges: on the second thread, while the rest is counted
    later = job.pool.submit(_face_components, len(f), ea, eb) \
        if job.pool is not None and not len(pieces.nm_runs) else None
    referenced = np.zeros(n, dtype=bool)
    referenced[f.ravel()] = True
    counts["unreferenced_vertices_removed"] = int(n - np.count_nonzero(referenced | merged) - job.n_bad)
    pieces.referenced = referenced
    # the shared edge is walked the same way (the windings disagree) when both start at the same vertex,
    # that is when both run the same way between its smaller and larger vertex (a small bool gather)
    pieces.same_dir = edges.down[ea] == edges.down[eb]
    job.stats["non_manifold_edges"] = int(len(pieces.nm_runs))
    pieces.piece = later  # a future until step 4 collects it
    return pieces


def _find_pieces(job: _Job, pc: _Pieces) -> None:
    """Step 4: pieces (faces joined through edges); keep the largest by area."""
    report(job.progress, "cleaning: pieces", 3, 6)
    m, edges = len(pc.f), pc.edges
    if len(pc.nm_runs):
        head, member = _run_members(edges, pc.nm_runs)
        fa, fb = pc.ea // 3, pc.eb // 3
        pc.piece = _components(m, np.concatenate([fa, edges.order[head] // 3]),
                               np.concatenate([fb, edges.order[member] // 3]))
    else:
        pc.piece = pc.piece.result() if pc.piece is not None else _face_components(m, pc.ea, pc.eb)
    area = 0.5 * pc.area2
    piece_area = np.bincount(pc.piece, weights=area)
    pc.n_pieces = len(piece_area)
    best = int(np.argmax(piece_area))
    job.stats["pieces"] = int(pc.n_pieces)
    ranked = np.sort(piece_area)[::-1]
    job.stats["piece_area_fractions"] = [float(a / piece_area.sum()) for a in ranked[:5]]
    pc.keep_face = pc.piece == best if pc.n_pieces > 1 else np.ones(m, dtype=bool)
    job.counts["pieces_removed"] = int(pc.n_pieces - 1)
    job.counts["faces_in_removed_pieces"] = int(m - np.count_nonzero(pc.keep_face))


def _patches(job: _Job, pc: _Pieces):
    """(patch label of each face, faces to flip for a consistent winding or None), per edge-connected
    patch of the kept piece; a non-orientable patch keeps one side."""
    m = len(pc.f)
    fa = fb = None
    if len(pc.nm_runs) or pc.n_pieces > 1 or pc.same_dir.any():
        fa, fb = pc.ea // 3, pc.eb // 3
    if pc.n_pieces > 1:
        in_piece = pc.keep_face[fa]
        pa, pb, pd = fa[in_piece], fb[in_piece], pc.same_dir[in_piece]
    else:
        pa, pb, pd = fa, fb, pc.same_dir
    job.stats["inconsistent_edges"] = int(np.count_nonzero(pd))
    if pd.any():
        # double cover: node f (as is) and f + m (flipped); an agreeing edge joins like sheets
        a2 = np.concatenate([pa, pa + m])
        b2 = np.concatenate([np.where(pd, pb + m, pb), np.where(pd, pb, pb + m)])
        lab = _components(2 * m, a2, b2)
        l0, l1 = lab[:m], lab[m:]
        job.stats["non_orientable_faces"] = int(np.count_nonzero(pc.keep_face & (l0 == l1)))
        patch = np.minimum(l0, l1)
        return patch, l0 != patch
    job.stats["non_orientable_faces"] = 0
    return (pc.piece if not len(pc.nm_runs) else _components(m, pa, pb)), None


def _wind_outward(job: _Job, pc: _Pieces) -> np.ndarray:
    """Step 5: faces wound consistently and outward, per edge-connected patch of the kept piece."""
    report(job.progress, "cleaning: winding", 4, 6)
    patch, flip = _patches(job, pc)
    pc.ea = pc.eb = pc.same_dir = None  # not needed any more: free them before the next temporaries
    vol = pc.vol
    # vol: each face's share of (enclosed volume x 6) about the vertex mean; the sum over a closed patch
    # does not depend on that reference point
    if flip is not None:
        vol[flip] *= -1.0
    if pc.n_pieces > 1:
        vol *= pc.keep_face
    patch_vol = np.bincount(patch, weights=vol, minlength=int(patch.max()) + 1)
    outward_flip = patch_vol[patch] < 0
    flip = outward_flip if flip is None else flip ^ outward_flip
    flip &= pc.keep_face
    job.counts["faces_flipped"] = int(np.count_nonzero(flip))
    f = pc.f
    if job.counts["faces_flipped"]:
        f = f.copy() if f is job.faces else f
        f[flip] = f[flip][:, [0, 2, 1]]
    return f


def _compact(job: _Job, pc: _Pieces, f: np.ndarray) -> CleanResult:
    """Step 6: the kept piece renumbered, its boundary loops (holes) and median edge length."""
    report(job.progress, "cleaning: compacting", 5, 6)
    n, keep_face, edges = job.n, pc.keep_face, pc.edges
    f_keep = f[keep_face] if pc.n_pieces > 1 else f
    if pc.n_pieces > 1:
        used = np.zeros(n, dtype=bool)
        used[f_keep.ravel()] = True
    else:
        used = pc.referenced  # one piece: the kept vertices are exactly the referenced ones
    job.counts["vertices_in_removed_pieces"] = int(np.count_nonzero(pc.referenced & ~used))
    if used.all():
        new_index = scan_index = np.arange(n, dtype=np.int64)
        faces_out = f_keep
    else:
        new_index = np.cumsum(used) - 1
        scan_index = np.flatnonzero(used).astype(np.int64)
        faces_out = new_index[f_keep]
    bedges = _boundary_edges(job, edges, f, keep_face, new_index)
    # median edge length over (about 250 000, evenly spread) undirected edges of the kept piece
    uniq = edges.order[edges.starts[:: max(1, len(edges.starts) // 250_000)]]
    uniq = uniq[keep_face[uniq // 3]]
    u0, u1 = _edge_ends(f, uniq)
    job.stats["median_edge"] = float(np.median(np.linalg.norm(job.vertices[u0] - job.vertices[u1], axis=1)))
    report(job.progress, "cleaning: done", 6, 6)
    return CleanResult(vertices=job.vertices if used.all() else job.vertices[scan_index], faces=faces_out,
                       scan_index=scan_index, counts=job.counts, stats=job.stats, boundary_edges=bedges)


def _boundary_edges(job: _Job, edges: _Edges, f, keep_face, new_index) -> np.ndarray:
    """(b, 2) boundary edges of the kept piece in the new numbering; counts them and their loops."""
    bpos = edges.order[edges.starts[edges.runlen == 1]]
    bpos = bpos[keep_face[bpos // 3]]
    b0, b1 = _edge_ends(f, bpos)
    bedges = np.stack([new_index[b0], new_index[b1]], axis=1)
    job.stats["boundary_edges"] = int(len(bedges))
    if len(bedges):
        nodes, inv = np.unique(bedges.ravel(), return_inverse=True)
        inv = inv.reshape(-1, 2)
        job.stats["holes"] = int(_components(len(nodes), inv[:, 0], inv[:, 1]).max() + 1)
    else:
        job.stats["holes"] = 0
    return bedges
