"""The JSON the review page draws from: boundaries with their status, marks, notes, bands, result."""
from __future__ import annotations

import math

import numpy as np


def _num(x):
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def result_summary(result, band_table=None) -> dict | None:
    """The figures the page shows from a ``result.json`` dict (days per year, band count, ...), read
    through :class:`bandgeo.results.ResultSummary`. A non-significant annual cycle gives no estimate."""
    from ..results import ResultSummary

    if not isinstance(result, dict):
        return None
    s = ResultSummary.from_json(result)
    raw_dpy = result.get("days_per_year") if isinstance(result.get("days_per_year"), dict) else {}
    dpy = s.days_per_year
    lod = s.length_of_day_hours
    out = {
        "days_per_year": {
            "estimate": None if dpy is None else dpy.estimate,
            "ci95": list(dpy.ci95) if dpy is not None and dpy.ci95 else [None, None],
            "significant": s.annual_significant,
            "method": s.annual_method,
            "p_value": s.annual_p_value,
            "is_minimum": raw_dpy.get("is_minimum"),
            "unit": raw_dpy.get("unit") or "days/yr",
        },
        "bands": {"count": s.band_count, "mean_thickness_mm": s.mean_thickness_mm,
                  "median_thickness_mm": s.median_thickness_mm},
        "daily": {"verdict": s.daily_verdict},
        "length_of_day_hours": None if lod is None else {
            "estimate": lod.estimate, "ci95": list(lod.ci95) if lod.ci95 else None, "method": lod.method},
        "review": s.review or None,
        "measured": None,
    }
    if band_table is not None:
        out["measured"] = {name: [_num(v) for v in np.asarray(getattr(band_table, name), float).ravel()]
                           for name in ("thickness_median_mm", "inclination_deg", "azimuth_deg")}
    return out


def band_rows(active, marks) -> list:
    """Bands between consecutive boundaries: index, base, top, thickness along the axis, flags."""
    rows = []
    for i in range(len(active) - 1):
        lo, hi = active[i], active[i + 1]
        flags = sorted({m["kind"] for m in marks if m["s0_mm"] < hi.height_mm and m["s1_mm"] > lo.height_mm})
        rows.append({"index": i + 1, "base_mm": lo.height_mm, "top_mm": hi.height_mm,
                     "thickness_axis_mm": hi.height_mm - lo.height_mm,
                     "below": lo.id, "above": hi.id, "flags": flags})
    return rows


def _flagged(segmentation, limit=2000) -> list:
    """The segmenter's own flagged stretches ``[s0_mm, s1_mm, reason]``, merged where they overlap
    with the same reason, base to top (a work list for the reviewer)."""
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


def page_state(app, status: dict, summary) -> dict:
    """Everything the page needs except the heavy arrays (mesh, surface)."""
    session = app.session
    state = session.state
    info = app.data.boundary_info()
    every = sorted(state.boundaries.values(), key=lambda b: b.height_mm)
    traces = app.data.traces([b.height_mm for b in every])
    boundaries = []
    for b, trace in zip(every, traces):
        fit = info.get(b.id, {}) if b.auto and not b.moved else {}
        boundaries.append({"id": b.id, "height_mm": b.height_mm, "status": b.status, "auto": b.auto,
                           "moved": b.moved, "trace_mm": trace, **fit})
    active = state.active()
    marks = sorted(state.marks.values(), key=lambda m: m["s0_mm"])
    return {
        "specimen_id": app.data.specimen_id,
        "span_mm": list(app.data.span),
        "boundaries": boundaries,
        "marks": marks,
        "flagged": _flagged(app.data.segmentation),
        "notes": state.notes,
        "bands": band_rows(active, marks),
        "n_bands": max(len(active) - 1, 0),
        "n_auto_bands": max(len(app.data.segmentation.boundaries) - 1, 0),
        "n_edits": len(state.edits),
        "edits": state.edits[-200:],
        "can_undo": session.can_undo(),
        "can_redo": session.can_redo(),
        "dirty": session.dirty,
        "saved_utc": app.saved_utc,
        "result": summary,
        "rerun": status,
    }
