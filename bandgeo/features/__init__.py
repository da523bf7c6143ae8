"""Per-vertex curvature features of a specimen mesh at several scales, and the band-spacing estimate.

The one-ring curvatures come from the cotangent Laplace-Beltrami operator with mixed Voronoi areas
(Meyer, Desbrun, Schroeder & Barr 2003, "Discrete differential-geometry operators for triangulated
2-manifolds") and the angle deficit; the coarser scales are area-weighted diffusion averages of these
fields on the mesh graph (a random walk whose spread along the growth axis equals the scale). Principal
curvatures, shape index and curvedness follow from the averaged mean and Gaussian curvature
(Koenderink & van Doorn 1992, "Surface shape and curvature scales", Image Vision Comput. 10:557-564).
Everything runs on faces in blocks, so a 10 M-face mesh fits in memory.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Optional

import numpy as np

from ..errors import InputError, ParameterError
from ..progress import report
from .curvature import (FACE_BLOCK, adjacency, adjacency_and_boundary, boundary_vertices,  # noqa: F401
                        luminance_from_colors, one_ring_curvature, orient_outward, rough_axis, sampling_along,
                        shape_index_curvedness)
from .spacing import estimate_spacing_from_profile, relief_profiles

#: Default curvature scales (Gaussian spread along the axis): for each, a fraction of the band spacing
#: and a multiple of the sampling interval, the larger of the two is used. The groove of a boundary is
#: narrow (a few tenths of a band, but never resolved finer than the sampling), so the fine scales sit
#: at the groove's half-width and the coarse one gives the context of the whole band. The one-ring
#: scale (0) is always computed too.
SCALE_RULES = ((0.08, 0.5), (0.15, 0.75), (0.3, 1.5))

#: Index (in the default scales, one-ring first) of the scale that best separates grooves.
GROOVE_SCALE_INDEX = 2

#: Most diffusion steps spent on the coarsest scale; beyond it the scale is reached only approximately.
MAX_STEPS = 400


@dataclass
class CurvatureFeatures:
    """Per-vertex curvature features at ``k`` scales.

    Attributes
    ----------
    scales_mm : (k,) float
        Gaussian spread of each scale along the growth axis, mm (0 = one ring).
    mean, gaussian : (n, k) float
        Mean curvature [1/mm] (positive on convex parts, normals outward) and Gaussian curvature [1/mm^2].
    k1, k2 : (n, k) float
        Principal curvatures [1/mm], k1 >= k2.
    shape_index : (n, k) float
        Koenderink & van Doorn shape index in [-1, 1]: +1 dome (cap), +0.5 ridge, 0 saddle, -0.5 rut
        (groove), -1 cup, with outward normals.
    curvedness : (n, k) float
        sqrt((k1^2 + k2^2) / 2) [1/mm].
    luminance : (n,) float or None
        Relative luminance of the vertex colour (0..1), None without colours.
    normals : (n, 3) float
        Unit outward vertex normals.
    band_spacing_mm : float
        Expected band spacing used to choose the scales, mm.
    band_spacing_method : str
        How the spacing was found.
    sampling_along_mm : float
        Sampling interval of the mesh along the growth axis, mm.
    noise_mm : float
        Scanner noise estimated from the one-ring normal residual, mm (rms).
    info : dict
        Details of the spacing estimate (spectrum peak, significance) and of the smoothing.
    """

    scales_mm: np.ndarray
    mean: np.ndarray
    gaussian: np.ndarray
    k1: Optional[np.ndarray] = None
    k2: Optional[np.ndarray] = None
    shape_index: Optional[np.ndarray] = None
    curvedness: Optional[np.ndarray] = None
    luminance: Optional[np.ndarray] = None
    normals: Optional[np.ndarray] = None
    band_spacing_mm: float = float("nan")
    band_spacing_method: str = ""
    sampling_along_mm: float = float("nan")
    noise_mm: float = float("nan")
    info: dict = field(default_factory=dict)

    @property
    def n_vertices(self) -> int:
        return int(self.mean.shape[0])

    @property
    def groove_scale_index(self) -> int:
        """Index of the scale that resolves the boundary grooves best (the default scales' second)."""
        return int(self.info.get("groove_scale_index", min(GROOVE_SCALE_INDEX, len(self.scales_mm) - 1)))

    def _discriminant(self) -> np.ndarray:
        """sqrt(max(H^2 - K, 0)), half the difference of the principal curvatures."""
        return np.sqrt(np.maximum(self.mean * self.mean - self.gaussian, 0.0))

    def matrix(self, luminance: bool = False) -> np.ndarray:
        """The (n, p) clustering matrix: mean curvature and shape index at every scale above one ring
        (the one-ring values are dominated by scanner noise), plus the luminance if asked.

        Columns are float32 and not standardised; the segmenter scales them robustly.
        """
        use = np.flatnonzero(self.scales_mm > 0) if np.any(self.scales_mm > 0) else np.arange(len(self.scales_mm))
        cols = [self.mean, self.shape_index]
        lum = luminance and self.luminance is not None
        k = len(use)
        # written column by column into the float32 matrix (the same rounding as stacking in float64
        # and converting, without the float64 copies)
        out = np.empty((self.n_vertices, 2 * k + int(lum)), dtype=np.float32)
        for j, src in enumerate(cols):
            for i, c in enumerate(use):
                out[:, j * k + i] = src[:, c]
        if lum:
            out[:, 2 * k] = self.luminance
        return out


def _lazy(name: str, make):
    """A property for a derived field of :class:`CurvatureFeatures`: a value given to the constructor
    (or set later) is kept; otherwise it is computed from ``mean`` and ``gaussian`` on first use and
    cached, so the arrays the segmenter never reads cost neither time nor memory."""
    slot = "_" + name

    def get(self):
        value = self.__dict__.get(slot)
        if value is None:
            value = make(self)
            self.__dict__[slot] = value
        return value

    def put(self, value):
        self.__dict__[slot] = value

    return property(get, put, doc=f"{name} (computed from mean and gaussian curvature when first read)")


def _k1(self):
    return self.mean + self._discriminant()


def _k2(self):
    return self.mean - self._discriminant()


def _shape_index(self):
    # (2/pi) atan((k1 + k2) / (k1 - k2)) with k1 + k2 = 2H and k1 - k2 = 2 sqrt(H^2 - K)
    return (2.0 / np.pi) * np.arctan2(self.mean, self._discriminant())


def _curvedness(self):
    d = self._discriminant()
    return np.sqrt(self.mean * self.mean + d * d)  # sqrt((k1^2 + k2^2) / 2)


# the dataclass __init__ assigns these attributes, which now go through the properties
CurvatureFeatures.k1 = _lazy("k1", _k1)
CurvatureFeatures.k2 = _lazy("k2", _k2)
CurvatureFeatures.shape_index = _lazy("shape_index", _shape_index)
CurvatureFeatures.curvedness = _lazy("curvedness", _curvedness)


# ---------------------------------------------------------------------------- input checks
def _mesh_arrays(specimen):
    try:
        v = np.asarray(specimen.vertices_mm, dtype=np.float64)
        f = np.asarray(specimen.faces, dtype=np.int64)
    except AttributeError:
        raise InputError("expected a Specimen with vertices_mm and faces; prepare the scan with "
                         "bandgeo.scan.prepare first") from None
    if v.ndim != 2 or v.shape[1] != 3 or len(v) < 4:
        raise InputError(f"expected vertices_mm of shape (n, 3) with n >= 4 but got {v.shape}")
    if f.ndim != 2 or f.shape[1] != 3 or len(f) < 2:
        raise InputError(f"expected faces of shape (m, 3) with m >= 2 but got {f.shape}")
    if f.min() < 0 or f.max() >= len(v):
        raise InputError("faces refer to vertices that do not exist; re-export the mesh")
    if not np.all(np.isfinite(v)):
        raise InputError("vertices_mm holds NaN or infinite coordinates; clean the scan first")
    return v, f




# ---------------------------------------------------------------------------- spacing estimate


def estimate_band_spacing(specimen, _cache: Optional[dict] = None):
    """Dominant spacing of the side-wall relief along the growth axis, mm, and details.

    The one-ring mean curvature is binned along the rough growth axis in narrow angular sectors; the
    averaged periodogram of these profiles has its fundamental peak at one over the band spacing. No
    parameter is tuned per specimen.

    Returns
    -------
    spacing_mm : float
        NaN when no periodic relief stands out of the noise (``info['significant']`` False).
    info : dict
        ``method``, ``significant``, ``peak_to_noise``, ``sampling_along_mm``, ``axis``.
    """
    cache = _cache if _cache is not None else {}
    if "vf" in cache:  # compute_features has checked the arrays already
        v, f = cache["vf"]
    else:
        v, f = _mesh_arrays(specimen)
    if "lap" not in cache:
        cache.update(_one_ring(v, f))
    axis = cache["axis"]
    h0 = cache["H0"]
    samp = sampling_along(v, f, axis)
    prof = relief_profiles(v, h0, cache["valid"], axis, samp, normals=cache["normals"])
    spacing, info = estimate_spacing_from_profile(prof)
    info["sampling_along_mm"] = samp
    info["axis"] = axis.tolist()
    cache["sampling_along_mm"] = samp
    return spacing, info


def _one_ring(v, f, boundary=None):
    lap, gauss, area, normals, boundary = one_ring_curvature(v, f, boundary=boundary)
    axis = rough_axis(v)
    sign = orient_outward(v, normals, axis)
    normals *= sign
    h0 = -0.5 * np.einsum("ij,ij->i", lap, normals)
    del lap
    valid = ~boundary & np.isfinite(h0) & np.isfinite(gauss)
    h0 = np.where(valid, h0, 0.0)
    gauss = np.where(valid, gauss, 0.0)
    return {"lap": True, "H0": h0, "K0": gauss, "area": area, "normals": normals, "valid": valid,
            "axis": axis}


def noise_estimate(v, f, normals, valid, adj=None) -> float:
    """Scanner noise (rms, mm) from the normal component of each vertex's offset from its neighbours.

    For white noise of rms s and d neighbours the offset has rms s * sqrt(1 + 1/d); the median
    absolute deviation makes it robust to the grooves themselves (common practice).
    """
    n = len(v)
    a = adjacency(f, n) if adj is None else adj
    deg = np.asarray(a.sum(axis=1)).ravel()
    mean_nb = (a @ v) / np.maximum(deg, 1)[:, None]
    r = np.einsum("ij,ij->i", v - mean_nb, normals)[valid]
    if len(r) == 0:
        return float("nan")
    # curvature of the surface itself adds a smooth offset: take the residual from its local median
    r_s = (a @ np.where(valid, np.einsum("ij,ij->i", v - mean_nb, normals), 0.0))
    r_s = r_s[valid] / np.maximum(deg[valid], 1)
    mad = np.median(np.abs((r - r_s) - np.median(r - r_s)))
    dmed = float(np.median(deg[valid]))
    return float(1.4826 * mad / np.sqrt(1.0 + 1.0 / max(dmed, 1.0)))


# ---------------------------------------------------------------------------- main entry
#: Meshes with more faces than this are processed in overlapping slabs along the axis (same numbers,
#: bounded memory); see :func:`compute_features`. At 10 M faces the one-piece run took 18 s CPU and
#: 2.1 GB, three slabs 23 s and 1.8 GB (benchmarks/bench_scale.py): slabs only where memory needs them.
CHUNK_FACES = 12_000_000


def compute_features(specimen, band_spacing_mm: Optional[float] = None, scales_mm=None,
                     progress=None, chunk_faces: Optional[int] = None) -> CurvatureFeatures:
    """Multi-scale curvature features of every vertex.

    Parameters
    ----------
    specimen : bandgeo.scan.Specimen
        Needs ``vertices_mm (n, 3)``, ``faces (m, 3)`` and ``colors (n, 3) | None``.
    band_spacing_mm : float, optional
        Expected band spacing; estimated from the relief (:func:`estimate_band_spacing`) when None.
    scales_mm : sequence of float, optional
        Curvature scales (Gaussian spread along the growth axis, mm; 0 = one ring). Default:
        ``SCALE_FRACTIONS`` times the band spacing, each at least the sampling interval.
    progress : callable, optional
        ``progress(description, done, total)``.
    chunk_faces : int, optional
        Work in slabs along the growth axis of about this many faces each (default ``CHUNK_FACES``).
        Each slab is taken with a margin wide enough that every computation reaching its vertices
        (the one-ring operators, the noise residual, every diffusion step) sees the whole mesh it
        would see in one piece, so the features are the same numbers (up to summation order); only
        the memory held at once is bounded. ``info['processing']`` says how it was done.

    Returns
    -------
    CurvatureFeatures
    """
    from ._slabs import compute_in_slabs

    v, f = _mesh_arrays(specimen)
    limit = CHUNK_FACES if chunk_faces is None else int(chunk_faces)
    if limit < 1:
        raise ParameterError(f"chunk_faces must be a positive number of faces but got {chunk_faces!r}")

    def choose_scales(est_spacing, info, samp):
        if band_spacing_mm is not None:
            if not np.isfinite(band_spacing_mm) or band_spacing_mm <= 0:
                raise ParameterError(f"band_spacing_mm must be a positive number but got {band_spacing_mm!r}")
            spacing, method = float(band_spacing_mm), "given"
        elif np.isfinite(est_spacing):
            spacing, method = float(est_spacing), info["method"]
        else:
            spacing, method = float(8.0 * samp), "fallback: 8 x sampling interval (no periodic relief found)"
        if scales_mm is None:
            scales = [0.0] + [max(fr * spacing, m * samp) for fr, m in SCALE_RULES]
        else:
            scales = [float(s) for s in np.atleast_1d(scales_mm)]
            if any((not np.isfinite(s)) or s < 0 for s in scales):
                raise ParameterError(f"scales_mm must be non-negative numbers but got {scales_mm!r}")
        return np.asarray(sorted(scales), dtype=float), spacing, method

    if band_spacing_mm is not None and (not np.isfinite(band_spacing_mm) or band_spacing_mm <= 0):
        raise ParameterError(f"band_spacing_mm must be a positive number but got {band_spacing_mm!r}")
    r = compute_in_slabs(v, f, choose_scales, limit, MAX_STEPS, progress)
    scales, H, K = r["scales"], r["H"], r["K"]
    # shape index from 2H = k1 + k2 and 2 sqrt(H^2 - K) = k1 - k2, in place (one (n, k) temporary)
    si_ = np.multiply(H, H)
    si_ -= K
    np.maximum(si_, 0.0, out=si_)
    np.sqrt(si_, out=si_)
    np.arctan2(H, si_, out=si_)
    si_ *= 2.0 / np.pi
    info = dict(r["info"])
    if scales_mm is None:
        info["groove_scale_index"] = GROOVE_SCALE_INDEX
    else:
        pos = np.flatnonzero(scales > 0)
        info["groove_scale_index"] = int(pos[0]) if len(pos) else 0
    est_spacing = r["est_spacing"]
    info.update({"diffusion_steps": r["steps"], "step_spread_along_mm": float(np.sqrt(r["step_var"])),
                 "spacing_estimate_mm": None if not np.isfinite(est_spacing) else float(est_spacing),
                 "processing": r["processing"]})
    report(progress, "curvature: done", 4, 4)
    return CurvatureFeatures(scales_mm=scales, mean=H, gaussian=K, shape_index=si_,
                             luminance=luminance_from_colors(getattr(specimen, "colors", None)),
                             normals=r["normals"], band_spacing_mm=r["spacing"], band_spacing_method=r["method"],
                             sampling_along_mm=r["samp"], noise_mm=r["noise"], info=info)
