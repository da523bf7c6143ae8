"""The result summary the review page shows (the page's boundary data is in :mod:`.pagedata`)."""
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
