"""Headless views of the specimen with its bands coloured (matplotlib Agg, no display, no GPU).

The mesh is first reduced to a few tens of thousands of triangles with open3d's vertex clustering
(fast on millions of faces, unlike quadric decimation), each kept triangle takes the band of the
nearest original vertex, and the triangles are drawn as a ``Poly3DCollection`` shaded by their normals
with two-sided Lambert lighting, in an orthographic projection with equal scales on all three axes.
"""
from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

from .palette import UNASSIGNED_RGB, band_colors

#: The views drawn: (title, elevation in degrees, azimuth of the viewer in matplotlib's convention,
#: the axis seen nearly end-on whose labels would only crowd the view, or None).
VIEWS = (("from the south", 12.0, -80.0, "y"), ("from the west", 12.0, 190.0, "x"),
         ("oblique, from above the north-east", 35.0, 45.0, None))


def _face_band(faces: np.ndarray, vertex_band: np.ndarray) -> np.ndarray:
    """Band of each face: the majority of its three vertices (the first vertex on a three-way tie)."""
    b = vertex_band[faces]
    out = b[:, 0].copy()
    agree12 = b[:, 1] == b[:, 2]
    out[agree12] = b[agree12, 1]
    return out


def decimate_for_render(vertices_mm, faces, vertex_band, target_faces=16000, seed=0):
    """Reduce a mesh for drawing and give each kept triangle a band.

    Parameters
    ----------
    vertices_mm : (n, 3) float
    faces : (m, 3) int
    vertex_band : (n,) int
    target_faces : int
        Rough number of triangles to keep.

    Returns
    -------
    triangles : (k, 3, 3) float
        Corner positions of each kept triangle, mm.
    face_band : (k,) int
        Band of each kept triangle (-1 outside the banded stretch).
    """
    v = np.asarray(vertices_mm, float)
    f = np.asarray(faces, np.int64)
    vb = np.asarray(vertex_band, np.int64)
    if len(f) <= target_faces:
        return v[f], _face_band(f, vb)
    import open3d as o3d

    rng = np.random.default_rng(seed)
    sample = f[rng.integers(0, len(f), size=min(len(f), 100_000))]     # area from a face sample
    tri = v[sample]
    area = 0.5 * np.linalg.norm(np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0]), axis=1).mean() * len(f)
    voxel = float(np.sqrt(2.0 * area / target_faces))
    mesh = o3d.geometry.TriangleMesh(o3d.utility.Vector3dVector(np.ascontiguousarray(v)),
                                     o3d.utility.Vector3iVector(np.ascontiguousarray(f, dtype=np.int32)))
    small = mesh.simplify_vertex_clustering(voxel_size=voxel,
                                            contraction=o3d.geometry.SimplificationContraction.Average)
    sv, sf = np.asarray(small.vertices), np.asarray(small.triangles, np.int64)
    # Label lookup on a random subset of the original vertices: at drawing scale the subset is dense
    # enough, and a tree on it is quick to build.
    n_pick = 200_000
    pick = np.sort(rng.permutation(len(v))[:n_pick]) if len(v) > n_pick else \
        np.arange(len(v))
    _, near = cKDTree(v[pick]).query(sv[sf].mean(axis=1), k=1, workers=2)
    return sv[sf], vb[pick][near]


def _shade(triangles: np.ndarray, face_band: np.ndarray, light: np.ndarray) -> np.ndarray:
    n = np.cross(triangles[:, 1] - triangles[:, 0], triangles[:, 2] - triangles[:, 0])
    norm = np.linalg.norm(n, axis=1, keepdims=True)
    n = np.divide(n, norm, out=np.zeros_like(n), where=norm > 0)
    intensity = 0.35 + 0.65 * np.abs(n @ (light / np.linalg.norm(light)))
    rgb = band_colors(face_band).astype(float) / 255.0
    return np.clip(rgb * intensity[:, None], 0, 1)


def _eye(elev_deg: float, azim_deg: float) -> np.ndarray:
    e, a = np.radians(elev_deg), np.radians(azim_deg)
    return np.array([np.cos(e) * np.cos(a), np.cos(e) * np.sin(a), np.sin(e)])


def render_views(triangles, face_band, north_known=True, views=VIEWS, figsize=(11.0, 6.2), dpi=110,
                 rasterized=True):
    """Figure with one orthographic view per entry of ``views``, bands coloured, axes in mm.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib.figure import Figure
    from matplotlib.patches import Patch
    from matplotlib.ticker import MaxNLocator
    from mpl_toolkits.mplot3d.art3d import Poly3DCollection

    fig = Figure(figsize=figsize, dpi=dpi, layout="constrained")
    lo, hi = triangles.reshape(-1, 3).min(axis=0), triangles.reshape(-1, 3).max(axis=0)
    centre, half = (lo + hi) / 2.0, (hi - lo) / 2.0
    half = np.maximum(half, 1e-6)
    xlab, ylab = ("x (east), mm", "y (north), mm") if north_known else \
        ("x, mm", "y (arbitrary horizontal), mm")
    for k, (title, elev, azim, end_on) in enumerate(views):
        ax = fig.add_subplot(1, len(views), k + 1, projection="3d", proj_type="ortho")
        eye = _eye(elev, azim)
        light = eye + np.array([0.3, 0.3, 0.6])
        pc = Poly3DCollection(triangles, facecolors=_shade(triangles, face_band, light),
                              edgecolors="none", linewidths=0.0, antialiased=False)
        pc.set_rasterized(rasterized)
        ax.add_collection3d(pc)
        ax.set_xlim(centre[0] - half[0], centre[0] + half[0])
        ax.set_ylim(centre[1] - half[1], centre[1] + half[1])
        ax.set_zlim(centre[2] - half[2], centre[2] + half[2])
        ax.set_box_aspect(tuple(2 * half))
        ax.view_init(elev=elev, azim=azim)
        ax.set_xlabel(xlab, fontsize=7, labelpad=-2)
        ax.set_ylabel(ylab, fontsize=7, labelpad=-2)
        ax.set_zlabel("z (up), mm", fontsize=7, labelpad=-2)
        ax.tick_params(labelsize=6, pad=0)
        for axis_ in (ax.xaxis, ax.yaxis):
            axis_.set_major_locator(MaxNLocator(3))
        if end_on is not None:                      # seen end-on: its ticks would overlap
            getattr(ax, f"set_{end_on}ticklabels")([])
            getattr(ax, f"set_{end_on}label")("")
        ax.set_title(title, fontsize=9)
    handles = [Patch(color=tuple(c / 255.0), label=f"bands {i}, {i + 7}, {i + 14}, ...") for i, c in
               enumerate(band_colors(np.arange(7)))]
    handles.append(Patch(color=tuple(UNASSIGNED_RGB / 255.0), label="outside the banded stretch"))
    fig.legend(handles=handles, loc="outside lower center", ncol=4, fontsize=7, frameon=False)
    return fig
