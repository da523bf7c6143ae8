"""A full synthetic specimen: lamina record, mesh in the file's frame and units, colours, and truth.

Truth file (``<stem>.truth.json``, schema ``bandgeo.synth-truth/1``; fields are only ever added):

- ``params`` (every parameter, resolved: rebuild with ``SynthParams.from_dict``), ``seed``, ``units``,
  ``mm_per_unit``.
- ``frames``: ``file_from_specimen`` / ``specimen_from_file`` (4x4, scale included), ``paleo_up_file``,
  ``north_file``, ``east_file``, ``growth_direction_file`` / ``_specimen`` (thickness-weighted mean),
  ``sway_plane_direction_file``, ``sway_plane_azimuth_deg``, ``base_centre_file``.
- ``laminae`` (one entry per recorded lamina, base to top): ``thickness_mm`` (along the centreline),
  ``day_index``, ``inclination_deg`` / ``azimuth_deg`` of the growth direction, ``sway_deg`` (tilt
  component along the sway-plane azimuth), ``tilt_east_deg`` / ``tilt_north_deg`` (the realised tilt
  vector) = mean lean + ``annual_sway_deg`` along the sway azimuth + ``meander_east_deg`` /
  ``meander_north_deg``; counts (``n_recorded``, ``n_nominal``, ``recorded_laminae_per_year``, ...),
  ``hiatus_after``, ``hiatuses``.
- ``boundaries`` (N + 1 entries): ``heights_mm`` (arc length along the true centreline), the boundary
  plane's centre and unit normal (pointing up the column) in the file frame (``centres_file``,
  ``normals_file``) and in the specimen frame (``centres_mm``, ``normals``), ``inclination_deg`` /
  ``azimuth_deg`` of each normal, ``thickness_above_mm`` (null for the last). Each boundary is a dome
  rising ``dome_height_mm`` above its plane on the axis; the plane is where it meets the side wall.
- ``mesh``: ``mesh_kind``, counts, ``column_length_mm``, radius range, ``sampling_step_mm`` (ring spacing,
  lattice row spacing or voxel), ``groove_depth_effective_mm`` (what the mesh shows: widened to the
  sampling, and for photogrammetric meshes after smoothing), kind-specific figures (edge lengths,
  lattice angle, smoothing gains, CT chunks and seam welding), ``max_curvature_times_radius`` (near 1
  the laminae would fold), ``holes``, ``closed``.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial.transform import Rotation

from .. import __version__, constants
from ..progress import report
from .geometry import ColumnMesh, build_column, tangent_at
from .laminae import LaminaRecord, simulate_laminae
from .params import SynthParams

#: Largest mesh simulate() will build (about 8 GB of working memory on this kind of machine).
MAX_FACES = 80_000_000

#: Carbonate tan of a light lamina, RGB.
BASE_RGB = np.array([200.0, 182.0, 152.0])


@dataclass
class SynthSpecimen:
    """A forward-model specimen as it would come out of a scanner, with its truth.

    Attributes
    ----------
    vertices : (n, 3) float64
        Vertex positions in the file frame and file units (``params.units``).
    faces : (m, 3) int64
        Triangles, counter-clockwise seen from outside.
    colors : (n, 3) uint8
        Per-vertex RGB colour.
    truth : dict
        Everything the generator knows (schema ``bandgeo.constants.TRUTH_SCHEMA``); written by
        :func:`bandgeo.synth.write_specimen` as ``<stem>.truth.json``.
    record : LaminaRecord
        The lamina record the mesh was built from.
    file_from_specimen : (4, 4) float
        Maps specimen-frame millimetres to file coordinates (rotation, translation and scale).
    """

    vertices: np.ndarray
    faces: np.ndarray
    colors: np.ndarray
    truth: dict
    record: LaminaRecord
    file_from_specimen: np.ndarray

    @property
    def n_vertices(self) -> int:
        return int(self.vertices.shape[0])

    @property
    def n_faces(self) -> int:
        return int(self.faces.shape[0])


def _streams(seed: int) -> dict:
    """Independent generators for each part of the geometry, so that one part never shifts another."""
    names = ("geometry", "color", "noise", "pose")
    children = np.random.SeedSequence(seed).spawn(len(names))
    return {name: np.random.default_rng(child) for name, child in zip(names, children)}


def _colors(mesh: ColumnMesh, record: LaminaRecord, gen: np.random.Generator) -> np.ndarray:
    """Per-vertex colour: light lamina body darkening to an organic film below each boundary."""
    p = record.params
    q = mesh.lamina_coord_mm
    n = q.size
    h = record.boundary_heights_mm
    th = record.thickness_mm
    if p.color_banding:
        k = np.searchsorted(h, q, side="right") - 1
        inside = (k >= 0) & (k < th.size)
        kc = np.clip(k, 0, th.size - 1)
        frac = np.where(inside, (q - h[kc]) / th[kc], np.mod(q / p.mean_thickness_mm, 1.0))
        film = np.clip((frac - 0.55) / 0.4, 0.0, 1.0)
        film = film * film * (3.0 - 2.0 * film)  # smoothstep
        tone = np.where(inside, 1.0 + 0.1 * np.clip(th[kc] / p.mean_thickness_mm - 1.0, -1.0, 1.0), 1.0)
        light = (1.0 - 0.38 * film) * tone
    else:
        light = np.full(n, 0.92)
    jitter = gen.integers(-5, 6, size=n, dtype=np.int16)
    rgb = light[:, None] * BASE_RGB[None, :] + jitter[:, None]
    return np.clip(np.rint(rgb), 0, 255).astype(np.uint8)


def _pose(p: SynthParams, gen: np.random.Generator, length_mm: float):
    """Rotation (3,3) and translation (3,) mm taking the specimen frame to the file frame."""
    if p.pose == "identity":
        return np.eye(3), np.zeros(3)
    q = gen.standard_normal(4)
    rot = Rotation.from_quat(q / np.linalg.norm(q)).as_matrix()
    shift = gen.uniform(-1.0, 1.0, 3) * (length_mm + 10.0 * p.radius_mm)
    return rot, shift


def _fold_index(record: LaminaRecord) -> float:
    """Largest curvature of the centreline times the largest radius (>= 1: rings would cross)."""
    d = record.growth_directions()
    if d.shape[0] < 2:
        return 0.0
    h = record.boundary_heights_mm
    mid = 0.5 * (h[:-1] + h[1:])
    curv = np.linalg.norm(np.diff(d, axis=0), axis=1) / np.maximum(np.diff(mid), 1e-12)
    p = record.params
    return float(curv.max() * p.radius_mm * (1.0 + p.radius_variation) * (1.0 + max(p.radius_taper, 0.0)))


def build_mesh(record: LaminaRecord, gens: dict, progress=None) -> ColumnMesh:
    """The column mesh of ``record.params.mesh_kind`` (specimen frame, mm; noise added by the
    photogrammetric and CT builders, not yet by the ring builder)."""
    kind = record.params.mesh_kind
    sub = None if progress is None else (lambda d, done, total: report(progress, d, done, total))
    if kind == "photogrammetric":
        from .photogrammetric import build_photogrammetric
        return build_photogrammetric(record, gens["geometry"], gens["noise"], sub)
    if kind == "ct":
        from .ct import build_ct
        return build_ct(record, gens["geometry"], gens["noise"], sub)
    return build_column(record, gens["geometry"])


def simulate(params: SynthParams, progress=None) -> SynthSpecimen:
    """Simulate a specimen: lamina record, mesh, colours, scanner noise, pose and units.

    Parameters
    ----------
    params : SynthParams
        Model parameters; ``params.seed`` fixes every random draw (same seed, same specimen).
    progress : callable or None
        ``progress(description, done, total)``.

    Returns
    -------
    SynthSpecimen
    """
    if not isinstance(params, SynthParams):
        from ..errors import ParameterError
        raise ParameterError(f"expected SynthParams but got {type(params).__name__}")
    if params.estimated_faces > MAX_FACES:
        from ..errors import ParameterError
        raise ParameterError(f"the mesh would have about {params.estimated_faces:,} faces, more than "
                             f"{MAX_FACES:,}; lower years, radius_mm or rings_per_lamina, or raise "
                             f"mean_thickness_mm")
    report(progress, "simulating laminae", 0, 4)
    record = simulate_laminae(params)
    fold = _fold_index(record)
    if fold >= 1.0:
        from ..errors import ParameterError
        raise ParameterError(f"the growth direction turns so fast that the laminae would fold over each other "
                             f"(curvature x radius {fold:.2f}, must stay below 1); lower "
                             f"meander_amplitude_deg or radius_mm, or raise meander_correlation_laminae")
    gens = _streams(params.seed)
    report(progress, f"building the column mesh ({params.mesh_kind})", 1, 4)
    mesh = build_mesh(record, gens, progress)
    report(progress, "colour, noise and pose", 2, 4)
    colors = _colors(mesh, record, gens["color"])
    verts = mesh.vertices_mm
    if params.scanner_noise_mm > 0 and not mesh.noise_applied:
        verts = verts + gens["noise"].normal(0.0, params.scanner_noise_mm, verts.shape)
    rot, shift = _pose(params, gens["pose"], mesh.info["column_length_mm"])
    mm_per_unit = constants.UNIT_TO_MM[params.units]
    file_verts = (verts @ rot.T + shift) / mm_per_unit
    file_from_spec = np.eye(4)
    file_from_spec[:3, :3] = rot / mm_per_unit
    file_from_spec[:3, 3] = shift / mm_per_unit
    truth = _truth(params, record, mesh, rot, shift, mm_per_unit, file_from_spec, file_verts.shape[0])
    truth["warnings"] = []
    if fold > 0.7:
        truth["warnings"].append(f"the growth direction turns fast: curvature x radius reaches {fold:.2f}, so "
                                 f"the thinnest laminae nearly pinch out on one side of the column")
    report(progress, "specimen ready", 4, 4)
    return SynthSpecimen(file_verts, mesh.faces, colors, truth, record, file_from_spec)


def _truth(p, record, mesh, rot, shift, mm_per_unit, file_from_spec, n_vertices) -> dict:
    h = record.boundary_heights_mm
    if mesh.centreline is not None:
        centres, normals, _, _ = mesh.centreline.at(h)
        curv = mesh.centreline.curvature()
    else:  # pragma: no cover - every builder sets the centreline
        centres, normals = tangent_at(record, h)
        curv = np.zeros(1)
    b_inc = np.degrees(np.arccos(np.clip(normals[:, 2], -1.0, 1.0)))
    b_az = np.degrees(np.arctan2(normals[:, 0], normals[:, 1])) % 360.0
    to_file = lambda x: (x @ rot.T + shift) / mm_per_unit  # noqa: E731
    dirs = record.growth_directions()
    mean_dir = (dirs * record.thickness_mm[:, None]).sum(axis=0)
    mean_dir /= np.linalg.norm(mean_dir)
    az_u = np.radians(p.sway_azimuth_deg)
    sway_dir = np.array([np.sin(az_u), np.cos(az_u), 0.0])
    years = float(p.years)
    return {
        "schema": constants.TRUTH_SCHEMA,
        "generator": f"bandgeo.synth {__version__}",
        "seed": int(p.seed),
        "params": p.to_dict(),
        "units": p.units,
        "mm_per_unit": mm_per_unit,
        "frames": {
            "note": "specimen frame: mm, x east, y north, z paleo-up, origin on the axis at the base; "
                    "file frame: the mesh file's coordinates and units",
            "file_from_specimen": file_from_spec,
            "specimen_from_file": np.linalg.inv(file_from_spec),
            "paleo_up_file": rot @ np.array([0.0, 0.0, 1.0]),
            "north_file": rot @ np.array([0.0, 1.0, 0.0]),
            "east_file": rot @ np.array([1.0, 0.0, 0.0]),
            "growth_direction_file": rot @ mean_dir,
            "growth_direction_specimen": mean_dir,
            "sway_plane_direction_file": rot @ sway_dir,
            "sway_plane_azimuth_deg": float(p.sway_azimuth_deg % 360.0),
            "base_centre_file": to_file(np.zeros(3)),
        },
        "laminae": {
            "n_recorded": record.n_laminae,
            "n_nominal": int(p.n_nominal),
            "n_missing": record.missing_laminae,
            "years": years,
            "days_per_year": float(p.days_per_year),
            "laminae_per_year_nominal": p.laminae_per_year_nominal,
            "recorded_laminae_per_year": record.recorded_laminae_per_year,
            "mean_thickness_mm_expected": float(p.mean_thickness_mm),
            "mean_thickness_mm_recorded": float(record.thickness_mm.mean()),
            "thickness_mm": record.thickness_mm,
            "day_index": record.day_index,
            "inclination_deg": record.inclination_deg,
            "azimuth_deg": record.azimuth_deg,
            "sway_deg": record.sway_deg,
            "tilt_east_deg": record.tilt_east_deg,
            "tilt_north_deg": record.tilt_north_deg,
            "annual_sway_deg": record.annual_sway_deg,
            "meander_east_deg": record.meander_east_deg,
            "meander_north_deg": record.meander_north_deg,
            "meander_note": "tilt (east, north) = mean lean + annual_sway_deg along the sway plane azimuth + "
                            "meander (east, north); the meander is AR(1) in the nominal lamina index, "
                            "standard deviation meander_amplitude_deg per component, lag-1 correlation "
                            "exp(-1 / meander_correlation_laminae)",
            "hiatus_after": np.flatnonzero(record.hiatus_after),
            "hiatuses": record.hiatus_positions(),
        },
        "boundaries": {
            "note": "heights_mm[i]: arc length along the centreline of the plane in which boundary i meets "
                    "the side wall (its dome rises dome_height_mm above that plane on the axis); "
                    "centres_file/normals_file: that plane's point on the centreline (file units) and unit "
                    "normal pointing up the column (file frame)",
            "heights_mm": h,
            "centres_file": to_file(centres),
            "normals_file": normals @ rot.T,
            "centres_mm": centres,
            "normals": normals,
            "inclination_deg": b_inc,
            "azimuth_deg": b_az,
            "thickness_above_mm": np.append(record.thickness_mm, np.nan),
            "specimen_frame_note": "centres_mm / normals: the same planes in the specimen frame (mm, z "
                                   "paleo-up); inclination_deg / azimuth_deg: of each normal (azimuth "
                                   "clockwise from north, atan2(x, y)); thickness_above_mm: the lamina "
                                   "above each boundary along the centreline (null for the last)",
        },
        "mesh": dict(mesh.info, n_vertices=int(n_vertices), n_faces=int(mesh.faces.shape[0]),
                     mesh_kind=p.mesh_kind, sampling=p.sampling if p.mesh_kind == "rings" else None,
                     base=p.base, top=p.top,
                     closed=bool(p.base == "cut" and p.top != "open" and p.holes == 0),
                     max_curvature_times_radius=float(curv.max() * p.radius_mm * (1 + max(p.radius_taper, 0)))),
    }


def make_mesh(params: SynthParams | None = None, progress=None, **changes):
    """Convenience for checks: ``(vertices, faces, truth)`` of a simulated specimen.

    Parameters
    ----------
    params : SynthParams or None
        The parameters (None: the defaults); keyword ``changes`` replace fields, e.g.
        ``make_mesh(mesh_kind="ct", years=0.5, seed=3)``.

    Returns
    -------
    vertices : (n, 3) float64
        File frame and units (``truth["frames"]["specimen_from_file"]`` maps them to the specimen frame).
    faces : (m, 3) int64
    truth : dict
        As written to ``<stem>.truth.json`` (numpy arrays not yet converted to lists).
    """
    if params is None:
        params = SynthParams(**changes)
    elif changes:
        params = params.replace(**changes)
    spec = simulate(params, progress=progress)
    return spec.vertices, spec.faces, spec.truth
