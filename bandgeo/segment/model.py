"""Data objects of the segmentation stage: boundaries, the segmentation, and band assignment."""
from __future__ import annotations

import copy
import threading
from dataclasses import dataclass, field
from typing import Optional

import numpy as np

from ..errors import InputError, ParameterError
from . import io as _io
from .axis import Centreline

ORIGINS = ("auto", "review")


@dataclass
class Boundary:
    """One lamina boundary: a closed or partial ring on the side wall, fitted by a plane.

    Attributes
    ----------
    id : int
        Stable identifier (kept through review edits).
    height_mm : float
        Arc length along the centreline where the ring's plane crosses it, mm.
    center_mm : (3,) float
        Centre of the ring (on the centreline for a full ring), specimen frame, mm.
    normal : (3,) float
        Unit normal of the ring plane, pointing up the column (the local growth direction).
    rms_mm : float
        Rms distance of the ring's groove vertices from the plane, mm.
    coverage : float
        Fraction (0..1) of the circumference traced.
    confidence : float
        0..1, see :mod:`bandgeo.segment.repair` for how it is made.
    origin : {'auto', 'review'}
    flags : list of str
        Repair rules applied and other remarks.
    """

    id: int
    height_mm: float
    center_mm: np.ndarray
    normal: np.ndarray
    rms_mm: float = float("nan")
    coverage: float = 0.0
    confidence: float = 0.0
    origin: str = "auto"
    flags: list = field(default_factory=list)

    def __post_init__(self):
        self.center_mm = np.asarray(self.center_mm, dtype=float).reshape(3)
        n = np.asarray(self.normal, dtype=float).reshape(3)
        norm = np.linalg.norm(n)
        if not np.isfinite(norm) or norm == 0:
            raise ParameterError(f"boundary {self.id}: the normal must be a non-zero vector but got {n.tolist()}")
        # normalise only when needed, so that a saved and reloaded unit normal stays bit for bit
        self.normal = n / norm if abs(norm - 1.0) > 1e-9 else n
        self.height_mm = float(self.height_mm)
        if self.origin not in ORIGINS:
            raise ParameterError(f"boundary origin must be one of {', '.join(ORIGINS)} but got {self.origin!r}")

    @classmethod
    def from_height(cls, height_mm: float, axis: Centreline, id: int, origin: str = "review",
                    confidence: float = 1.0) -> "Boundary":
        """A boundary at ``height_mm`` on the axis, in the plane perpendicular to the local axis."""
        try:
            h = float(height_mm)
        except (TypeError, ValueError):
            raise ParameterError(f"a boundary height must be a number in mm but got {height_mm!r}") from None
        if not np.isfinite(h):
            raise ParameterError(f"a boundary height must be finite but got {height_mm!r}")
        p, t = axis.at(h)
        return cls(id=int(id), height_mm=h, center_mm=p, normal=t, rms_mm=float("nan"), coverage=0.0,
                   confidence=float(confidence), origin=origin, flags=["placed by height"])

    def to_dict(self) -> dict:
        return {"id": int(self.id), "height_mm": self.height_mm, "center_mm": self.center_mm.tolist(),
                "normal": self.normal.tolist(), "rms_mm": self.rms_mm, "coverage": float(self.coverage),
                "confidence": float(self.confidence), "origin": self.origin, "flags": list(self.flags)}

    @classmethod
    def from_dict(cls, d: dict) -> "Boundary":
        rms = d.get("rms_mm")
        return cls(id=int(d["id"]), height_mm=float(d["height_mm"]), center_mm=d["center_mm"],
                   normal=d["normal"], rms_mm=float("nan") if rms is None else float(rms),
                   coverage=float(d.get("coverage", 0.0)), confidence=float(d.get("confidence", 0.0)),
                   origin=str(d.get("origin", "auto")), flags=list(d.get("flags", [])))


def plane_height(center: np.ndarray, normal: np.ndarray, axis: Centreline, s0: Optional[float] = None,
                 iterations: int = 6) -> float:
    """Arc length where the plane (center, normal) crosses the centreline, mm."""
    s = float(axis.project(center[None, :])[0][0]) if s0 is None else float(s0)
    for _ in range(iterations):
        c, t = axis.at(s)
        den = float(np.dot(t, normal))
        if abs(den) < 1e-6:
            break
        s = s + float(np.dot(center - c, normal)) / den
    return s


