"""Mesh graph kernels for the cleanup: packed sorts, equal-row grouping, edge runs, connected pieces.

Everything is numpy and scipy.sparse.csgraph on whole arrays: no Python loop over vertices or faces.
Grouping uses ``np.sort`` on keys that carry their own index in the low bits, which is several times
faster than ``np.argsort`` on this kind of machine. :mod:`bandgeo.scan.clean` runs the steps.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

_M2, _M3 = np.uint64(0xBF58476D1CE4E5B9), np.uint64(0x94D049BB133111EB)


def _mix(bits: np.ndarray) -> np.ndarray:
    """splitmix64 finalizer, elementwise on uint64 (wrapping arithmetic)."""
    z = bits
    z = (z ^ (z >> np.uint64(30))) * _M2
    z = (z ^ (z >> np.uint64(27))) * _M3
    return z ^ (z >> np.uint64(31))


def _index_bits(k: int) -> int:
    return max(1, int(k - 1).bit_length())


def _sort_with_index(keys: np.ndarray, key_bits: int):
    """Return (order, sorted_keys) for non-negative int64 ``keys`` using a packed sort when it fits.

    ``keys`` may be overwritten (it is reused as the sort buffer).
    """
    k = len(keys)
    ib = _index_bits(k)
    if key_bits + ib <= 63:
        packed = keys if keys.dtype == np.int64 else keys.astype(np.int64)
        packed <<= ib
        packed |= np.arange(k, dtype=np.int64)
        packed.sort()
        order = packed & ((1 << ib) - 1)
        packed >>= ib
        return order, packed
    order = np.argsort(keys, kind="stable")
    return order, keys[order]


def first_of_equal_rows(rows: np.ndarray) -> np.ndarray:
    """For each row, the smallest index of a row exactly equal to it.

    Parameters
    ----------
    rows : (k, c) float64 or int64

    Returns
    -------
    (k,) int64
    """
    k = len(rows)
    if k == 0:
        return np.zeros(0, dtype=np.int64)
    rows = np.ascontiguousarray(rows)
    if rows.dtype.kind == "f":
        rows = rows + 0.0  # -0.0 -> 0.0 so that equal numbers hash alike
    bits = rows.view(np.uint64)
    h = bits[:, 0] * _M2
    for c in range(1, rows.shape[1]):
        h = (h ^ (h >> np.uint64(29))) + bits[:, c] * _M3
    h = _mix(h)
    ib = _index_bits(k)
    h >>= np.uint64(ib + 1)
    order, hs = _sort_with_index(h.view(np.int64), 63 - ib)
    start = np.empty(k, dtype=bool)
    start[0] = True
    np.not_equal(hs[1:], hs[:-1], out=start[1:])
    if start.all():  # every hash distinct (the usual scan): no two rows are equal
        return np.arange(k, dtype=np.int64)
    later = np.flatnonzero(~start)  # members of a run after its head: candidate duplicates
    if len(later) * 100 < k:
        # few shared hashes (chance collisions of the truncated hash on a large scan, or a few real
        # duplicates): settle just those runs exactly instead of sweeping every row
        return _settle_runs(rows, order, start, later)
    head = np.maximum.accumulate(np.where(start, np.arange(k), 0))
    rep_sorted = order[head]
    rep = np.empty(k, dtype=np.int64)
    rep[order] = rep_sorted
    bad = np.any(rows[order[later]] != rows[rep_sorted[later]], axis=1)
    if bad.any():  # hash collisions: settle the few affected runs exactly
        run_id = np.cumsum(start) - 1
        sub = order[np.isin(run_id, np.unique(run_id[later[bad]]))]
        _, inv = np.unique(rows[sub], axis=0, return_inverse=True)
        first = np.full(inv.max() + 1, np.iinfo(np.int64).max, dtype=np.int64)
        np.minimum.at(first, inv.ravel(), sub)
        rep[sub] = first[inv.ravel()]
    return rep


def _settle_runs(rows, order, start, later):
    """:func:`first_of_equal_rows` when only the runs holding ``later`` share a hash: identity for
    every other row, exact grouping of the members of those runs."""
    k = len(rows)
    start_pos = np.flatnonzero(start)
    runs = np.unique(np.searchsorted(start_pos, later, side="right") - 1)
    lo = start_pos[runs]
    hi = np.append(start_pos, k)[runs + 1]
    lens = hi - lo
    members = np.repeat(lo, lens) + (np.arange(int(lens.sum())) - np.repeat(np.cumsum(lens) - lens, lens))
    sub = order[members]
    _, inv = np.unique(rows[sub], axis=0, return_inverse=True)
    inv = inv.ravel()
    first = np.full(inv.max() + 1, np.iinfo(np.int64).max, dtype=np.int64)
    np.minimum.at(first, inv, sub)
    rep = np.arange(k, dtype=np.int64)
    rep[sub] = first[inv]
    return rep


try:  # the traversal behind connected_components(connection="weak"), without its float64 copies
    from scipy.sparse.csgraph._traversal import _connected_components_undirected as _cc_undirected
except ImportError:  # pragma: no cover - other scipy versions: the public function (same labels, slower)
    _cc_undirected = None


def _cc_arrays(n: int, indices, indptr, indices_t, indptr_t) -> np.ndarray | None:
    """Component labels of a graph given as CSR rows and CSR columns (int32), or None if unavailable."""
    if _cc_undirected is None or n >= np.iinfo(np.int32).max or len(indices) >= np.iinfo(np.int32).max:
        return None
    labels = np.empty(n, dtype=np.int32)
    try:
        _cc_undirected(np.asarray(indices, np.int32), np.asarray(indptr, np.int32),
                       np.asarray(indices_t, np.int32), np.asarray(indptr_t, np.int32), labels)
    except (TypeError, ValueError):  # pragma: no cover - a changed private signature
        return None
    return labels


def _components(n: int, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Labels (0..k-1, numbered by lowest node) of the weakly connected components of edges a -> b."""
    graph = coo_matrix((np.ones(len(a), dtype=np.int8), (a, b)), shape=(n, n)).tocsr()
    if _cc_undirected is not None:
        gt = graph.T.tocsr()
        labels = _cc_arrays(n, graph.indices, graph.indptr, gt.indices, gt.indptr)
        if labels is not None:
            return labels
    return connected_components(graph, directed=True, connection="weak")[1]


