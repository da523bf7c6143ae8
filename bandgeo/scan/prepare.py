"""Turn a raw ``Scan`` into an oriented ``Specimen``: clean, scale to mm, orient, correct bedding, place origin."""
from __future__ import annotations

import numpy as np

from ..constants import UNIT_TO_MM
from ..errors import InputError, ParameterError, shown
from ..progress import report
from .clean import clean_mesh
from .orient import bedding_rotation, check_strike_dip, estimate_up, frame_rows, unit
from .types import Scan, ScaleReference, Specimen, SpecimenSheet

#: Faces needed for a mesh to be worth orienting at all.
MIN_FACES = 20
#: Plausible overall size of a hand specimen, mm (columns are about 1-10 cm wide and 5-50 cm tall; common practice).
PLAUSIBLE_MM = (10.0, 2000.0)
TYPICAL_MM = (20.0, 1000.0)
#: Sizes refused outright, mm: below 1 um or above 10 km no unit slip explains the scan (and later stages'
#: grids and counts would overflow); between these and PLAUSIBLE_MM it is a warning.
HARD_MM = (1e-3, 1e7)
#: Range of a scale factor (file units to ``units``), given or from a reference length.
SCALE_RANGE = (1e-6, 1e6)


def _h(matrix3=None, translation=None, scale=None) -> np.ndarray:
    out = np.eye(4)
    if matrix3 is not None:
        out[:3, :3] = matrix3
    if scale is not None:
        out[:3, :3] *= scale
    if translation is not None:
        out[:3, 3] = translation
    return out


def _as_scale(scale, where: str):
    if scale is None or isinstance(scale, ScaleReference):
        return scale
    if isinstance(scale, (tuple, list)) and len(scale) == 3:
        try:
            ref = ScaleReference(p1=np.asarray(scale[0], float), p2=np.asarray(scale[1], float),
                                 length=float(scale[2]))
            ok = ref.p1.shape == (3,) and ref.p2.shape == (3,) and np.isfinite(ref.length) and ref.length > 0 \
                and np.all(np.isfinite(ref.p1)) and np.all(np.isfinite(ref.p2)) and ref.file_distance() > 0
        except (TypeError, ValueError):
            ok = False
        if not ok:
            raise ParameterError(f"{where} must be (point1, point2, length) with two distinct 3-D points and a "
                                 f"positive length but got {shown(scale)}")
        return ref
    try:
        factor = float(scale)
    except (TypeError, ValueError):
        factor = float("nan")
    if not (np.isfinite(factor) and factor > 0):
        raise ParameterError(f"{where} must be a positive factor or (point1, point2, length) but got {shown(scale)}")
    return factor


def _guess_units(largest_file: float):
    """The unit that makes the specimen a plausible size, preferring mm, then cm, m, um, in."""
    for name in ("mm", "cm", "m", "um", "in"):
        size = largest_file * UNIT_TO_MM[name]
        if TYPICAL_MM[0] <= size <= TYPICAL_MM[1]:
            return name
    return "mm"


def _rotate(v: np.ndarray, rot: np.ndarray, block: int = 1 << 15) -> np.ndarray:
    """``v @ rot.T`` in blocks of rows: the same numbers, but small products stay on one BLAS thread
    (a whole-mesh (n, 3) x (3, 3) product was 5-20x slower here with the other core busy)."""
    out = np.empty((len(v), 3))
    rt = np.ascontiguousarray(rot.T)
    for s0 in range(0, len(v), block):
        np.matmul(v[s0:s0 + block], rt, out=out[s0:s0 + block])
    return out


def _col_range(p: np.ndarray):
    """Per-column (min, max) of an (n, 3) array; column by column (axis-0 reductions are slow here)."""
    lo = np.array([p[:, k].min() for k in range(p.shape[1])])
    hi = np.array([p[:, k].max() for k in range(p.shape[1])])
    return lo, hi


def _fmt_mm(value_mm: float) -> str:
    if value_mm >= 1000:
        return f"{value_mm / 1000:.3g} m"
    if value_mm >= 10:
        return f"{value_mm / 10:.3g} cm"
    return f"{value_mm:.3g} mm"


