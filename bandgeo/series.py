"""Band series for the periodicity tests: thickness and growth-direction tilt against band number, and
the relief profile against height (depth domain), built from a band table or read from a CSV file."""
from __future__ import annotations

import csv
import io
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Optional

import numpy as np

from .errors import InputError, SeriesError

if TYPE_CHECKING:  # pragma: no cover - types only
    from .measure import BandTable
    from .scan import Specimen
    from .segment import Segmentation

#: Fewest bands a series may have.
MIN_BANDS = 24

#: Accepted thickness column names and their size in millimetres.
THICKNESS_COLUMNS = {"thickness_mm": 1.0, "thickness_um": 1e-3, "thickness_µm": 1e-3,
                     "thickness_cm": 10.0, "thickness": 1.0, "thickness_axis_mm": 1.0}


@dataclass
class BandSeries:
    """Series measured on one specimen, in growth order (base to top).

    Attributes
    ----------
    band_number : (N,) int
        0, 1, ... N-1.
    thickness_mm : (N,) float
        Band thickness along the growth axis, mm.
    inclination_deg : (N,) float or None
        Tilt of the growth direction from the paleo-vertical, degrees. From a band table this is the
        tilt of each band's base boundary normal (one boundary per band, so white measurement noise
        stays white; see :mod:`bandgeo.measure`), unless the table lacks it.
    sway_deg : (N,) float or None
        Component of the tilt vector along the fitted sway plane, degrees (mean tilt included).
    depth_height_mm : (M,) float or None
        Heights along the axis of the relief profile, mm.
    depth_relief : (M,) float or None
        Relief (radius minus its running median) along the height, mm.
    hiatus_flags : (N,) bool
        True for bands flagged as possibly followed by missing days.
    source : str
        Where the series came from.
    sway_azimuth_deg : float or None
        Azimuth of the fitted sway plane (0-180, clockwise from north).
    warnings : list of str
    """

    band_number: np.ndarray
    thickness_mm: np.ndarray
    inclination_deg: Optional[np.ndarray] = None
    sway_deg: Optional[np.ndarray] = None
    depth_height_mm: Optional[np.ndarray] = None
    depth_relief: Optional[np.ndarray] = None
    hiatus_flags: Optional[np.ndarray] = None
    source: str = ""
    sway_azimuth_deg: Optional[float] = None
    warnings: list = field(default_factory=list)

    def __len__(self) -> int:
        return int(self.thickness_mm.size)


def _check_thickness(h: np.ndarray, where: str) -> np.ndarray:
    h = np.asarray(h, dtype=float).reshape(-1)
    if h.size < MIN_BANDS:
        raise SeriesError(f"{where} has {h.size} bands but at least {MIN_BANDS} are needed for a periodicity "
                          f"test; measure a longer stretch")
    bad = np.flatnonzero(~np.isfinite(h))
    if bad.size:
        raise SeriesError(f"{where} has {bad.size} missing or non-numeric thickness values (first at band "
                          f"{int(bad[0])}); fill or remove them")
    if np.any(h <= 0):
        i = int(np.flatnonzero(h <= 0)[0])
        raise SeriesError(f"{where} has a thickness <= 0 at band {i} ({h[i]!r}); thicknesses must be positive")
    return h


def fit_sway_plane(inclination_deg: np.ndarray, azimuth_deg: np.ndarray):
    """Sway plane of tilt vectors: principal axis of ``inclination * (sin az, cos az)`` (east, north).

    Returns
    -------
    sway_deg : (N,) float
        Tilt vector component along the plane's azimuth (mean tilt included), degrees.
    azimuth_deg : float
        Azimuth of the plane, 0-180 degrees clockwise from north.
    """
    inc = np.asarray(inclination_deg, dtype=float)
    az = np.radians(np.asarray(azimuth_deg, dtype=float))
    v = np.column_stack([inc * np.sin(az), inc * np.cos(az)])
    c = v - v.mean(axis=0)
    _, _, vt = np.linalg.svd(c, full_matrices=False)
    u = vt[0]
    plane_az = float(np.degrees(np.arctan2(u[0], u[1])) % 180.0)
    a = np.radians(plane_az)
    u = np.array([np.sin(a), np.cos(a)])
    return v @ u, plane_az


