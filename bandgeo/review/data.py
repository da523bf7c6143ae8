"""What the review page shows, read from an analysed folder: a decimated mesh, the unrolled side
surface, a profile along the growth axis, boundary traces and the current result.

Only fixed file names inside the folder are read (``store.inside`` refuses links that lead out).
"""
from __future__ import annotations

import base64
import json
import threading
import warnings

import numpy as np
from scipy.ndimage import gaussian_filter

from ..errors import InputError, ReviewError
from ..unroll import axis_frames, unroll  # the one projection about the centreline
from .store import inside

#: Azimuth samples of a boundary trace (degrees, 0..360 inclusive).
TRACE_AZ = np.linspace(0.0, 360.0, 73)


def b64(array: np.ndarray) -> str:
    """Little-endian bytes of ``array`` as base64 text (for typed arrays in the page)."""
    return base64.b64encode(np.ascontiguousarray(array).astype(array.dtype.newbyteorder("<")).tobytes()
                            ).decode("ascii")


class FolderData:
    """The analysed folder as the page needs it; heavy parts are computed once, on first use.

    Parameters
    ----------
    folder : path
        Holds ``segmentation.json``, ``segmentation_labels.npz``, ``specimen.npz`` and ``result.json``.
    segmentation : Segmentation, optional
        Use this instead of ``Segmentation.load(folder)``.
    """

    def __init__(self, folder, segmentation=None, target_faces=60000):
        self.folder = folder
        self.target_faces = int(target_faces)
        self._lock = threading.Lock()
        self._cache: dict = {}
        if segmentation is None:
            for name in ("segmentation.json", "segmentation_labels.npz"):
                if not inside(folder, name).is_file():
                    raise InputError(f"{folder} holds no {name}; run 'bandgeo analyze SCAN --out {folder}' "
                                     f"first")
            from ..segment import Segmentation

            segmentation = Segmentation.load(folder)
        self.segmentation = segmentation
        path = inside(folder, "specimen.npz")
        if not path.is_file():
            raise InputError(f"{folder} holds no specimen.npz; run 'bandgeo analyze SCAN --out {folder}' first")
        with np.load(path, allow_pickle=False) as data:
            self.vertices = np.asarray(data["vertices_mm"], np.float32)
            self.faces = np.asarray(data["faces"], np.int32)
            self.colors = np.asarray(data["colors"], np.uint8) if "colors" in data.files else None
            meta = json.loads(data["meta_json"].tobytes().decode("utf-8")) if "meta_json" in data.files else {}
        self.meta = meta
        self.specimen_id = meta.get("specimen_id") or "specimen"
        self.scan_sha256 = meta.get("scan_sha256")
        from .basis import basis_of

        self.basis = basis_of(meta, segmentation)
        heights = np.asarray(segmentation.axis.heights_mm, float)
        self.span = (float(heights[0]), float(heights[-1]))
        self.s, self.az, self.r = unroll(self.vertices, segmentation.axis)
        self._offsets = self._boundary_offsets()

    # -- result ------------------------------------------------------------------------------------
    def result(self) -> dict | None:
        path = inside(self.folder, "result.json")
        if not path.is_file():
            return None
        try:
            return json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError) as exc:
            raise ReviewError(f"{path} is unreadable ({exc}); re-run 'bandgeo analyze'") from None

    # -- boundary traces ---------------------------------------------------------------------------
    def radius_at(self, s) -> np.ndarray:
        """Median distance of the surface from the axis near heights ``s`` (mm)."""
        edges = np.linspace(self.span[0], self.span[1], 201)
        idx = np.clip(np.searchsorted(edges, self.s) - 1, 0, 199)
        sums = np.bincount(idx, self.r, 200)
        counts = np.bincount(idx, None, 200)
        mean = np.where(counts > 0, sums / np.maximum(counts, 1), np.nan)
        ok = np.isfinite(mean)
        centres = 0.5 * (edges[1:] + edges[:-1])
        return np.interp(s, centres[ok], mean[ok]) if ok.any() else np.ones_like(np.asarray(s, float))

    def _boundary_offsets(self):
        """Heights (k,) of the automatic boundaries and their ring offsets along the axis (k, 73) mm."""
        bs = sorted(self.segmentation.boundaries, key=lambda b: b.height_mm)
        if not bs:
            return np.zeros(0), np.zeros((0, TRACE_AZ.size))
        h = np.array([b.height_mm for b in bs], float)
        p, t, north, east = axis_frames(self.segmentation.axis, h)
        rho = self.radius_at(h)
        a = np.radians(TRACE_AZ)
        d = np.sin(a)[None, :, None] * east[:, None, :] + np.cos(a)[None, :, None] * north[:, None, :]
        c = np.array([b.center_mm for b in bs], float)
        n = np.array([b.normal for b in bs], float)
        n /= np.linalg.norm(n, axis=1, keepdims=True)
        nt = np.einsum("ij,ij->i", n, t)
        nt = np.where(np.abs(nt) < 0.2, np.sign(nt + 1e-12) * 0.2, nt)  # cap at about 78 degrees tilt
        gap = (c - p)[:, None, :] - rho[:, None, None] * d
        delta = np.einsum("ij,ikj->ik", n, gap) / nt[:, None]
        return h, np.clip(delta, -rho[:, None], rho[:, None])

    def offset_at(self, s, az_deg) -> np.ndarray:
        """Ring offset (mm) at heights ``s`` and azimuths ``az_deg``, interpolated between boundaries."""
        h, delta = self._offsets
        s, az = np.broadcast_arrays(np.asarray(s, float), np.asarray(az_deg, float))
        if h.size == 0:
            return np.zeros(s.shape)
        j = np.clip(np.searchsorted(h, s) - 1, 0, max(h.size - 2, 0))
        k = np.minimum(j + 1, h.size - 1)
        w = np.where(h[k] > h[j], np.clip((s - h[j]) / np.where(h[k] > h[j], h[k] - h[j], 1), 0, 1), 0.0)
        col = np.clip(np.round(np.mod(az, 360.0) / 5.0).astype(int), 0, TRACE_AZ.size - 1)
        return (1 - w) * delta[j, col] + w * delta[k, col]

    def boundary_info(self) -> dict:
        """Per automatic boundary id: fit figures for the side panel."""
        out = {}
        for b in self.segmentation.boundaries:
            out[int(b.id)] = {"rms_mm": _f(b.rms_mm), "coverage": _f(b.coverage),
                              "confidence": _f(b.confidence), "origin": str(b.origin)}
        return out

    # -- payloads for the page ---------------------------------------------------------------------
    def _cached(self, key, fn):
        with self._lock:
            if key not in self._cache:
                self._cache[key] = fn()
            return self._cache[key]

    def mesh_payload(self) -> dict:
        return self._cached("mesh", self._mesh)

    def surface_payload(self) -> dict:
        return self._cached("surface", self._surface)

    def _mesh(self) -> dict:
        v, f, col = decimate(self.vertices, self.faces, self.colors, self.target_faces)
        s, az, _ = unroll(v, self.segmentation.axis)
        s_corr = s - self.offset_at(s, az)
        centre = 0.5 * (v.max(axis=0) + v.min(axis=0))
        out = {"n_vertices": int(len(v)), "n_faces": int(len(f)), "n_faces_full": int(len(self.faces)),
               "centre_mm": centre.tolist(), "size_mm": float(np.ptp(v, axis=0).max()),
               "vertices": b64(v.astype(np.float32)), "faces": b64(f.astype(np.uint32)),
               "height": b64(s_corr.astype(np.float32)), "colors": None,
               "radius_mm": float(np.median(self.r)) if self.r.size else 1.0,
               "axis": self._axis_points(centre)}
        if col is not None:
            out["colors"] = b64(col.astype(np.uint8))
        return out

    def _axis_points(self, centre, n=256) -> dict:
        """The centreline at ``n`` heights (mm), its points moved by ``-centre`` like the mesh."""
        h = np.linspace(self.span[0], self.span[1], n)
        p, t, _, _ = axis_frames(self.segmentation.axis, h)
        return {"heights_mm": np.round(h, 5).tolist(), "points_mm": np.round(p - centre, 5).tolist(),
                "tangents": np.round(t, 5).tolist()}

    def _surface(self) -> dict:
        lo, hi = self.span
        bs = np.sort([b.height_mm for b in self.segmentation.boundaries])
        spacing = (getattr(self.segmentation, "resolution", None) or {}).get("band_spacing_mm")
        if not (isinstance(spacing, (int, float)) and np.isfinite(spacing) and spacing > 0):
            spacing = float(np.median(np.diff(bs))) if bs.size > 2 else None
        # About eight rows a band where the vertices allow it (about 1.5 vertices a cell): height
        # resolution matters more than azimuth, so the columns give way first.
        n = len(self.s)
        want = (hi - lo) / (spacing / 8.0) if spacing else n / (1.5 * 180)
        cols = int(np.clip(n / (1.5 * want), 36, 360))
        rows = int(np.clip(min(want, n / (1.5 * cols)), 400, 4000))
        spacing = spacing or (hi - lo) / 100.0
        s_corr = self.s - self.offset_at(self.s, self.az)
        ri = np.floor((s_corr - lo) / (hi - lo) * rows).astype(np.int64)
        ci = np.clip(np.floor(self.az / 360.0 * cols).astype(np.int64), 0, cols - 1)
        ok = (ri >= 0) & (ri < rows)
        flat = ri[ok] * cols + ci[ok]
        count = np.bincount(flat, None, rows * cols).reshape(rows, cols)
        radius = np.bincount(flat, self.r[ok], rows * cols).reshape(rows, cols)
        layers = {"relief": _relief(radius, count, rows * spacing / (hi - lo))}
        if self.colors is not None:
            lum = self.colors[ok].astype(float) @ np.array([0.2126, 0.7152, 0.0722])
            layers["colour"] = _smooth_mean(np.bincount(flat, lum, rows * cols).reshape(rows, cols), count)
        out = {"rows": rows, "cols": cols, "s0_mm": lo, "s1_mm": hi, "layers": {}, "profiles": {}}
        for name, grid in layers.items():
            img, prof = _to_uint8(grid)
            out["layers"][name] = b64(img)
            out["profiles"][name] = [None if not np.isfinite(x) else round(float(x), 5) for x in prof]
        out["profile_units"] = {"relief": "mm", "colour": "luminance 0-255"}
        return out

    def traces(self, heights) -> list:
        """Offsets (mm, 73 azimuths) of rings at ``heights``, for drawing on the unrolled surface."""
        heights = np.asarray(heights, float)
        if heights.size == 0:
            return []
        off = self.offset_at(heights[:, None], TRACE_AZ[None, :])
        return np.round(off, 4).tolist()