def prepare(scan: Scan, *, units=None, up=None, north=None, strike_dip=None, sheet=None, scale=None,
            progress=None) -> Specimen:
    """Clean, scale, orient and bedding-correct a scan into the specimen frame.

    Parameters
    ----------
    scan : Scan
        As returned by :func:`bandgeo.scan.load_scan`.
    units : {'um', 'mm', 'cm', 'm', 'in'} or None
        Unit of the scan's coordinates (of the reference length when ``scale`` is a reference). Else the
        sheet's, else a ``units`` comment in the file, else guessed from the size (with a warning).
    up, north : (3,) array-like or None
        Way-up (the field vertical marked on the specimen) and north mark, scan frame. ``up`` falls back
        to the sheet, then to an estimate from the shape (long axis, domed top) with a confidence.
    strike_dip : (float, float) or None
        Bedding strike and dip, degrees, right-hand rule; needs the field up and north.
    sheet : SpecimenSheet, path or None
        Specimen sheet; explicit arguments win over it.
    scale : float, ScaleReference, (p1, p2, length) or None
        Factor taking file coordinates to ``units``, or a known length between two scan points.
    progress : callable or None
        ``progress(description, done, total)``.

    Returns
    -------
    Specimen
    """
    with np.errstate(all="ignore"):  # numbers out of range are refused with one line, never warned about
        return _prepare(scan, units=units, up=up, north=north, strike_dip=strike_dip, sheet=sheet, scale=scale,
                        progress=progress)


def _prepare(scan: Scan, *, units, up, north, strike_dip, sheet, scale, progress) -> Specimen:
    _check_scan_arrays(scan)
    if sheet is not None and not isinstance(sheet, SpecimenSheet):
        from .sheet import read_sheet
        sheet = read_sheet(sheet)
    # parameters first: a typo is reported before any work
    units_name, units_source = _given_units(units, sheet)
    scale_ref = _as_scale(scale, "scale") if scale is not None else \
        (sheet.scale if sheet is not None and sheet.scale is not None else None)
    factor, scale_note = _scale_factor(scale_ref, units_name)
    strike_dip = _given_bedding(strike_dip, sheet)
    warnings: list = []
    clean = _clean(scan, warnings, progress)
    v, faces = clean.vertices, clean.faces
    report(progress, "orienting", 0, 1)
    # ---- way-up and north (scan frame), bedding
    estimate = estimate_up(v, faces, clean.boundary_edges)
    field_up, up_source, up_conf = _way_up(up, sheet, estimate, warnings)
    if north is None and sheet is not None and sheet.north is not None:
        north = sheet.north
    rows, north_known = frame_rows(field_up, north)
    r_bed = np.eye(3)
    if strike_dip is not None:
        if not north_known or up_source == "estimated":
            raise ParameterError("bedding correction needs the specimen's field vertical and north; give --up and "
                                 "--north (or up and north in the sheet), or drop the strike/dip")
        r_bed = bedding_rotation(*strike_dip)
    rot = r_bed @ rows
    # ---- units and scale, then the origin on the axis at the base
    p = _rotate(v, rot)
    p_lo, p_hi = _col_range(p)
    extent_file = p_hi - p_lo
    units_name, units_source, k = _final_units(scan, units_name, units_source, scale_ref, factor,
                                               float(extent_file.max()), warnings)
    vertices_mm, origin, (zmin, zmax) = _place_origin(p, k, p_lo, p_hi)
    transforms = [
        {"step": "scale", "matrix": _h(scale=k).tolist(),
         "note": f"{units_name} to mm (x{k:g}; units from {units_source}" + (f"; {scale_note}" if scale_note else "") + ")"},
        {"step": "orient", "matrix": _h(rows).tolist(),
         "note": f"up from {up_source} to +z; " + ("north to +y" if north_known else "y an arbitrary horizontal")},
        {"step": "bedding", "matrix": _h(r_bed).tolist(),
         "note": (f"strike {strike_dip[0]:g} dip {strike_dip[1]:g} (right-hand rule) rotated back to horizontal"
                  if strike_dip is not None else "no bedding correction (none given)")},
        {"step": "origin", "matrix": _h(translation=-origin).tolist(), "note": "origin on the axis at the base"},
    ]
    scan_to_specimen = _h(translation=-origin) @ _h(r_bed) @ _h(rows) @ _h(scale=k)
    summary = _summary(scan, clean, k, factor, extent_file, zmax - zmin, estimate, units_source, scale_note)
    summary.update({"field_up_scan": field_up.tolist(), "paleo_up_scan": (rot.T @ np.array([0.0, 0.0, 1.0])).tolist()})
    summary = _add_estimate_and_bedding(summary, estimate, strike_dip)
    report(progress, "orienting", 1, 1)
    return Specimen(
        vertices_mm=vertices_mm, faces=faces,
        colors=_kept_colors(scan.colors, clean.scan_index),
        scan_to_specimen=scan_to_specimen, units=units_name, mm_per_unit=float(k), up_source=up_source,
        up_confidence=float(up_conf), north_known=bool(north_known), cleaning=dict(clean.counts),
        transforms=transforms, warnings=warnings, sheet=sheet,
        specimen_id=(sheet.specimen_id if sheet is not None and sheet.specimen_id else _stem(scan.path)),
        scan_path=scan.path, scan_sha256=scan.sha256, scan_vertex_index=clean.scan_index, summary=summary)


