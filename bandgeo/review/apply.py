"""Replay a saved review onto the automatic segmentation (the pipeline's review stage)."""
from __future__ import annotations

import copy
import dataclasses

from ..errors import ReviewError
from .edits import replay
from .store import _check


def axis_span(axis) -> tuple:
    """(first, last) height of a centreline in mm."""
    heights = axis.heights_mm
    return float(heights[0]), float(heights[-1])


def _boundary_class(segmentation):
    if segmentation.boundaries:
        return type(segmentation.boundaries[0])
    from ..segment import Boundary  # an earlier stage: imports flow downward

    return Boundary


def _replace(obj, **changes):
    if dataclasses.is_dataclass(obj):
        return dataclasses.replace(obj, **changes)
    obj = copy.copy(obj)
    for key, value in changes.items():
        setattr(obj, key, value)
    return obj


def apply_review(segmentation, specimen, review):
    """Return the segmentation with the review's edits replayed, in order, onto its boundaries.

    Rejected and merged boundaries are dropped; added, split and moved ones are rebuilt with
    ``Boundary.from_height(height_mm, axis, id, origin="review")``; accepted automatic boundaries keep
    their fit and get ``confidence = 1.0``. Hiatus and uncertain stretches go to
    ``resolution["review_marks"]`` as ``[s0_mm, s1_mm, "hiatus: note"]`` and are added to
    ``resolution["flagged"]``; notes go to ``params["review"]["notes"]``.

    Parameters
    ----------
    segmentation : bandgeo.segment.Segmentation
        The automatic segmentation (not modified).
    specimen : bandgeo.scan.Specimen
        The oriented specimen the segmentation belongs to (for re-assigning vertices to bands).
    review : dict or None
        As read by ``read_review``; None or no edits gives the segmentation back unchanged.

    Raises
    ------
    ReviewError
        When the review is malformed or an edit does not fit this segmentation (e.g. it names a
        boundary id the segmentation does not have).
    """
    if review is None:
        return segmentation
    review = _check(review, "review")
    if not review["edits"]:
        return segmentation
    axis = segmentation.axis
    by_id = {int(b.id): b for b in segmentation.boundaries}
    try:
        state = replay([(b.id, b.height_mm) for b in segmentation.boundaries], review["edits"],
                       axis_span(axis))
    except ReviewError as exc:
        raise ReviewError(f"review.json does not fit this segmentation: {exc}; re-run the review "
                          f"or analyse without the review") from None
    Boundary = _boundary_class(segmentation)
    boundaries = []
    for b in state.active():
        if b.auto and not b.moved:
            original = by_id[b.id]
            if b.accepted:
                changes = {"confidence": 1.0}
                if isinstance(getattr(original, "flags", None), list):
                    changes["flags"] = original.flags + ["accepted in review"]
                original = _replace(original, **changes)
            boundaries.append(original)
        else:
            made = Boundary.from_height(b.height_mm, axis, id=b.id, origin="review")
            if isinstance(getattr(made, "flags", None), list):
                made.flags.append("moved in review" if b.auto else "added in review")
            boundaries.append(made)
    edited = segmentation.with_boundaries(boundaries, specimen)

    resolution = dict(getattr(edited, "resolution", {}) or {})
    marks = [[m["s0_mm"], m["s1_mm"], f"{m['kind']}: {m['note']}".rstrip(": ").strip()]
             for m in sorted(state.marks.values(), key=lambda m: m["s0_mm"])]
    resolution["review_marks"] = marks
    resolution["flagged"] = list(resolution.get("flagged", [])) + [list(m) for m in marks]
    params = dict(getattr(edited, "params", {}) or {})
    counts = {}
    for b in state.boundaries.values():
        counts[b.status] = counts.get(b.status, 0) + 1
    params["review"] = {"edits": len(state.edits), "boundaries": counts, "notes": state.notes,
                        "updated_utc": review.get("updated_utc")}
    warnings = list(getattr(edited, "warnings", []) or [])
    removed = counts.get("rejected", 0) + counts.get("merged", 0)
    moved = sum(1 for b in state.boundaries.values() if b.moved and not b.rejected)
    warnings.append(f"review: {len(state.edits)} edit(s) applied by hand ({removed} boundaries removed, "
                    f"{counts.get('added', 0)} added, {moved} moved)")
    return _replace(edited, resolution=resolution, params=params, warnings=warnings)