def _f(x):
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if np.isfinite(x) else None


def _smooth_mean(sums, count, sigma=0.8):
    """Normalised convolution: the local mean where data are; gaps filled from a wider neighbourhood
    (up to about four cells away), NaN further from any data."""
    out = np.full(sums.shape, np.nan)
    for width in (sigma, 2.5 * sigma, 5.0 * sigma):
        num = gaussian_filter(sums, width, mode=("nearest", "wrap"))
        den = gaussian_filter(count.astype(float), width, mode=("nearest", "wrap"))
        fill = np.isnan(out) & (den > 0.05)
        out[fill] = num[fill] / den[fill]
    return out


def _relief(radius_sum, count, rows_per_band=6.0):
    """Radius minus its slowly varying trend (over height and azimuth): grooves negative, ridges
    positive (mm). The trend is a Gaussian average a few bands tall and about 20 degrees wide, so an
    axis slightly off centre or a swelling column does not swamp the bands."""
    mean = _smooth_mean(radius_sum, count)
    ok = np.isfinite(mean)
    sigma = (max(3.0 * rows_per_band, mean.shape[0] / 200.0), mean.shape[1] / 18.0)
    num = gaussian_filter(np.where(ok, mean, 0.0), sigma, mode=("nearest", "wrap"))
    den = gaussian_filter(ok.astype(float), sigma, mode=("nearest", "wrap"))
    with np.errstate(invalid="ignore", divide="ignore"):
        trend = num / den
    return np.where(ok, mean - trend, np.nan)


