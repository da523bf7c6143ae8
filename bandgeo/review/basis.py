"""What a review was made on: the scan, its units and scale, the specimen frame and the segmentation.

A review's edits name boundaries by id and place heights in millimetres along the centreline of the
specimen frame. Both only mean something for the segmentation and frame they were made on, so
``review.json`` records that *basis* and a review whose basis differs from the folder's is never shown
or applied silently (``check_fit`` says why it does not fit).

    segmentation_id(segmentation) -> str       a short fingerprint of the automatic boundaries
    basis_of(meta, segmentation) -> dict       the basis of a folder (specimen metadata + segmentation)
    check_fit(review, basis) -> list[str]      reasons the review does not fit (empty: it fits)
"""
from __future__ import annotations

import hashlib
import json
import math

import numpy as np

#: What the heights of a review's edits are measured in (written into the basis).
FRAME = ("specimen frame (millimetres, z paleo-up, origin on the column's axis at its base); "
         "heights are arc length along the segmentation's centreline from its first point")


def segmentation_id(segmentation) -> str:
    """A fingerprint of an automatic segmentation: its boundary ids and heights (to 1 nm) and its axis
    span, hashed. Two segmentations with the same id have the same boundaries in the same places."""
    rows = sorted((int(b.id), round(float(b.height_mm), 6)) for b in segmentation.boundaries)
    heights = np.asarray(segmentation.axis.heights_mm, float)
    span = [round(float(heights[0]), 6), round(float(heights[-1]), 6)] if heights.size else []
    text = json.dumps({"boundaries": rows, "axis": span}, separators=(",", ":"))
    return "seg-" + hashlib.sha256(text.encode("utf-8")).hexdigest()[:16]


def _matrix(value):
    try:
        m = np.asarray(value, float)
    except (TypeError, ValueError):
        return None
    return m if m.shape == (4, 4) and np.isfinite(m).all() else None


def basis_of(meta: dict, segmentation) -> dict:
    """The basis of an analysed folder.

    Parameters
    ----------
    meta : dict
        The specimen metadata kept in ``specimen.npz`` (``scan_sha256``, ``units``, ``mm_per_unit``,
        ``scan_to_specimen``, ``specimen_id``); missing fields are recorded as None.
    segmentation : Segmentation
        The automatic segmentation of the folder.
    """
    m = _matrix(meta.get("scan_to_specimen"))
    mm = meta.get("mm_per_unit")
    return {
        "scan_sha256": meta.get("scan_sha256"),
        "scan_path": meta.get("scan_path"),
        "specimen_id": meta.get("specimen_id"),
        "units": meta.get("units"),
        "mm_per_unit": float(mm) if isinstance(mm, (int, float)) and math.isfinite(mm) else None,
        "scan_to_specimen": None if m is None else m.tolist(),
        "segmentation_id": segmentation_id(segmentation),
        "n_boundaries": len(segmentation.boundaries),
        "frame": FRAME,
    }


def _short(sha) -> str:
    return f"{sha[:12]}…" if isinstance(sha, str) and len(sha) > 12 else str(sha)


def describe(basis: dict | None, review: dict | None = None) -> str:
    """One phrase naming what a review (or folder) belongs to: specimen, scan hash and units."""
    basis = basis or {}
    review = review or {}
    sha = basis.get("scan_sha256") or review.get("scan_sha256")
    specimen = basis.get("specimen_id") or review.get("specimen_id")
    parts = [f"specimen {specimen}" if specimen else "an unnamed specimen",
             f"scan SHA-256 {_short(sha)}" if sha else "an unrecorded scan"]
    if basis.get("scan_path"):
        parts.append(str(basis["scan_path"]))
    if basis.get("units"):
        parts.append(f"units {basis['units']} ({basis.get('mm_per_unit')} mm per unit)")
    if basis.get("n_boundaries") is not None:
        parts.append(f"{basis['n_boundaries']} automatic boundaries")
    return ", ".join(parts)


def check_fit(review: dict, basis: dict) -> list:
    """Why ``review`` does not fit a folder of the given ``basis`` (an empty list when it fits).

    A review from before bases were recorded (no ``basis`` block) fits only when its scan hash matches;
    its units and segmentation cannot be checked, and the caller should say so.
    """
    reasons = []
    own = review.get("basis") if isinstance(review.get("basis"), dict) else {}
    sha = own.get("scan_sha256") or review.get("scan_sha256")
    if sha and basis.get("scan_sha256") and sha != basis["scan_sha256"]:
        reasons.append(f"it was made on scan {_short(sha)}, this folder holds scan {_short(basis['scan_sha256'])}")
    if not own:
        if not sha:
            reasons.append("it records neither the scan nor the segmentation it was made on")
        return reasons
    if own.get("units") != basis.get("units") or not _close(own.get("mm_per_unit"), basis.get("mm_per_unit")):
        reasons.append(f"it was made with units {own.get('units')} ({own.get('mm_per_unit')} mm per unit), this "
                       f"folder uses {basis.get('units')} ({basis.get('mm_per_unit')} mm per unit)")
    a, b = _matrix(own.get("scan_to_specimen")), _matrix(basis.get("scan_to_specimen"))
    if a is not None and b is not None and not np.allclose(a, b, rtol=1e-9, atol=1e-9 * max(1.0, np.abs(b).max())):
        if not any("units" in r for r in reasons):
            reasons.append("the specimen frame differs (the scan was oriented or scaled differently)")
    if own.get("segmentation_id") and own["segmentation_id"] != basis.get("segmentation_id"):
        reasons.append(f"it was made on segmentation {own['segmentation_id']} ({own.get('n_boundaries')} "
                       f"boundaries), this folder holds {basis.get('segmentation_id')} "
                       f"({basis.get('n_boundaries')} boundaries)")
    return reasons


def _close(a, b) -> bool:
    if a is None or b is None:
        return a is None and b is None
    try:
        return math.isclose(float(a), float(b), rel_tol=1e-9)
    except (TypeError, ValueError):
        return False


def check_review(review: dict, specimen, segmentation) -> list:
    """``check_fit`` against an in-memory specimen (``bandgeo.scan.Specimen``) and its *automatic*
    segmentation: for the pipeline, before it replays a review. Empty list: the review fits."""
    meta = {name: getattr(specimen, name, None)
            for name in ("scan_sha256", "scan_path", "specimen_id", "units", "mm_per_unit")}
    matrix = getattr(specimen, "scan_to_specimen", None)
    meta["scan_to_specimen"] = None if matrix is None else np.asarray(matrix, float).tolist()
    return check_fit(review, basis_of(meta, segmentation))
