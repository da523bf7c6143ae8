"""Band measurements: thickness along the local growth direction, inclination and azimuth of growth.

For band ``k`` between boundaries ``k`` (base) and ``k+1`` (top), each fitted by a plane:

- the growth direction ``g`` is the normalised mean of the two boundary normals (both point up the
  column);
- ``thickness_axis_mm`` is the distance along ``g`` from the point where the base plane crosses the
  centreline to the top plane;
- ``thickness_median_mm`` and ``thickness_iqr_mm`` are the median and interquartile range of the same
  distance taken from ``N_AROUND`` points around the base ring at the side wall (median radius of the
  band's wall vertices), so wedge-shaped laminae show their spread;
- ``inclination_deg`` is the angle of ``g`` from the paleo-vertical ``z``; ``azimuth_deg`` is its
  direction clockwise from north, ``atan2(x, y)`` (common practice for azimuths), 0..360;
- ``base_inclination_deg`` and ``base_azimuth_deg`` are the same angles of the base boundary's normal
  alone. Neighbouring bands share a boundary, so the series of ``g`` is a moving average of the
  boundary normals (white fit noise ``e_k`` becomes ``(e_k + e_{k+1}) / 2``, an MA(1) process whose
  spectrum is red at short periods and reads as a broad excess at 4-7 bands against an AR(1)
  background); the base normals share no data between bands, so their fit noise stays white. This is
  the tilt series for the periodicity tests (:func:`bandgeo.series.build_series`).
"""
from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .atomic import write_text
from .errors import InputError

#: Points around the circumference used for the median thickness.
N_AROUND = 72

#: Confidence below which a band is flagged for review.
LOW_CONFIDENCE = 0.5

#: CSV columns (units in the names) and the attribute each comes from.
COLUMNS = (("band_index", "index"), ("base_mm", "base_mm"), ("top_mm", "top_mm"),
           ("thickness_axis_mm", "thickness_axis_mm"), ("thickness_median_mm", "thickness_median_mm"),
           ("thickness_iqr_mm", "thickness_iqr_mm"), ("inclination_deg", "inclination_deg"),
           ("azimuth_deg", "azimuth_deg"), ("base_inclination_deg", "base_inclination_deg"),
           ("base_azimuth_deg", "base_azimuth_deg"), ("confidence", "confidence"), ("flags", "flags"))

#: Columns that older tables may lack; read as missing (NaN) when absent.
OPTIONAL_COLUMNS = ("base_inclination_deg", "base_azimuth_deg")


@dataclass
class BandTable:
    """One row per band, base to top.

    Attributes
    ----------
    index : (N,) int
        Band number from the base, 0-based.
    base_mm, top_mm : (N,) float
        Heights of the bounding boundaries on the centreline, mm.
    thickness_axis_mm : (N,) float
        Thickness along the local growth direction at the axis, mm.
    thickness_median_mm, thickness_iqr_mm : (N,) float
        Median and interquartile range of the thickness around the circumference, mm.
    inclination_deg, azimuth_deg : (N,) float
        Growth direction from the paleo-vertical, and its azimuth clockwise from north (y), degrees.
    confidence : (N,) float
        The lower of the two boundary confidences (0..1).
    flags : list of str
        Per band, ';'-separated remarks (flagged stretches, repairs, low confidence); '' if none.
    growth_direction : (N, 3) float
        Unit growth directions, specimen frame.
    warnings : list of str
    north_known : bool
        When False, azimuths are relative to the specimen's arbitrary y axis.
    base_inclination_deg, base_azimuth_deg : (N,) float or None
        Inclination and azimuth (degrees, same conventions) of the band's base boundary normal alone:
        one boundary per band, so no two bands share data (the tilt series for the periodicity tests).
        None (or NaN on reading an older CSV) when not measured.
    """

    index: np.ndarray
    base_mm: np.ndarray
    top_mm: np.ndarray
    thickness_axis_mm: np.ndarray
    thickness_median_mm: np.ndarray
    thickness_iqr_mm: np.ndarray
    inclination_deg: np.ndarray
    azimuth_deg: np.ndarray
    confidence: np.ndarray
    flags: list
    growth_direction: np.ndarray = None
    warnings: list = field(default_factory=list)
    north_known: bool = True
    base_inclination_deg: np.ndarray = None
    base_azimuth_deg: np.ndarray = None

    def __len__(self) -> int:
        return int(len(self.index))

    def to_records(self) -> list:
        """One dict per band, keyed by the CSV column names."""
        out = []
        for i in range(len(self)):
            row = {}
            for col, attr in COLUMNS:
                arr = getattr(self, attr)
                val = float("nan") if arr is None else arr[i]
                row[col] = val if isinstance(val, str) else (int(val) if col == "band_index" else float(val))
            out.append(row)
        return out

    def to_csv(self, path) -> Path:
        """Write the table as CSV (units in the column names), atomically. Returns the path."""
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow([c for c, _ in COLUMNS])
        for rec in self.to_records():
            w.writerow([_fmt(rec[c]) for c, _ in COLUMNS])
        return write_text(path, buf.getvalue())

    @classmethod
    def from_csv(cls, path) -> "BandTable":
        """Read a table written by :meth:`to_csv`; a wrong or damaged file raises InputError."""
        path = Path(path)
        if not path.is_file():
            raise InputError(f"{str(path)!r} does not exist; give the bands.csv written by 'bandgeo segment'")
        try:
            rows = list(csv.DictReader(io.StringIO(path.read_text(encoding="utf-8-sig"))))
            header = next(csv.reader(io.StringIO(path.read_text(encoding="utf-8-sig"))), [])
        except (UnicodeDecodeError, csv.Error) as exc:
            raise InputError(f"{path} is not a readable CSV ({exc}); re-export it") from None
        missing = [c for c, _ in COLUMNS if c not in header and c not in OPTIONAL_COLUMNS]
        if missing:
            raise InputError(f"{path} lacks column(s) {', '.join(missing)}; expected the header "
                             f"{','.join(c for c, _ in COLUMNS)}")
        data = {attr: [] for _, attr in COLUMNS}
        for ln, row in enumerate(rows, start=2):
            for col, attr in COLUMNS:
                raw = row.get(col)
                if col not in header:
                    data[attr].append(float("nan"))
                    continue
                if attr == "flags":
                    data[attr].append(raw or "")
                    continue
                try:
                    data[attr].append(float(raw) if raw not in ("", None) else float("nan"))
                except ValueError:
                    raise InputError(f"{path} line {ln}: column {col} holds {raw!r}, expected a number") from None
        arr = {k: np.asarray(v, dtype=float) for k, v in data.items() if k != "flags"}
        return cls(index=arr["index"].astype(int), base_mm=arr["base_mm"], top_mm=arr["top_mm"],
                   thickness_axis_mm=arr["thickness_axis_mm"], thickness_median_mm=arr["thickness_median_mm"],
                   thickness_iqr_mm=arr["thickness_iqr_mm"], inclination_deg=arr["inclination_deg"],
                   azimuth_deg=arr["azimuth_deg"], confidence=arr["confidence"], flags=data["flags"],
                   base_inclination_deg=arr["base_inclination_deg"], base_azimuth_deg=arr["base_azimuth_deg"])