def _check_scan_arrays(scan) -> None:
    """ParameterError unless ``scan`` is a Scan with (n, 3) numeric vertices and (m, 3) whole-number faces
    that index them (load_scan guarantees this; a Scan built by hand may not)."""
    if not isinstance(scan, Scan):
        raise ParameterError(f"expected a Scan from bandgeo.scan.load_scan but got {type(scan).__name__}")
    v, f = np.asarray(scan.vertices), np.asarray(scan.faces)
    if v.ndim != 2 or v.shape[1] != 3 or v.dtype.kind not in "fiu" or len(v) == 0:
        raise ParameterError(f"expected Scan.vertices to be an (n, 3) array of numbers but got shape {v.shape} "
                             f"of {v.dtype}; read the scan with bandgeo.scan.load_scan")
    if f.ndim != 2 or f.shape[1] != 3 or f.dtype.kind not in "iu" or len(f) == 0:
        raise ParameterError(f"expected Scan.faces to be an (m, 3) array of whole numbers but got shape {f.shape} "
                             f"of {f.dtype}; read the scan with bandgeo.scan.load_scan")
    if f.min() < 0 or f.max() >= len(v):
        raise ParameterError(f"Scan.faces index vertices outside 0..{len(v) - 1}; read the scan with "
                             "bandgeo.scan.load_scan")


def _given_units(units, sheet):
    """(unit name, its source) from the argument, else the sheet, else (None, None)."""
    if units is not None:
        name = str(units).strip().lower()
        if name not in UNIT_TO_MM:
            raise ParameterError(f"units must be one of {', '.join(UNIT_TO_MM)} but got {shown(units)}")
        return name, "cli"
    if sheet is not None and sheet.units is not None:
        return sheet.units, "sheet"
    return None, None


def _scale_factor(scale_ref, units_name):
    """(factor from file units to ``units``, note) of a scale factor or reference length (1.0, None)."""
    factor, note = 1.0, None
    if isinstance(scale_ref, ScaleReference):
        factor = scale_ref.length / scale_ref.file_distance()
        note = (f"reference length {scale_ref.length:g} {units_name or 'mm'} over {scale_ref.file_distance():g} "
                "file units")
    elif scale_ref is not None:
        factor = float(scale_ref)
        note = f"scale factor {factor:g}"
    if not SCALE_RANGE[0] <= factor <= SCALE_RANGE[1]:
        raise ParameterError(f"the scale factor is {factor:.3g} ({note}), outside {SCALE_RANGE[0]:g}.."
                             f"{SCALE_RANGE[1]:g}; give the file's unit with --units (or units in the sheet) and "
                             "use a scale only for a small correction")
    return factor, note


