"""What ``bandgeo inspect`` reports: a JSON-safe summary of a scan after loading and preparing it."""
from __future__ import annotations

import numpy as np

from ..atomic import to_jsonable
from ..constants import UNIT_TO_MM
from .prepare import prepare
from .readers import load_scan

SCHEMA = "bandgeo.inspect/1"


def inspect_scan(path, **prepare_kwargs) -> dict:
    """Load and prepare a scan, and summarise it.

    Parameters
    ----------
    path : str or os.PathLike
        The scan file.
    **prepare_kwargs
        Passed to :func:`bandgeo.scan.prepare` (``units``, ``up``, ``north``, ``strike_dip``, ``sheet``,
        ``scale``, ``progress``).

    Returns
    -------
    dict
        JSON-safe: counts (vertices, faces, pieces, holes = boundary loops), bounding size in the scan's
        unit and in mm, median edge length, the up vector (specimen and scan frames) with its source,
        confidence, ci95 and method, whether colours are present, cleaning counts and warnings.
    """
    scan = load_scan(path)
    spec = prepare(scan, **prepare_kwargs)
    s = spec.summary
    per_unit = spec.mm_per_unit  # mm per file unit (scale included)
    in_unit = 1.0 / UNIT_TO_MM[spec.units]
    extent_mm = np.asarray(s["extent_mm"])
    est_conf = float(s["estimated_up_confidence"])
    up = {
        "source": spec.up_source,
        "confidence": float(spec.up_confidence),
        "specimen_frame": [0.0, 0.0, 1.0],
        "scan_frame": s["paleo_up_scan"],
        "field_up_scan_frame": s["field_up_scan"],
        "estimated": {
            "scan_frame": s["estimated_up_scan"],
            "confidence": est_conf,
            "ci95_deg": [0.0, s["estimated_up_ci95_deg"]],
            "method": s["estimated_up_method"],
            "cues": s["estimated_up_cues"],
        },
    }
    info = {
        "schema": SCHEMA,
        "scan": {"path": spec.scan_path, "sha256": spec.scan_sha256, "format": scan.file_format,
                 "vertices": s["scan_vertices"], "faces": s["scan_faces"]},
        "specimen_id": spec.specimen_id,
        "vertices": s["vertices"],
        "faces": s["faces"],
        "pieces": s["pieces"],
        "pieces_removed": spec.cleaning.get("pieces_removed", 0),
        "holes": s["holes"],
        "boundary_edges": s["boundary_edges"],
        "non_manifold_edges": s["non_manifold_edges"],
        "units": spec.units,
        "units_source": s["units_source"],
        "scale": s["scale"],
        "mm_per_unit": per_unit,
        "size": {
            "unit": spec.units,
            "extent": (extent_mm * in_unit).tolist(),
            "height": s["height_mm"] * in_unit,
            "width": s["width_mm"] * in_unit,
            "diameter": s["diameter_mm"] * in_unit,
            "note": "extent along the specimen axes x (east or arbitrary), y, z (paleo-up); width is the larger "
                    "horizontal extent; diameter is twice the median distance of the mid-column surface from "
                    "the column axis",
        },
        "size_mm": {"extent": extent_mm.tolist(), "height": s["height_mm"], "width": s["width_mm"],
                    "diameter": s["diameter_mm"]},
        "median_edge": {"value": s["median_edge_mm"] * in_unit, "unit": spec.units},
        "median_edge_mm": s["median_edge_mm"],
        "up": up,
        "north_known": spec.north_known,
        "bedding": s["bedding"],
        "colors": spec.colors is not None,
        "cleaning": dict(spec.cleaning),
        "scan_to_specimen": spec.scan_to_specimen,
        "transforms": spec.transforms,
        "warnings": list(spec.warnings),
    }
    return to_jsonable(info)


def _vec(v) -> str:
    return "(" + ", ".join(f"{x:+.4f}" for x in v) + ")"


def format_inspection(info: dict) -> str:
    """Human-readable block for ``bandgeo inspect`` (every number with its unit)."""
    u = info["units"]
    size = info["size"]
    smm = info["size_mm"]
    up = info["up"]
    est = up["estimated"]
    lines = [
        f"scan         {info['scan']['path']}",
        f"format       {info['scan']['format']}  (sha256 {info['scan']['sha256'][:16]}...)",
        f"specimen     {info['specimen_id']}",
        f"read         {info['scan']['vertices']} vertices, {info['scan']['faces']} faces",
        f"kept         {info['vertices']} vertices, {info['faces']} faces",
        f"pieces       {info['pieces']} found, {info['pieces_removed']} removed",
        f"holes        {info['holes']} boundary loops ({info['boundary_edges']} boundary edges)",
        f"units        {u} (from {info['units_source']}; {info['mm_per_unit']:g} mm per file unit)",
        f"size         height {size['height']:.4g} {u}, width {size['width']:.4g} {u}, column diameter "
        f"{size['diameter']:.4g} {u}" + ("" if u == "mm" else f" (height {smm['height']:.4g} mm, width "
                                        f"{smm['width']:.4g} mm, diameter {smm['diameter']:.4g} mm)"),
        f"median edge  {info['median_edge']['value']:.4g} {u}"
        + ("" if u == "mm" else f" ({info['median_edge_mm']:.4g} mm)"),
        f"up (scan)    {_vec(up['scan_frame'])} from {up['source']}, confidence {up['confidence']:.2f} (0..1)",
        f"estimated up {_vec(est['scan_frame'])}, confidence {est['confidence']:.2f} (0..1), "
        f"95% within {est['ci95_deg'][1]:.2f} deg ({est['method']})",
        f"north        {'given (y = north)' if info['north_known'] else 'not given (y arbitrary)'}",
        f"bedding      " + (f"strike {info['bedding']['strike_deg']:g} deg, dip {info['bedding']['dip_deg']:g} deg "
                            "(right-hand rule), corrected" if info["bedding"] else "not given"),
        f"colours      {'yes' if info['colors'] else 'no'}",
    ]
    changes = [f"{k.replace('_', ' ')}: {v}" for k, v in info["cleaning"].items() if v]
    lines.append("cleaning     " + ("; ".join(changes) if changes else "nothing to change"))
    if info["warnings"]:
        lines.append("warnings")
        lines.extend(f"  - {w}" for w in info["warnings"])
    else:
        lines.append("warnings     none")
    return "\n".join(lines)