def _assign(v: np.ndarray, s: np.ndarray, heights, centres, normals) -> np.ndarray:
    """The band rule of :func:`assign_bands` on vertices ``v`` with arc lengths ``s`` (elementwise: the
    answer for a vertex depends on that vertex and the boundaries only)."""
    m = len(heights)
    # start from the heights, then step across planes that disagree (at most a few steps)
    k = np.searchsorted(heights, s, side="right") - 1  # boundaries at or below: 0..len-1, -1 below all
    for _ in range(_STEPS):
        lo = np.clip(k, 0, m - 1)
        below_lo = np.einsum("ij,ij->i", v - centres[lo], normals[lo]) < 0
        k = np.where((k >= 0) & below_lo, k - 1, k)
        hi = np.clip(k + 1, 0, m - 1)
        above_hi = (k + 1 < m) & (np.einsum("ij,ij->i", v - centres[hi], normals[hi]) >= 0)
        k = np.where(above_hi, k + 1, k)
    band = np.where((k >= 0) & (k < m - 1), k, -1)
    return band.astype(np.int32)


#: Plane steps of the band rule after the first guess from the heights.
_STEPS = 4
#: Boundaries either side of a vertex's first guess that the band rule can look at (steps + margin).
_WINDOW = _STEPS + 2


def _boundary_key(b) -> tuple:
    """What the band rule reads of a boundary (its id, height and plane), exactly."""
    return (int(b.id), float(b.height_mm), *np.asarray(b.center_mm, float).tolist(),
            *np.asarray(b.normal, float).tolist())


class VertexProjection:
    """Arc length ``s`` (n,) and distance from the axis ``radius_mm`` (n,) of every vertex of one mesh
    about one centreline (``Centreline.project``, float64), kept for re-use: the band assignment, the
    band radii of the measurement and the review page's re-runs all read them.

    It also remembers the last band assignment made through it, so that the next one (a review edit
    moves, adds or removes a few boundaries) re-examines only the vertices near the boundaries that
    changed; the answer is the one a full assignment gives, vertex for vertex.
    """

    def __init__(self, vertices, axis):
        v = np.asarray(vertices, dtype=float)
        s, radial = axis.project(v)
        self.s = s
        self.radius_mm = np.linalg.norm(radial, axis=1)
        del radial
        self._order = None
        self._s_sorted = None
        self._last = None  # (keys of the sorted boundaries, band (n,) int32)
        self._lock = threading.Lock()
        self.n = len(v)
        #: Vertices the last assignment re-examined (all of them for a full one).
        self.last_examined = self.n

    def order(self):
        """Vertex indices sorted by arc length (made on first use), and the sorted arc lengths."""
        if self._order is None:
            order = np.argsort(self.s, kind="stable")
            self._order = order.astype(np.int32) if self.n < 2**31 else order
        if self._s_sorted is None or len(self._s_sorted) != self.n:
            return self._order, self.s[self._order]
        return self._order, self._s_sorted

    def keep_sorted(self) -> None:
        """Keep the sorted arc lengths too (for repeated incremental assignments: the review page)."""
        order, s_sorted = self.order()
        self._s_sorted = s_sorted

    def assign(self, vertices, bs) -> np.ndarray:
        """Band of each vertex for the boundaries ``bs`` sorted by height (see :func:`assign_bands`)."""
        v = np.asarray(vertices, dtype=float)
        heights = np.array([b.height_mm for b in bs], dtype=float)
        centres = np.array([b.center_mm for b in bs], dtype=float)
        normals = np.array([b.normal for b in bs], dtype=float)
        keys = [_boundary_key(b) for b in bs]
        with self._lock:
            last = self._last
        band = None
        if last is not None:
            band = self._update(v, last, keys, heights, centres, normals)
        if band is None:
            band = _assign(v, self.s, heights, centres, normals)
            self.last_examined = self.n
        with self._lock:
            self._last = (keys, band.copy())
        return band

    def _update(self, v, last, keys, heights, centres, normals):
        """The assignment for ``keys`` from the last one: vertices whose first guess lies more than
        ``_WINDOW`` boundaries from any change keep their band (renumbered); the rest are re-examined.
        None when too much changed for this to pay."""
        old_keys, old_band = last
        m, m_old = len(keys), len(old_keys)
        if m < 2 or m_old < 2:
            return None
        where = {k: i for i, k in enumerate(old_keys)}
        old_index = np.array([where.get(k, -1) for k in keys], dtype=np.int64)
        matched = old_index >= 0
        offset = np.where(matched, np.arange(m) - old_index, 0)
        # pair j..j+1 is "same" when both are matched with one offset (consecutive in the old list too)
        same = matched[:-1] & matched[1:] & (offset[:-1] == offset[1:])
        # first guesses g = -1..m-1; the rule reads boundaries g-_WINDOW..g+_WINDOW (clipped to the list)
        g = np.arange(-1, m)
        lo, hi = np.clip(g - _WINDOW, 0, m - 1), np.clip(g + _WINDOW, 0, m - 1)
        bad_pair = np.concatenate([[0], np.cumsum(~same)])  # bad pairs among 0..j-1
        clean = matched[lo] & (bad_pair[hi] - bad_pair[lo] == 0)
        o = offset[lo]
        # a window that reaches an end of the list must reach the same end of the old list
        clean &= (g - _WINDOW > 0) | (old_index[0] == 0) & (offset[0] == 0)
        clean &= (g + _WINDOW < m - 1) | (old_index[m - 1] == m_old - 1)
        order, s_sorted = self.order()
        # sorted positions of the vertices whose first guess is g: [cut[g+1], cut[g+2])
        cut = np.concatenate([[0], np.searchsorted(s_sorted, heights, side="left"), [self.n]])
        counts = np.diff(cut)
        dirty_count = int(counts[~clean].sum())
        if dirty_count > self.n // 2:
            return None
        shift = np.repeat(np.where(clean, o, 0).astype(np.int32), counts)
        band = old_band.copy()
        per_vertex = np.empty(self.n, np.int32)
        per_vertex[order] = shift
        np.add(band, per_vertex, out=band, where=band >= 0)
        if dirty_count:
            dirty_pos = np.repeat(~clean, counts)
            idx = order[dirty_pos]
            band[idx] = _assign(v[idx], self.s[idx], heights, centres, normals)
        self.last_examined = dirty_count
        return band