def series_from_thickness(thickness_mm, inclination_deg=None, azimuth_deg=None, source: str = "array",
                          hiatus_flags=None) -> BandSeries:
    """A :class:`BandSeries` from arrays (inputs are copied, never modified).

    Parameters
    ----------
    thickness_mm : (N,) float
    inclination_deg, azimuth_deg : (N,) float, optional
        With both, the sway plane is fitted and ``sway_deg`` filled; with inclination only, the
        inclination series is kept and ``sway_deg`` is None.
    source : str
    hiatus_flags : (N,) bool, optional
    """
    h = _check_thickness(thickness_mm, source)
    n = h.size
    out = BandSeries(band_number=np.arange(n), thickness_mm=h.copy(), source=source,
                     hiatus_flags=np.zeros(n, bool) if hiatus_flags is None
                     else np.asarray(hiatus_flags, dtype=bool).reshape(-1).copy())
    if out.hiatus_flags.size != n:
        raise SeriesError(f"hiatus_flags has {out.hiatus_flags.size} values but the thickness has {n}")
    if inclination_deg is not None:
        inc = np.asarray(inclination_deg, dtype=float).reshape(-1)
        if inc.size != n:
            raise SeriesError(f"inclination has {inc.size} values but the thickness has {n}; give one per band")
        if np.all(np.isfinite(inc)):
            out.inclination_deg = inc.copy()
        else:
            out.warnings.append("inclination has missing values; the sway estimate is not made")
        if azimuth_deg is not None and out.inclination_deg is not None:
            az = np.asarray(azimuth_deg, dtype=float).reshape(-1)
            if az.size != n:
                raise SeriesError(f"azimuth has {az.size} values but the thickness has {n}")
            if np.all(np.isfinite(az)):
                out.sway_deg, out.sway_azimuth_deg = fit_sway_plane(inc, az)
    return out


def _hiatus_from_flags(flags, n: int) -> np.ndarray:
    if flags is None:
        return np.zeros(n, bool)
    arr = np.asarray(flags)
    if arr.dtype == bool:
        return arr.reshape(-1)[:n].copy()
    if arr.dtype.kind in "US O".replace(" ", ""):
        # Only stretches marked as hiatuses (by review, "hiatus: note") count; repair notes such as
        # "gap filled" describe the ring tracing, not missing time.
        return np.array(["hiatus" in str(f).lower() for f in arr.reshape(-1)])
    return np.zeros(n, bool)


def build_series(band_table: "BandTable", segmentation: "Optional[Segmentation]" = None,
                 specimen: "Optional[Specimen]" = None) -> BandSeries:
    """Series of one specimen from its band table (and, for the depth profile, its mesh).

    Parameters
    ----------
    band_table : bandgeo.measure.BandTable
        Uses ``thickness_axis_mm`` (``thickness_median_mm`` where the axis value is missing),
        ``base_inclination_deg`` and ``base_azimuth_deg`` for the tilt (``inclination_deg`` and
        ``azimuth_deg``, with a warning, when the table lacks them) and ``flags``.
    segmentation : bandgeo.segment.Segmentation, optional
        Its centreline gives the height of each vertex for the relief profile.
    specimen : bandgeo.scan.Specimen, optional
        Vertices (specimen frame, mm) projected on the centreline.

    Returns
    -------
    BandSeries
    """
    h = np.asarray(band_table.thickness_axis_mm, dtype=float).copy()
    alt = band_table.thickness_median_mm
    warnings: list[str] = []
    if alt is not None:
        alt = np.asarray(alt, dtype=float)
        miss = ~np.isfinite(h) | (h <= 0)
        if miss.any():
            h[miss] = alt[miss]
            warnings.append(f"{int(miss.sum())} band(s) had no thickness on the axis; their median "
                            f"thickness over the band was used")
    still = ~np.isfinite(h) | (h <= 0)
    if still.any() and (~still).sum() >= MIN_BANDS:
        h[still] = float(np.median(h[~still]))
        warnings.append(f"{int(still.sum())} band(s) had no positive thickness (e.g. crossing boundaries); "
                        f"the median thickness was used for them - check them in review")
    inc, az = _tilt_columns(band_table, h.size, warnings)
    series = series_from_thickness(h, inc, az, source="band table",
                                   hiatus_flags=_hiatus_from_flags(band_table.flags, h.size))
    series.warnings = warnings + series.warnings
    if segmentation is not None and specimen is not None:
        try:
            series.depth_height_mm, series.depth_relief = relief_profile(
                specimen.vertices_mm, segmentation.axis, float(np.median(h)))
        except (ValueError, AttributeError) as exc:
            series.warnings.append(f"no relief profile along the height ({exc})")
    return series


