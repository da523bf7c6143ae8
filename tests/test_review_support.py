"""Small stand-ins for a segmentation and an analysed folder, used by the review tests.

They follow the fields documented in DEVELOPERS.md (Boundary, Centreline, Segmentation) so that the
review code is tested without the segmenter; the browser test uses the real pipeline when present.
"""
from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import numpy as np

from bandgeo.atomic import write_json


@dataclasses.dataclass
class FakeBoundary:
    id: int
    height_mm: float
    center_mm: np.ndarray
    normal: np.ndarray
    rms_mm: float = 0.01
    coverage: float = 1.0
    confidence: float = 0.8
    origin: str = "auto"

    @classmethod
    def from_height(cls, height_mm, axis, id, origin="review"):
        point, tangent = axis.at(height_mm)
        return cls(int(id), float(height_mm), point, tangent, float("nan"), 0.0, 1.0, origin)


@dataclasses.dataclass
class FakeCentreline:
    heights_mm: np.ndarray
    points_mm: np.ndarray
    tangents: np.ndarray

    def at(self, s):
        p = np.array([np.interp(s, self.heights_mm, self.points_mm[:, j]) for j in range(3)])
        t = np.array([np.interp(s, self.heights_mm, self.tangents[:, j]) for j in range(3)])
        return p, t / np.linalg.norm(t)


@dataclasses.dataclass
class FakeSegmentation:
    boundaries: list
    axis: FakeCentreline
    vertex_band: np.ndarray
    resolution: dict = dataclasses.field(default_factory=dict)
    warnings: list = dataclasses.field(default_factory=list)
    params: dict = dataclasses.field(default_factory=dict)

    def with_boundaries(self, boundaries, specimen):
        boundaries = sorted(boundaries, key=lambda b: b.height_mm)
        z = np.asarray(specimen.vertices_mm)[:, 2]
        heights = np.array([b.height_mm for b in boundaries])
        band = np.searchsorted(heights, z).astype(np.int32) - 1
        band[(z < heights[0]) | (z >= heights[-1])] = -1 if len(heights) else -1
        return dataclasses.replace(self, boundaries=list(boundaries), vertex_band=band)


@dataclasses.dataclass
class FakeSpecimen:
    vertices_mm: np.ndarray
    faces: np.ndarray


def cylinder(radius=10.0, height=20.0, n_az=120, n_z=160, grooves=(), depth=0.15, width=0.12):
    """A grooved cylinder about the z axis (mm): vertices (n,3), faces (m,3), colours (n,3)."""
    az = np.linspace(0, 2 * np.pi, n_az, endpoint=False)
    z = np.linspace(0, height, n_z)
    A, Z = np.meshgrid(az, z)
    r = radius - depth * sum(np.exp(-0.5 * ((Z - g) / width) ** 2) for g in grooves) if len(grooves) else \
        np.full_like(Z, radius)
    v = np.stack([r * np.sin(A), r * np.cos(A), Z], axis=-1).reshape(-1, 3)
    i = np.arange(n_z - 1)[:, None] * n_az
    j = np.arange(n_az)[None, :]
    a, b = i + j, i + (j + 1) % n_az
    c, d = a + n_az, b + n_az
    faces = np.concatenate([np.stack([a, b, d], -1).reshape(-1, 3), np.stack([a, d, c], -1).reshape(-1, 3)])
    shade = (200 - 120 * (r.reshape(-1) < radius - depth / 2)).astype(np.uint8)
    colors = np.repeat(shade[:, None], 3, axis=1)
    return v, faces.astype(np.int64), colors