def _fmt(v):
    if isinstance(v, str):
        return v
    if isinstance(v, int):
        return str(v)
    return "" if not np.isfinite(v) else f"{v:.6g}"


def _overlaps(a0, a1, b0, b1) -> bool:
    return min(a1, b1) - max(a0, b0) > 1e-9


def direction_angles(g: np.ndarray):
    """Inclination from +z and azimuth clockwise from +y (north), degrees, for (N, 3) unit vectors."""
    g = np.atleast_2d(g)
    inc = np.degrees(np.arccos(np.clip(g[:, 2], -1.0, 1.0)))
    az = np.degrees(np.arctan2(g[:, 0], g[:, 1])) % 360.0
    return inc, az


def _band_radii(v: np.ndarray, vband: np.ndarray, axis, nb: int, vertices=None) -> np.ndarray:
    """Median wall radius of each band (from its labelled vertices; bands with none take the median of
    the others), for the circumference samples of the thickness.

    The vertices' distances from the axis come from :func:`bandgeo.segment.model.vertex_projection`
    (made once per mesh and axis; ``vertices`` is the specimen's own array, by which it is kept).
    Vertices are grouped by band in order of height, where the bands are nearly sorted already."""
    from .segment.model import vertex_projection

    proj = vertex_projection(v if vertices is None else vertices, axis)
    order, _ = proj.order()
    lab = vband[order]
    inside = lab >= 0
    radius = np.full(nb, np.nan)
    if inside.any():
        lab, rr = lab[inside], proj.radius_mm[order[inside]]
        by_band = np.argsort(lab, kind="stable")
        lab, rr = lab[by_band], rr[by_band]
        starts = np.searchsorted(lab, np.arange(nb))
        ends = np.searchsorted(lab, np.arange(nb), side="right")
        for k in range(nb):
            if ends[k] > starts[k]:
                radius[k] = np.median(rr[starts[k]:ends[k]])
    fallback = np.nanmedian(radius) if np.isfinite(radius).any() else float(np.median(proj.radius_mm))
    return np.where(np.isfinite(radius), radius, fallback)


def _band_flags(b0, b1, flagged, confidence: float, thickness_axis_mm: float) -> list:
    """The remarks of the band between boundaries ``b0`` and ``b1``: flagged stretches it overlaps,
    the boundaries' own flags, review edits, low confidence, crossing boundaries."""
    fl = []
    for st in flagged:
        if _overlaps(b0.height_mm, b1.height_mm, float(st[0]), float(st[1])) and str(st[2]) not in fl:
            fl.append(str(st[2]))
    for b in (b0, b1):
        for f in b.flags:
            if not f.startswith("normal:") and f not in fl and f != "placed by height":
                fl.append(f)
        if b.origin == "review" and "edited in review" not in fl:
            fl.append("edited in review")
    if confidence < LOW_CONFIDENCE:
        fl.append("low confidence")
    if thickness_axis_mm <= 0:
        fl.append("boundaries cross")
    return fl