def _tilt_columns(band_table: "BandTable", n: int, warnings: list):
    """The per-band tilt to analyse: the base boundary normals when measured, else the growth direction.

    The growth direction averages a band's two boundary normals, which neighbouring bands share, so its
    series is a moving average (MA(1)) of the boundary fit noise; the base normals are independent.
    """
    inc, az = band_table.base_inclination_deg, band_table.base_azimuth_deg
    if inc is not None and az is not None:
        inc, az = np.asarray(inc, dtype=float).reshape(-1), np.asarray(az, dtype=float).reshape(-1)
        if inc.size == n and az.size == n and np.all(np.isfinite(inc)) and np.all(np.isfinite(az)):
            return inc, az
    inc, az = band_table.inclination_deg, band_table.azimuth_deg
    if inc is not None:
        warnings.append("the band table has no base-boundary tilt; the growth direction (mean of two boundary "
                        "normals shared with the neighbours) was used, whose noise is smoothed over two bands")
    return inc, az


def relief_profile(vertices_mm: np.ndarray, axis, spacing_mm: float, max_vertices: int = 2_000_000):
    """Relief against height: each vertex's radial distance from the centreline, binned by its arc
    length along it (bins of 1/8 of the band spacing, median per bin), minus a running median over
    three band spacings.

    Returns
    -------
    height_mm : (M,) float
    relief_mm : (M,) float
    """
    from scipy.ndimage import median_filter

    from .unroll import height_order, unroll

    if len(vertices_mm) > max_vertices:
        v = np.asarray(vertices_mm, dtype=float)
        v = v[np.linspace(0, v.shape[0] - 1, max_vertices).astype(np.int64)]
    else:
        v = vertices_mm  # the same object as the report's: the unrolled coordinates are cached
    unrolled = unroll(v, axis)
    s, radial = unrolled.s_mm, unrolled.radius_mm
    width = spacing_mm / 8.0
    edges = np.arange(s.min(), s.max() + width, width)
    if edges.size < 8:
        raise ValueError("the banded stretch is too short")
    # bin k holds edges[k] <= s < edges[k+1]: a slice of the vertices sorted by height (order kept)
    order = height_order(unrolled)
    cuts = np.searchsorted(s[order], edges, side="left")
    med = _slice_medians(radial[order], cuts)
    ok = np.isfinite(med)
    centres = 0.5 * (edges[:-1] + edges[1:])
    med = np.interp(centres, centres[ok], med[ok])
    base = median_filter(med, size=max(3, int(24) | 1), mode="nearest")
    return centres, med - base