def make_folder(folder, n_bounds=12, spacing=1.5, specimen_id="KRB-12"):
    """Write a fixture analysed folder (specimen.npz, result.json) and return (folder, segmentation, specimen)."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    heights = 1.0 + spacing * np.arange(n_bounds)
    v, f, col = cylinder(grooves=heights, height=heights[-1] + 1.0)
    hz = np.linspace(0, heights[-1] + 1.0, 50)
    axis = FakeCentreline(hz, np.stack([0 * hz, 0 * hz, hz], 1), np.tile([0.0, 0.0, 1.0], (hz.size, 1)))
    bounds = [FakeBoundary(int(k), float(h), np.array([0, 0, h]), np.array([0, 0, 1.0]),
                           confidence=min(0.5 + 0.035 * k, 0.99)) for k, h in enumerate(heights)]
    specimen = FakeSpecimen(v, f)
    seg = FakeSegmentation(bounds, axis, np.zeros(len(v), np.int32)).with_boundaries(bounds, specimen)
    meta = np.frombuffer(json.dumps({"specimen_id": specimen_id, "scan_sha256": "0" * 64, "units": "mm",
                                     "mm_per_unit": 1.0, "scan_to_specimen": np.eye(4).tolist(),
                                     "scan_path": f"{specimen_id}.ply"}).encode(), np.uint8)
    np.savez(folder / "specimen.npz", vertices_mm=v.astype(np.float32), faces=f.astype(np.int32),
             colors=col, vertex_band=seg.vertex_band, meta_json=meta)
    write_json(folder / "result.json", {
        "schema": "bandgeo.result/1",
        "days_per_year": {"estimate": 401.5, "ci95": [388.0, 415.0], "significant": True,
                          "method": "fixture"},
        "bands": {"count": n_bounds - 1, "mean_thickness_mm": spacing}})
    return folder, seg, specimen


def make_real_folder(folder, n_bounds=12, spacing=1.5, specimen_id="KRB-31"):
    """Like ``make_folder`` but with bandgeo.segment's own objects, saved with ``Segmentation.save``
    so that ``Segmentation.load`` (and the CLI) read it. Needs bandgeo.segment."""
    from bandgeo.segment import Boundary, Centreline, Segmentation

    folder, fake, specimen = make_folder(folder, n_bounds=n_bounds, spacing=spacing, specimen_id=specimen_id)
    axis = Centreline(fake.axis.heights_mm, fake.axis.points_mm, fake.axis.tangents)
    bounds = [Boundary(b.id, b.height_mm, b.center_mm, b.normal, b.rms_mm, b.coverage, b.confidence, "auto")
              for b in fake.boundaries]
    n = len(specimen.vertices_mm)
    seg = Segmentation(bounds, axis, np.zeros(n, np.int8), ["flank"], np.zeros(n, np.int32),
                       resolution={"flagged": []}).with_boundaries(bounds, specimen)
    seg.save(folder)
    return folder, seg, specimen


def make_long_folder(folder, n_bands=1100, days_per_year=365.0, radius=3.0, n_az=32, seed=41):
    """A long invented record (KRB-41, Karrabin Formation scenario) for the review page at scale: a
    column whose band thicknesses follow an annual cycle of ``days_per_year`` bands, with a groove at
    every boundary, oriented by ``bandgeo.scan.prepare`` and given a segmentation built directly (no
    segmenter run): one boundary per groove, confidences drawn so that about a quarter are low, and a
    few flagged stretches. ``bandgeo.pipeline.rerun`` then writes the first result.

    Returns the folder."""
    import trimesh

    from bandgeo import pipeline
    from bandgeo.scan import load_scan, prepare
    from bandgeo.segment import Boundary, Centreline, Segmentation
    from bandgeo.state import save_specimen

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    k = np.arange(n_bands)
    thick = 0.15 * (1 + 0.3 * np.sin(2 * np.pi * k / days_per_year)) * (1 + 0.08 * rng.standard_normal(n_bands))
    bounds_z = 0.5 + np.concatenate([[0.0], np.cumsum(thick)])              # n_bands + 1 boundaries
    # four rings a band, the first on the boundary (the groove), plus a plain ring below and above
    z = np.concatenate([[0.0], (bounds_z[:-1, None] + thick[:, None] * np.array([0, .25, .5, .75])).ravel(),
                        [bounds_z[-1], bounds_z[-1] + 0.5]])
    groove = np.zeros(z.size, bool)
    groove[1:-2:4] = True
    groove[-2] = True
    az = np.linspace(0, 2 * np.pi, n_az, endpoint=False)
    A, Z = np.meshgrid(az, z)
    R = np.where(groove[:, None], radius - 0.03, radius) + 0.01 * np.sin(3 * A)
    v = np.stack([R * np.sin(A), R * np.cos(A), Z], -1).reshape(-1, 3)
    i = np.arange(z.size - 1)[:, None] * n_az
    j = np.arange(n_az)[None, :]
    a, b = i + j, i + (j + 1) % n_az
    faces = np.concatenate([np.stack([a, b + n_az, b], -1).reshape(-1, 3),
                            np.stack([a, a + n_az, b + n_az], -1).reshape(-1, 3)])
    # close the ends so the scan is a solid
    base = len(v)
    v = np.vstack([v, [[0, 0, z[0]], [0, 0, z[-1]]]])
    top0 = (z.size - 1) * n_az
    caps = [[base, (q + 1) % n_az, q] for q in range(n_az)] + \
           [[base + 1, top0 + q, top0 + (q + 1) % n_az] for q in range(n_az)]
    faces = np.vstack([faces, caps])
    scan_path = folder.parent / f"{folder.name}.ply"
    trimesh.Trimesh(v, faces, process=False).export(scan_path)
    specimen = prepare(load_scan(scan_path), units="mm", up=np.array([0.0, 0.0, 1.0]))
    m = np.asarray(specimen.scan_to_specimen, float)
    centre = (m @ np.array([0.0, 0.0, 0.0, 1.0]))[:3]
    up = m[:3, :3] @ np.array([0.0, 0.0, 1.0])
    up /= np.linalg.norm(up)
    hz = np.linspace(0.0, z[-1], 400)
    pts = centre[None, :] + hz[:, None] * up[None, :]
    axis = Centreline(hz, pts, np.tile(up, (hz.size, 1)))
    conf = np.clip(rng.beta(5, 2, bounds_z.size), 0.05, 0.99)
    bounds = [Boundary(int(n), float(h), centre + h * up, up, 0.01, float(np.clip(c + 0.1, 0, 1)), float(c), "auto")
              for n, (h, c) in enumerate(zip(bounds_z, conf))]
    flagged = [[float(bounds_z[s]), float(bounds_z[s + 3]), "faint relief"] for s in range(40, n_bands - 5, 180)]
    n = len(specimen.vertices_mm)
    seg = Segmentation(bounds, axis, np.zeros(n, np.int8), ["flank"], np.zeros(n, np.int32),
                       resolution={"flagged": flagged, "band_spacing_mm": float(np.median(thick))})
    seg = seg.with_boundaries(bounds, specimen)
    seg.save(folder)
    save_specimen(folder, specimen)
    write_json(folder / "result.json", {"schema": "bandgeo.result/1",
                                        "provenance": {"parameters": {"n_sim": 99, "seed": seed},
                                                       "stage_seconds": {}}})
    pipeline.rerun(folder, report=False)
    return folder
