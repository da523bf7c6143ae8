"""Data objects of the scan stage: the raw ``Scan``, the ``SpecimenSheet`` and the oriented ``Specimen``."""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Optional, Union

import numpy as np


@dataclass
class Scan:
    """A mesh as read from its file, in the file's own frame and units.

    Attributes
    ----------
    vertices : (n, 3) float64
        Coordinates in file units, exactly as read.
    faces : (m, 3) int64
        Triangle vertex indices (polygons are fanned into triangles by the reader).
    colors : (n, 3) uint8 or None
        Per-vertex RGB colour when the file carries it.
    path : str
        The file read.
    sha256 : str
        Hex digest of the file's bytes, for provenance.
    file_format : str
        ``'ply-ascii'``, ``'ply-binary-le'``, ``'ply-binary-be'``, ``'obj'``, ``'stl-ascii'``,
        ``'stl-binary'``, ``'off'``, ``'gltf'`` or ``'glb'``.
    units_hint : str or None
        A unit named in the file's own comments (``comment units mm``), when there is one.
    """

    vertices: np.ndarray
    faces: np.ndarray
    colors: Optional[np.ndarray]
    path: str
    sha256: str
    file_format: str
    units_hint: Optional[str] = None


@dataclass
class ScaleReference:
    """A known length between two points picked on the scan (for example the ends of a scale bar).

    Attributes
    ----------
    p1, p2 : (3,) float64
        The two points, in scan (file) coordinates.
    length : float
        Their true distance, in the unit of the sheet or ``--units`` (millimetres when neither is given).
    """

    p1: np.ndarray
    p2: np.ndarray
    length: float

    def file_distance(self) -> float:
        """Distance between the two points in file units."""
        return float(np.linalg.norm(np.asarray(self.p2, float) - np.asarray(self.p1, float)))


@dataclass
class SpecimenSheet:
    """The field and lab notes of one specimen, read from a TOML sheet (see docs/specimen-sheet.md).

    Every field is optional. ``up`` and ``north`` are vectors in the scan frame; ``strike_deg`` and
    ``dip_deg`` give the bedding by the right-hand rule (dip direction = strike + 90 degrees).
    ``scale`` is either a number (file units are multiplied by it to give ``units``) or a
    :class:`ScaleReference`.
    """

    specimen_id: Optional[str] = None
    units: Optional[str] = None
    scale: Union[float, ScaleReference, None] = None
    up: Optional[np.ndarray] = None
    north: Optional[np.ndarray] = None
    strike_deg: Optional[float] = None
    dip_deg: Optional[float] = None
    age_ma: Optional[float] = None
    age_err_ma: Optional[float] = None
    locality: Optional[str] = None
    horizon: Optional[str] = None
    formation: Optional[str] = None
    collector: Optional[str] = None
    notes: Optional[str] = None
    path: Optional[str] = None

    def to_dict(self) -> dict:
        """JSON-safe dictionary of the set fields."""
        out = {}
        for f in dataclasses.fields(self):
            value = getattr(self, f.name)
            if value is None:
                continue
            if isinstance(value, ScaleReference):
                value = {"points": [np.asarray(value.p1).tolist(), np.asarray(value.p2).tolist()],
                         "length": float(value.length)}
            elif isinstance(value, np.ndarray):
                value = value.tolist()
            out[f.name] = value
        return out


@dataclass
class Specimen:
    """A cleaned mesh in the specimen frame: millimetres, ``z`` paleo-up, origin on the axis at the base.

    Attributes
    ----------
    vertices_mm : (n, 3) float64
        Coordinates in the specimen frame [mm]: ``x`` east, ``y`` north (when known), ``z`` paleo-up.
    faces : (m, 3) int64
        Triangles, wound consistently with outward normals.
    colors : (n, 3) uint8 or None
        Per-vertex colour.
    scan_to_specimen : (4, 4) float64
        Homogeneous transform (scale included) taking scan coordinates into the specimen frame.
    units : str
        Unit of the scan's coordinates (``'mm'``, ``'cm'``, ``'m'``, ``'in'``, ``'um'``).
    mm_per_unit : float
        Millimetres per scan unit, including any scale factor or reference-length scale.
    up_source : str
        ``'cli'``, ``'sheet'`` or ``'estimated'``.
    up_confidence : float
        0..1; 1 when the up vector was given.
    north_known : bool
        True when ``y`` points to north.
    cleaning : dict of str to int
        Every change made to the mesh, with counts.
    transforms : list of dict
        ``{"step", "matrix" (4x4 list), "note"}`` in the order applied; their product (last first)
        is ``scan_to_specimen``.
    warnings : list of str
        Soft problems found while preparing.
    sheet : SpecimenSheet or None
    specimen_id, scan_path, scan_sha256 : str
    scan_vertex_index : (n,) int64
        Index in the scan of each kept vertex (for exporting labels in the scan's numbering).
    summary : dict
        Extra facts found while cleaning (pieces, holes, edges, up vector in the scan frame); JSON-safe.
    """

    vertices_mm: np.ndarray
    faces: np.ndarray
    colors: Optional[np.ndarray] = None
    scan_to_specimen: np.ndarray = field(default_factory=lambda: np.eye(4))
    units: str = "mm"
    mm_per_unit: float = 1.0
    up_source: str = "cli"
    up_confidence: float = 1.0
    north_known: bool = False
    cleaning: dict = field(default_factory=dict)
    transforms: list = field(default_factory=list)
    warnings: list = field(default_factory=list)
    sheet: Optional[SpecimenSheet] = None
    specimen_id: str = ""
    scan_path: str = ""
    scan_sha256: str = ""
    scan_vertex_index: Optional[np.ndarray] = None
    summary: dict = field(default_factory=dict)

    def __post_init__(self):
        self.vertices_mm = np.ascontiguousarray(self.vertices_mm, dtype=np.float64)
        self.faces = np.ascontiguousarray(self.faces, dtype=np.int64)
        if self.scan_vertex_index is None:
            self.scan_vertex_index = np.arange(len(self.vertices_mm), dtype=np.int64)

    @property
    def specimen_to_scan(self) -> np.ndarray:
        """(4, 4) inverse of :attr:`scan_to_specimen`: specimen frame [mm] back to scan coordinates."""
        return np.linalg.inv(self.scan_to_specimen)

    def to_scan_frame(self, points_mm: np.ndarray) -> np.ndarray:
        """Map (k, 3) specimen-frame points [mm] back to the scan's own coordinates and units."""
        pts = np.asarray(points_mm, dtype=float).reshape(-1, 3)
        inv = self.specimen_to_scan
        return pts @ inv[:3, :3].T + inv[:3, 3]

    def directions_to_scan_frame(self, vectors: np.ndarray) -> np.ndarray:
        """Map (k, 3) specimen-frame directions to unit directions in the scan frame."""
        vec = np.asarray(vectors, dtype=float).reshape(-1, 3) @ np.linalg.inv(self.scan_to_specimen[:3, :3]).T
        return vec / np.linalg.norm(vec, axis=1, keepdims=True)