def measure_bands(specimen, segmentation) -> BandTable:
    """Measure every band of ``segmentation`` on ``specimen``.

    Parameters
    ----------
    specimen : bandgeo.scan.Specimen
    segmentation : bandgeo.segment.Segmentation

    Returns
    -------
    BandTable
    """
    try:
        v = np.asarray(specimen.vertices_mm, dtype=float)
        bs = list(segmentation.boundaries)
        axis = segmentation.axis
        vband = np.asarray(segmentation.vertex_band)
    except AttributeError:
        raise InputError("expected a Specimen and a Segmentation of it; run the segmentation first") from None
    if len(vband) != len(v):
        raise InputError(f"the segmentation labels {len(vband)} vertices but the specimen has {len(v)}; "
                         f"use the segmentation made from this specimen")
    bs = sorted(bs, key=lambda b: b.height_mm)
    nb = max(0, len(bs) - 1)
    warnings = []
    north_known = bool(specimen.north_known)
    if not north_known and nb:
        warnings.append("north is not known: azimuths are measured from the specimen's y axis, not north")
    if nb == 0:
        empty = np.zeros(0)
        if segmentation.boundaries is not None:
            warnings.append("fewer than two boundaries: no bands to measure")
        return BandTable(np.zeros(0, int), empty, empty, empty, empty, empty, empty, empty, empty, [],
                         np.zeros((0, 3)), warnings, north_known, empty, empty)
    radius = _band_radii(v, vband, axis, nb, vertices=specimen.vertices_mm)
    flagged = (segmentation.resolution or {}).get("flagged", []) or []
    theta = 2 * np.pi * np.arange(N_AROUND) / N_AROUND
    heights = np.array([b.height_mm for b in bs], dtype=float)
    centres = np.array([b.center_mm for b in bs], dtype=float)
    normals = np.array([b.normal for b in bs], dtype=float)
    n0, n1, c1 = normals[:-1], normals[1:], centres[1:]
    # growth direction: the mean of the two boundary normals
    gdir = n0 + n1
    gdir /= np.linalg.norm(gdir, axis=1, keepdims=True)
    p0 = np.asarray(axis.at(heights[:-1])[0], dtype=float)  # where the base plane crosses the axis
    if p0.shape != (nb, 3):  # a centreline that answers one height at a time
        p0 = np.array([np.asarray(axis.at(h)[0], dtype=float).reshape(3) for h in heights[:-1]])
    den = np.einsum("ij,ij->i", gdir, n1)
    tax = np.einsum("ij,ij->i", c1 - p0, n1) / den
    # points on the base ring at the wall, around the base plane's crossing of the axis
    ref = np.where(np.abs(n0[:, :1]) < 0.9, np.array([[1.0, 0.0, 0.0]]), np.array([[0.0, 1.0, 0.0]]))
    e1 = np.cross(n0, ref)
    e1 /= np.linalg.norm(e1, axis=1, keepdims=True)
    e2 = np.cross(n0, e1)
    ring = p0[:, None, :] + radius[:, None, None] * (np.cos(theta)[None, :, None] * e1[:, None, :]
                                                      + np.sin(theta)[None, :, None] * e2[:, None, :])
    t = np.einsum("kij,kj->ki", c1[:, None, :] - ring, n1) / den[:, None]
    q75, q25 = np.percentile(t, [75, 25], axis=1)
    rows = {"base": heights[:-1].copy(), "top": heights[1:].copy(), "tax": tax,
            "tmed": np.median(t, axis=1), "tiqr": q75 - q25,
            "conf": np.minimum([b.confidence for b in bs[:-1]], [b.confidence for b in bs[1:]]).astype(float)}
    flags = ["; ".join(_band_flags(bs[k], bs[k + 1], flagged, rows["conf"][k], rows["tax"][k]))
             for k in range(nb)]
    inc, az = direction_angles(gdir)
    base_inc, base_az = direction_angles(np.array([b.normal for b in bs[:-1]], dtype=float))
    return BandTable(index=np.arange(nb), base_mm=rows["base"], top_mm=rows["top"],
                     thickness_axis_mm=rows["tax"], thickness_median_mm=rows["tmed"],
                     thickness_iqr_mm=rows["tiqr"], inclination_deg=inc, azimuth_deg=az,
                     confidence=rows["conf"], flags=flags, growth_direction=gdir, warnings=warnings,
                     north_known=north_known, base_inclination_deg=base_inc, base_azimuth_deg=base_az)


def mean_growth_direction(table: BandTable) -> np.ndarray:
    """Thickness-weighted mean growth direction of the column (unit (3,) vector)."""
    if len(table) == 0:
        return np.array([np.nan] * 3)
    w = np.clip(np.nan_to_num(table.thickness_axis_mm), 0.0, None)
    g = (table.growth_direction * w[:, None]).sum(axis=0)
    return g / np.linalg.norm(g)
