"""The JSON the review page draws from: every boundary with its state, confidence and band number,
the marked stretches, notes, the segmenter's flagged stretches, the result of the last run, and any
review file that was set apart because it does not fit this folder.

Band numbers start at 0 and follow ``bands.csv`` and ``result.json``: band *k* lies between the
*k*-th and (*k*+1)-th boundary in force, counted from the base.
"""
from __future__ import annotations

import math


#: Boundaries with a confidence below this are "low" when the page opens (the page can change it).
LOW_CONFIDENCE = 0.6


def _f(x):
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def _flagged(segmentation, limit=2000) -> list:
    """The segmenter's own flagged stretches ``[s0_mm, s1_mm, reason]``, base to top (a work list)."""
    raw = (getattr(segmentation, "resolution", None) or {}).get("flagged") or []
    rows = []
    for item in raw:
        try:
            s0, s1, reason = float(item[0]), float(item[1]), str(item[2])
        except (TypeError, ValueError, IndexError):
            continue
        if math.isfinite(s0) and math.isfinite(s1) and s1 >= s0:
            rows.append([s0, s1, reason])
    rows.sort()
    return rows[:limit]


def boundary_rows(state, info) -> list:
    """Every boundary ever seen (base to top), with its band number (None when removed or at the top),
    the thickness of the band above it along the axis (mm) and its fit figures."""
    active = state.active()
    band_of = {b.id: k for k, b in enumerate(active)}
    above = {b.id: active[k + 1].height_mm - b.height_mm for k, b in enumerate(active[:-1])}
    rows = []
    for b in sorted(state.boundaries.values(), key=lambda b: b.height_mm):
        fit = info.get(b.id, {}) if b.auto else {}
        status = b.status
        k = band_of.get(b.id)
        rows.append({
            "id": b.id, "height_mm": b.height_mm, "status": status, "auto": b.auto, "moved": b.moved,
            "band": k if b.id in above else None,
            "index": k,
            "thickness_mm": above.get(b.id),
            "confidence": fit.get("confidence") if not b.moved else None,
            "auto_confidence": fit.get("confidence"),
            "rms_mm": fit.get("rms_mm") if not b.moved else None,
            "coverage": fit.get("coverage") if not b.moved else None,
            "checked": status in ("accepted", "added", "moved"),
        })
    return rows


def page_state(app, status: dict, summary) -> dict:
    """Everything the page needs except the heavy arrays (mesh, surface)."""
    session = app.session
    state = session.state
    rows = boundary_rows(state, app.data.boundary_info())
    active = state.active()
    marks = sorted(state.marks.values(), key=lambda m: m["s0_mm"])
    basis = {k: v for k, v in app.data.basis.items() if k != "scan_to_specimen"}
    return {
        "specimen_id": app.data.specimen_id,
        "span_mm": list(app.data.span),
        "boundaries": rows,
        "marks": marks,
        "flagged": _flagged(app.data.segmentation),
        "notes": state.notes,
        "n_bands": max(len(active) - 1, 0),
        "n_boundaries": len(active),
        "n_auto_bands": max(len(app.data.segmentation.boundaries) - 1, 0),
        "n_edits": len(state.edits),
        "edits": state.edits[-200:],
        "can_undo": session.can_undo(),
        "can_redo": session.can_redo(),
        "dirty": session.dirty,
        "saved_utc": app.saved_utc,
        "low_confidence": LOW_CONFIDENCE,
        "basis": basis,
        "set_apart": app.set_apart,
        "notice": app.notice,
        "result": summary,
        "rerun": status,
    }
