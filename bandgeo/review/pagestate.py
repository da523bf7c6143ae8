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
    """The figures the page shows from a ``result.json`` dict (days per year, band count, ...)."""
    if not isinstance(result, dict):
        return None
    dpy = result.get("days_per_year") or {}
    bands = result.get("bands") or {}
    daily = result.get("daily_test") or {}
    out = {
        "days_per_year": {
            "estimate": _num(dpy.get("estimate")),
            "ci95": [_num(v) for v in (dpy.get("ci95") or [None, None])][:2],
            "significant": dpy.get("significant"),
            "method": dpy.get("method"),
            "p_value": _num(dpy.get("p_value")),
            "is_minimum": dpy.get("is_minimum"),
            "unit": dpy.get("unit") or "days/yr",
        },
        "bands": {"count": bands.get("count"), "mean_thickness_mm": _num(bands.get("mean_thickness_mm")),
                  "median_thickness_mm": _num(bands.get("median_thickness_mm"))},
        "daily": {"verdict": daily.get("verdict") if isinstance(daily, dict) else None},
        "length_of_day_hours": result.get("length_of_day_hours"),
        "review": result.get("review"),
        "measured": None,
    }
    if band_table is not None:
        measured = {}
        for name in ("thickness_median_mm", "inclination_deg", "azimuth_deg"):
            values = getattr(band_table, name, None)
            if values is not None:
                measured[name] = [_num(v) for v in np.asarray(values, float).ravel()]
        out["measured"] = measured or None
    if not isinstance(out["length_of_day_hours"], (int, float, type(None))):
        out["length_of_day_hours"] = None
    if not isinstance(out["review"], (dict, type(None))):
        out["review"] = None
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