def _given_bedding(strike_dip, sheet):
    """(strike, dip) in degrees, range-checked, from the argument or the sheet; or None."""
    if strike_dip is None and sheet is not None and sheet.strike_deg is not None:
        strike_dip = (sheet.strike_deg, sheet.dip_deg)
    if strike_dip is None:
        return None
    try:
        strike, dip = (float(x) for x in strike_dip)
    except (TypeError, ValueError):
        raise ParameterError(f"strike/dip must be two numbers like 40,25 but got {shown(strike_dip)}")
    check_strike_dip(strike, dip)
    return strike, dip


def _clean(scan: Scan, warnings: list, progress):
    """:func:`clean_mesh` of the scan, refusing fragments and flat meshes; notes removed pieces and
    non-orientable patches in ``warnings``."""
    try:
        # as float64 and int64 (no copy for what load_scan gives; a hand-built Scan may hold other types)
        clean = clean_mesh(np.ascontiguousarray(scan.vertices, dtype=np.float64),
                           np.ascontiguousarray(scan.faces, dtype=np.int64), progress=progress)
    except InputError as exc:  # say which file
        raise InputError(f"'{scan.path}': {exc}") from None
    v, faces = clean.vertices, clean.faces
    if len(faces) < MIN_FACES:
        raise InputError(f"'{scan.path}': only {len(faces)} usable faces (a specimen scan needs at least "
                         f"{MIN_FACES}); export the full mesh, not a fragment")
    sample = v[:: max(1, len(v) // 200_000)]
    spread = np.sqrt(np.maximum(np.linalg.eigvalsh(np.cov(sample.T)), 0.0))
    if spread[0] <= 1e-4 * spread[2]:
        raise InputError(f"'{scan.path}': the mesh is flat (thickness {spread[0] / spread[2]:.1e} of its width); "
                         "a specimen scan must be 3-D, export the whole column rather than one face")
    if clean.counts["pieces_removed"]:
        fr = clean.stats["piece_area_fractions"]
        warnings.append(f"kept the largest of {clean.stats['pieces']} pieces ({100 * fr[0]:.1f}% of the area); "
                        f"removed {clean.counts['pieces_removed']} smaller pieces "
                        f"({clean.counts['faces_in_removed_pieces']} faces)")
        if len(fr) > 1 and fr[1] > 0.2 * fr[0]:
            warnings.append(f"the second piece holds {100 * fr[1]:.1f}% of the area: the scan may hold more "
                            "than one specimen or a broken one; check it")
    if clean.stats["non_orientable_faces"]:
        warnings.append(f"{clean.stats['non_orientable_faces']} faces could not be wound consistently "
                        "(non-orientable patch); normals there may point inward")
    return clean


def _way_up(up, sheet, estimate, warnings: list):
    """(field up in the scan frame, source, confidence): given, from the sheet, or the shape's estimate;
    warns when a given up points against a confident estimate."""
    if up is not None:
        field_up, up_source, up_conf = unit(up, "up"), "cli", 1.0
    elif sheet is not None and sheet.up is not None:
        field_up, up_source, up_conf = unit(sheet.up, "sheet up"), "sheet", 1.0
    else:
        field_up, up_source, up_conf = estimate.up, "estimated", estimate.confidence
        warnings.extend(estimate.warnings)
    if up_source != "estimated" and estimate.confidence > 0.7 and np.dot(field_up, estimate.up) < 0:
        angle = np.degrees(np.arccos(np.clip(np.dot(field_up, estimate.up), -1, 1)))
        warnings.append(f"the given up vector is {angle:.0f} deg from the growth direction estimated from the "
                        "shape (domed top); check that it does not point to the base")
    return field_up, up_source, up_conf


def _final_units(scan, units_name, units_source, scale_ref, factor, largest_file, warnings: list):
    """(unit, source, mm per file unit): the given unit, else the file's hint, else a guess from the size;
    refuses sizes no unit explains and warns about implausible ones."""
    if units_name is None:
        hint = getattr(scan, "units_hint", None)
        if scale_ref is not None:
            units_name, units_source = "mm", "assumed"
        elif hint in UNIT_TO_MM:
            units_name, units_source = hint, "file"
        else:
            units_name, units_source = _guess_units(largest_file), "guessed"
            warnings.append(f"units not given; guessed '{units_name}' from the size ({largest_file:.4g} file units "
                            f"across); pass --units or set units in the specimen sheet")
    k = UNIT_TO_MM[units_name] * factor
    largest_mm = largest_file * k
    if not HARD_MM[0] <= largest_mm <= HARD_MM[1]:
        raise InputError(f"'{scan.path}': the specimen would be {largest_mm:.3g} mm across ({largest_file:.3g} file "
                         f"units in '{units_name}', units from {units_source}), which no hand specimen is and no "
                         "unit slip explains; check the export's unit and scale, then pass --units (or units and "
                         "scale in the specimen sheet)")
    if not PLAUSIBLE_MM[0] <= largest_mm <= PLAUSIBLE_MM[1]:
        better = _guess_units(largest_file * factor)
        hint_txt = f"; if the file is in {better}, pass --units {better}" if better != units_name else ""
        warnings.append(f"the specimen would be {_fmt_mm(largest_mm)} across in '{units_name}', implausible for a "
                        f"hand specimen (columns are about 1-10 cm wide and 5-50 cm tall){hint_txt}")
    return units_name, units_source, k


def _place_origin(p, k, p_lo, p_hi):
    """(vertices in mm with the origin on the axis at the base, that origin, (zmin, zmax) before the
    shift); scales ``p`` in place."""
    pm = p
    if k != 1.0:
        pm *= k  # in place: p is not used again
        lo, hi = _col_range(pm)
    else:
        lo, hi = p_lo, p_hi
    zmin, zmax = float(lo[2]), float(hi[2])
    width = float(max(hi[0] - lo[0], hi[1] - lo[1]))
    base = pm[:, 2] <= zmin + min(0.03 * (zmax - zmin), 0.1 * width)
    origin = np.array([pm[base, 0].mean(), pm[base, 1].mean(), zmin])
    pm -= origin
    return pm, origin, (zmin, zmax)


def _summary(scan, clean, k, factor, extent_file, height_mm, estimate, units_source, scale_note) -> dict:
    """The counts, sizes and cues of :attr:`Specimen.summary` known after cleaning and scaling."""
    return {
        "scan_vertices": int(len(scan.vertices)), "scan_faces": int(len(scan.faces)),
        "vertices": int(len(clean.vertices)), "faces": int(len(clean.faces)),
        "pieces": clean.stats["pieces"], "piece_area_fractions": clean.stats["piece_area_fractions"],
        "holes": clean.stats["holes"], "boundary_edges": clean.stats["boundary_edges"],
        "non_manifold_edges": clean.stats["non_manifold_edges"],
        "inconsistent_edges": clean.stats["inconsistent_edges"],
        "median_edge_units": clean.stats["median_edge"], "median_edge_mm": clean.stats["median_edge"] * k,
        "extent_units": (extent_file * factor).tolist(), "extent_mm": (extent_file * k).tolist(),
        "height_mm": float(height_mm), "width_mm": float(max(extent_file[0], extent_file[1]) * k),
        "diameter_mm": float(2.0 * estimate.radius * k),
        "units_source": units_source, "scale": scale_note,
    }


def _add_estimate_and_bedding(summary: dict, estimate, strike_dip) -> dict:
    """``summary`` completed with the way-up estimate and the bedding (keys in the order documented)."""
    summary.update({
        "estimated_up_scan": estimate.up.tolist(), "estimated_up_confidence": estimate.confidence,
        "estimated_up_ci95_deg": estimate.ci95_deg,
        "estimated_up_method": estimate.method, "estimated_up_cues": estimate.cues,
        "bedding": None if strike_dip is None else {"strike_deg": float(strike_dip[0]),
                                                    "dip_deg": float(strike_dip[1])},
    })
    return summary


def _kept_colors(colors, scan_index):
    """Colours of the kept vertices (a copy; a plain copy when every vertex was kept, in order)."""
    if colors is None:
        return None
    if len(scan_index) == len(colors) and scan_index[0] == 0 and scan_index[-1] == len(colors) - 1:
        return colors.copy()  # scan_index is increasing, so this means it is 0..n-1
    return colors[scan_index]


def _stem(path: str) -> str:
    from pathlib import Path
    return Path(path).stem