_projection_lock = threading.Lock()
_projections: list = []  # [(vertices, axis, fingerprint, VertexProjection)], most recently used last
_PROJECTIONS_KEPT = 2


def _fingerprint(vertices, axis) -> tuple:
    """A cheap check that neither object changed in place since it was projected."""
    v = np.asarray(vertices)
    step = max(1, len(v) // 257)
    sample = np.ascontiguousarray(v[::step]).tobytes()
    parts = [np.ascontiguousarray(np.asarray(getattr(axis, name), float)).tobytes()
             for name in ("heights_mm", "points_mm", "tangents")]
    return (v.shape, str(v.dtype), hash(sample), *(hash(p) for p in parts))


def vertex_projection(vertices, axis) -> VertexProjection:
    """The :class:`VertexProjection` of ``vertices`` (n, 3) mm about ``axis``, made once and kept for
    the last few (vertices, axis) pairs (by identity, checked against a fingerprint of both)."""
    fp = _fingerprint(vertices, axis)
    with _projection_lock:
        for i, (v, a, f, proj) in enumerate(_projections):
            if v is vertices and a is axis and f == fp:
                _projections.append(_projections.pop(i))
                return proj
        proj = VertexProjection(vertices, axis)
        _projections[:] = [e for e in _projections if not (e[0] is vertices and e[1] is axis)]
        _projections.append((vertices, axis, fp, proj))
        del _projections[:-_PROJECTIONS_KEPT]
    return proj


def clear_projections() -> None:
    """Forget the kept projections (frees their memory)."""
    with _projection_lock:
        _projections.clear()


def assign_bands(vertices_mm: np.ndarray, boundaries, axis: Centreline, s: Optional[np.ndarray] = None):
    """Band index of each vertex: ``k`` between boundaries ``k`` and ``k+1`` (base to top), else -1.

    A vertex lies above a boundary when its signed distance to the boundary's plane is positive;
    boundaries are taken in order of height.

    Parameters
    ----------
    vertices_mm : (n, 3) float
    boundaries : sequence of Boundary
    axis : Centreline
    s : (n,) float, optional
        Precomputed arc lengths of the vertices (``axis.project``). Without it the projection is taken
        from :func:`vertex_projection` (made once per mesh and axis), and an assignment that follows an
        earlier one on the same mesh re-examines only the vertices near the boundaries that changed.

    Returns
    -------
    (n,) int32
    """
    n = len(vertices_mm)
    bs = sorted(boundaries, key=lambda b: b.height_mm)
    if len(bs) < 2:
        return np.full(n, -1, dtype=np.int32)
    if s is None:
        return vertex_projection(vertices_mm, axis).assign(vertices_mm, bs)
    v = np.asarray(vertices_mm, dtype=float)
    heights = np.array([b.height_mm for b in bs])
    centres = np.array([b.center_mm for b in bs])
    normals = np.array([b.normal for b in bs])
    return _assign(v, np.asarray(s, dtype=float), heights, centres, normals)


@dataclass
class Segmentation:
    """Boundaries, growth axis and per-vertex labels of one specimen.

    Attributes
    ----------
    boundaries : list of Boundary
        Base to top.
    axis : Centreline
    vertex_class : (n,) int8
        Index into ``class_names``; -1 unassigned.
    class_names : list of str
    vertex_band : (n,) int32
        -1 outside the banded stretch.
    resolution : dict
        ``sampling_along_mm``, ``noise_mm``, ``relief_mm``, ``relief_to_noise``, ``band_spacing_mm``,
        ``flagged`` ([[s0_mm, s1_mm, reason], ...]).
    warnings : list of str
    params : dict
    """

    boundaries: list
    axis: Centreline
    vertex_class: np.ndarray
    class_names: list
    vertex_band: np.ndarray
    resolution: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)
    params: dict = field(default_factory=dict)

    @property
    def n_bands(self) -> int:
        return max(0, len(self.boundaries) - 1)

    def heights_mm(self) -> np.ndarray:
        return np.array([b.height_mm for b in self.boundaries], dtype=float)

    def with_boundaries(self, boundaries, specimen) -> "Segmentation":
        """A new segmentation with ``boundaries`` (sorted by height) and bands re-assigned.

        Parameters
        ----------
        boundaries : sequence of Boundary (or dicts of Boundary fields)
        specimen : bandgeo.scan.Specimen
            The specimen this segmentation belongs to (same vertex count).
        """
        v = np.asarray(getattr(specimen, "vertices_mm", None) if specimen is not None else None, dtype=float)
        if v.ndim != 2 or len(v) != len(self.vertex_band):
            raise InputError(f"the specimen has {v.shape[0] if v.ndim == 2 else 0} vertices but the "
                             f"segmentation labels {len(self.vertex_band)}; use the specimen it was made from")
        bs = [b if isinstance(b, Boundary) else Boundary.from_dict(b) for b in boundaries]
        ids = [b.id for b in bs]
        if len(set(ids)) != len(ids):
            raise ParameterError("boundary ids must be unique; give each added boundary a new id")
        bs = sorted((copy.deepcopy(b) for b in bs), key=lambda b: b.height_mm)
        band = assign_bands(specimen.vertices_mm, bs, self.axis)  # the specimen's own array: kept projection
        return Segmentation(boundaries=bs, axis=self.axis, vertex_class=self.vertex_class.copy(),
                            class_names=list(self.class_names), vertex_band=band,
                            resolution=copy.deepcopy(self.resolution), warnings=list(self.warnings),
                            params=copy.deepcopy(self.params))

    def save(self, folder):
        """Write ``segmentation.json`` and ``segmentation_labels.npz`` into ``folder`` (atomically)."""
        return _io.save_segmentation(self, folder)

    @classmethod
    def load(cls, folder) -> "Segmentation":
        """Read a segmentation written by :meth:`save`; malformed files raise InputError."""
        return _io.load_segmentation(folder, cls)

    @staticmethod
    def boundary_class():
        return Boundary