def _to_uint8(grid):
    """Grid to 1..255 (0 = no data) by its 2-98 percentiles; plus the row means (profile)."""
    finite = np.isfinite(grid)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # rows with no data give NaN
        prof = np.nanmean(grid, axis=1)
    if not finite.any():
        return np.zeros(grid.shape, np.uint8), prof
    lo, hi = np.percentile(grid[finite], [2, 98])
    scaled = np.clip((grid - lo) / max(hi - lo, 1e-12), 0, 1) * 254 + 1
    return np.where(finite, scaled, 0).astype(np.uint8), prof


def decimate(vertices, faces, colors, target_faces):
    """Reduce a mesh to about ``target_faces`` for display (open3d vertex clustering), keeping colours.

    Returns
    -------
    vertices (k,3) float32, faces (q,3) int32, colors (k,3) uint8 or None
    """
    if len(faces) <= target_faces:
        return vertices, faces, colors
    import open3d as o3d

    mesh = o3d.geometry.TriangleMesh(o3d.utility.Vector3dVector(np.asarray(vertices, float)),
                                     o3d.utility.Vector3iVector(np.asarray(faces, np.int32)))
    if colors is not None:
        mesh.vertex_colors = o3d.utility.Vector3dVector(np.asarray(colors, float) / 255.0)
    # surface area from a fixed subsample of faces (plenty for choosing a voxel size)
    pick = np.random.default_rng(0).choice(len(faces), size=min(len(faces), 200_000), replace=False)
    tri = np.asarray(vertices, float)[np.asarray(faces)[pick]]
    area = 0.5 * np.linalg.norm(np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0]), axis=1).sum()
    area *= len(faces) / len(pick)
    voxel = np.sqrt(2.0 * area / target_faces)
    for _ in range(5):
        small = mesh.simplify_vertex_clustering(voxel_size=voxel,
                                                contraction=o3d.geometry.SimplificationContraction.Average)
        ratio = max(len(small.triangles), 1) / target_faces
        if 0.6 <= ratio <= 1.25:
            break
        voxel *= np.sqrt(ratio)  # faces go as 1 / voxel^2
    v = np.asarray(small.vertices, np.float32)
    f = np.asarray(small.triangles, np.int32)
    col = (np.clip(np.asarray(small.vertex_colors) * 255, 0, 255).astype(np.uint8)
           if colors is not None and small.has_vertex_colors() else None)
    return v, f, col