def _face_components(m: int, ea: np.ndarray, eb: np.ndarray) -> np.ndarray:
    """Pieces of faces joined by manifold edges, from the paired directed-edge positions ``ea``, ``eb``.

    Each face lists its three neighbours across its edges (itself across a boundary edge): a
    symmetric CSR graph built without sorting, whose transpose is itself.
    """
    nbr = np.repeat(np.arange(m, dtype=np.int32), 3)
    nbr[ea] = eb // 3
    nbr[eb] = ea // 3
    indptr = np.arange(0, 3 * m + 1, 3, dtype=np.int32) if 3 * m < np.iinfo(np.int32).max else None
    labels = None if indptr is None else _cc_arrays(m, nbr, indptr, nbr, indptr)
    if labels is None:
        return _components(m, ea // 3, eb // 3)
    return labels


@dataclass
class _Edges:
    order: np.ndarray    # (3m,) directed-edge positions (face * 3 + corner), sorted by undirected key
    starts: np.ndarray   # start of each run of equal keys in ``order``
    runlen: np.ndarray   # length of each run (1 boundary, 2 manifold, > 2 non-manifold)
    down: np.ndarray = None  # (3m,) bool, directed edge ``pos`` runs from its larger vertex to its smaller


def _edge_runs(f: np.ndarray, n: int) -> _Edges:
    e0 = f.ravel()
    e1 = np.empty_like(f)
    e1[:, :2] = f[:, 1:]
    e1[:, 2] = f[:, 0]
    e1 = e1.ravel()
    down = e0 > e1
    key = np.minimum(e0, e1)
    key *= n
    key += np.maximum(e0, e1, out=e1)
    del e1
    k = len(key)
    ib = _index_bits(k)
    small = np.int32 if k < np.iinfo(np.int32).max else np.int64  # halves the memory below
    if 2 * _index_bits(n) + ib <= 63 and ib <= 31 and np.little_endian:
        # packed sort as in _sort_with_index, but the positions are read as int32 straight from the low
        # words of the sorted keys, and runs are found on the packed keys without unpacking them
        packed = key
        packed <<= ib
        packed |= np.arange(k, dtype=np.int64)
        packed.sort()
        order = packed.view(np.int32)[0::2] & np.int32((1 << ib) - 1)
        packed >>= ib
        ks = packed
    else:
        order, ks = _sort_with_index(key, 2 * _index_bits(n))
        order = order.astype(small)
    start = np.empty(k, dtype=bool)
    start[0] = True
    np.not_equal(ks[1:], ks[:-1], out=start[1:])
    del ks, key
    starts = np.flatnonzero(start).astype(small)
    return _Edges(order, starts, np.diff(np.append(starts, small(k))), down)


def _edge_ends(f: np.ndarray, pos: np.ndarray):
    flat = f.ravel()
    corner = pos % 3
    return flat[pos], flat[pos + np.where(corner == 2, -2, 1)]


def _face_area_volume(vertices: np.ndarray, f: np.ndarray, center: np.ndarray, block: int = 1 << 14):
    """Twice each face's area, and its signed volume term 2 (c - center) . n_area, in blocks of faces.

    Summed over a closed patch the volume terms give 6 x its enclosed volume, whatever ``center`` is.
    Blocks of 2^14 faces keep the temporaries in cache (measured 30% faster than 2^18 blocks here,
    and far faster than whole-mesh arrays).
    """
    m = len(f)
    area2 = np.empty(m)
    vol = np.empty(m)
    vx, vy, vz = (np.ascontiguousarray(vertices[:, k] - center[k]) for k in range(3))
    for s0 in range(0, m, block):
        fb = f[s0:s0 + block]
        i0, i1, i2 = fb[:, 0], fb[:, 1], fb[:, 2]
        x0, y0, z0 = vx[i0], vy[i0], vz[i0]
        ax, ay, az = vx[i1] - x0, vy[i1] - y0, vz[i1] - z0
        bx, by, bz = vx[i2] - x0, vy[i2] - y0, vz[i2] - z0
        nx = ay * bz - az * by
        ny = az * bx - ax * bz
        nz = ax * by - ay * bx
        area2[s0:s0 + block] = np.sqrt(nx * nx + ny * ny + nz * nz)
        # centroid = v0 + (a + b) / 3
        vol[s0:s0 + block] = (x0 + (ax + bx) / 3.0) * nx + (y0 + (ay + by) / 3.0) * ny + (z0 + (az + bz) / 3.0) * nz
    return area2, vol


def _run_members(edges: _Edges, runs: np.ndarray):
    """Positions in ``order`` of every member of the given runs, and of each one's run head."""
    st, rl = edges.starts[runs], edges.runlen[runs]
    head = np.repeat(st, rl)
    offs = np.arange(len(head)) - np.repeat(np.cumsum(rl) - rl, rl)
    return head, head + offs