def _slice_medians(values: np.ndarray, cuts: np.ndarray) -> np.ndarray:
    """Median of ``values[cuts[k]:cuts[k+1]]`` for each k (NaN where empty), as ``np.median`` gives it.

    Slices up to a few times the typical length are laid out as rows padded with +inf, sorted, and
    their middle one or two values averaged; longer ones (the flat ends of a column) one at a time."""
    counts = np.diff(cuts)
    out = np.full(counts.size, np.nan)
    if not counts.size or not counts.any():
        return out
    width = int(max(1, 4 * np.median(counts[counts > 0])))
    long_ = np.flatnonzero(counts > width)
    if not np.isfinite(values[cuts[0]:cuts[-1]]).all():  # np.median passes missing values on
        long_ = np.flatnonzero(counts)
    for k in long_:
        out[k] = np.median(values[cuts[k]:cuts[k + 1]])
    k = np.flatnonzero((counts > 0) & (counts <= width))
    if k.size and long_.size < np.count_nonzero(counts):
        n_k = counts[k]
        rows = np.full((k.size, int(n_k.max())), np.inf)
        row = np.repeat(np.arange(k.size), n_k)
        starts = np.repeat(cuts[k], n_k)
        col = np.arange(int(n_k.sum())) - np.repeat(np.cumsum(n_k) - n_k, n_k)
        rows[row, col] = values[starts + col]
        rows.sort(axis=1)
        i = np.arange(k.size)
        out[k] = (rows[i, (n_k - 1) // 2] + rows[i, n_k // 2]) / 2.0
    return out


def read_series_csv(path) -> BandSeries:
    """Read a thickness series from a CSV file (e.g. counts measured on a thin section).

    The file has a header with a thickness column (``thickness_mm``, ``thickness_um``, ``thickness_cm`` or
    ``thickness``, the last taken as mm) and optionally ``inclination_deg``, ``azimuth_deg`` and
    ``sway_deg``; or a single column of numbers without a header (taken as mm, with a warning).
    Commas, semicolons or tabs separate the values; lines starting with ``#`` are comments.
    """
    p = Path(os.path.expanduser(str(path)))
    if not p.is_file():
        raise InputError(f"{str(path)!r} is not a file; give the path of a CSV series (quote it if it has spaces)")
    try:
        text = p.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read {p.name} as text ({exc}); save the series as a UTF-8 CSV file") from None
    numbered = [(n, ln) for n, ln in enumerate(text.splitlines(), start=1)
                if ln.strip() and not ln.lstrip().startswith("#")]
    lines = [ln for _, ln in numbered]
    if not lines:
        raise InputError(f"{p.name} is empty; give one thickness per line under a 'thickness_mm' header")
    try:
        dialect = csv.Sniffer().sniff(lines[0], delimiters=",;\t")
        delim = dialect.delimiter
    except csv.Error:
        delim = ","
    rows = list(csv.reader(io.StringIO("\n".join(lines)), delimiter=delim))
    head = [c.strip().lower() for c in rows[0]]
    warnings: list[str] = []
    try:
        [float(c) for c in head]
        numeric_head = True
    except ValueError:
        numeric_head = False
    if numeric_head:
        if len(head) != 1:
            raise InputError(f"{p.name} has {len(head)} columns but no header; add a header naming the "
                             f"thickness column, e.g. 'thickness_mm'")
        header, body, col, scale = ["thickness_mm"], rows, 0, 1.0
        warnings.append(f"{p.name} has no header; the values were taken as thickness in mm")
    else:
        header, body = head, rows[1:]
        col = next((i for i, c in enumerate(header) if c in THICKNESS_COLUMNS), None)
        if col is None:
            raise InputError(f"{p.name} has no thickness column (found {', '.join(header)}); name it "
                             f"thickness_mm, thickness_um or thickness")
        scale = THICKNESS_COLUMNS[header[col]]
        if header[col] == "thickness":
            warnings.append("column 'thickness' has no unit; taken as mm (name it thickness_um for micrometres)")

    def column(i):
        vals = []
        for k, row in enumerate(body):
            cell = row[i].strip() if i < len(row) else ""
            try:
                vals.append(float(cell))
            except ValueError:
                line_no = numbered[k + 1 - numeric_head][0]  # the file's own line, comments counted
                raise InputError(f"{p.name} line {line_no}: {cell!r} in column "
                                 f"{header[i]!r} is not a number; fix or remove that line") from None
        return np.array(vals)

    h = column(col) * scale
    extra = {name: column(header.index(name)) for name in ("inclination_deg", "azimuth_deg", "sway_deg")
             if name in header}
    series = series_from_thickness(h, extra.get("inclination_deg"), extra.get("azimuth_deg"),
                                   source=f"csv:{p.name}")
    if "sway_deg" in extra:
        sw = extra["sway_deg"]
        if not np.all(np.isfinite(sw)):
            raise InputError(f"{p.name}: column 'sway_deg' has missing values; fill them or drop the column")
        series.sway_deg = sw
    series.warnings = warnings + series.warnings
    return series
