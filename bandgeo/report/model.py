"""Turn an analysis state into the plain, formatted content the HTML and PDF reports lay out.

Nothing here computes a new estimate: every number comes from ``state.result`` (result.json) and is
only formatted, with its unit, its 95 % interval and its method. Where days per year are not
significant, no estimate (nor anything derived from one) is passed on.
"""
from __future__ import annotations

import math
from typing import Any, Mapping

#: Unit shown for a key, by suffix of the key name.
_SUFFIX_UNITS = (("_mm", "mm"), ("_um", "µm"), ("_deg", "degrees"), ("_hours", "h"), ("_h", "h"),
                 ("_ma", "Ma"), ("_km", "km"), ("_seconds", "s"), ("_s", "s"), ("_cm_per_yr", "cm/yr"),
                 ("_pct", "%"), ("_bands", "bands"), ("_per_band", "per band"))

DPY_UNIT = "solar days per year"

METHOD_LABELS = {"thickness_spectrum": "from the thickness spectrum",
                 "cycle_count": "by counting bands cycle by cycle",
                 "sway": "from the annual sway of the growth direction"}

CAUTIONS = [
    ("Daily laminae", "Every estimate counts bands as days. That holds only if each band is one day's "
     "growth. Modern subtidal stromatolites can add about one lamina a day (Gebelein 1969), but storm "
     "layers, tidal couplets or irregular growth also make bands. The daily test in this report weighs "
     "the evidence; it cannot prove the assumption."),
    ("Heliotropism (sway estimate)", "The sway estimate assumes the column leaned toward the average "
     "sunlight and that the lean swung once a year with the seasons. Not every author accepts that fossil "
     "columns record this (Williams, Jenkins & Walter 2007, against Vanyo & Awramik 1985)."),
    ("Counts are minima", "Stromatolite records are rarely, if ever, complete (Pannella 1972): days with no "
     "growth, or growth later eroded, leave no band. A count of bands per year is therefore a minimum, "
     "and hiatuses flagged in the series make it more so."),
    ("A wide, stated search", "The annual cycle was sought across the whole searched band stated with "
     "the estimate, not near an expected value, and its significance is judged against red noise."),
    ("Preparing specimens", "Etching with dilute acid needs gloves, eye protection and a fume hood, "
     "under your laboratory's own safety rules. Collecting in the field needs the permits and must follow "
     "the rules of the land owner and the local authorities."),
]


def unit_for(key: str) -> str:
    """Unit implied by a field name (``thickness_mm`` -> ``mm``), or ``''``."""
    k = key.lower()
    if "days_per_year" in k or k.endswith("_per_year"):
        return DPY_UNIT if "days" in k else "per year"
    for suffix, unit in _SUFFIX_UNITS:
        if k.endswith(suffix):
            return unit
    return ""


def fmt(value: Any, digits: int = 4) -> str:
    """Format a number with ``digits`` significant figures; None/NaN become an em dash."""
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (int,)) and not isinstance(value, bool):
        return str(value)
    try:
        x = float(value)
    except (TypeError, ValueError):
        return str(value)
    if not math.isfinite(x):
        return "—"
    if x != 0 and (abs(x) >= 1e6 or abs(x) < 1e-3):
        return f"{x:.{digits - 1}e}"
    return f"{x:.{digits}g}" if abs(x) < 10 ** digits else f"{x:.0f}"


def fmt_ci(ci: Any, unit: str = "") -> str:
    """``[low, high]`` as ``low–high unit``; an em dash when missing."""
    if not isinstance(ci, (list, tuple)) or len(ci) != 2 or any(c is None for c in ci):
        return "—"
    return f"{fmt(ci[0])}–{fmt(ci[1])}" + (f" {unit}" if unit else "")


def estimate_row(name: str, block: Any, unit: str) -> dict:
    """One row of the key-results table: name, value with unit, interval, method."""
    if not isinstance(block, Mapping):
        return {"name": name, "value": "not computed", "ci95": "—", "method": "—"}
    est = block.get("estimate")
    return {"name": name, "value": "no estimate" if est is None else f"{fmt(est)} {unit}".strip(),
            "ci95": fmt_ci(block.get("ci95"), unit), "method": str(block.get("method") or "—")}


def flatten(block: Any, prefix: str = "", max_list: int = 8) -> list[tuple[str, str]]:
    """Nested dict -> ``[(dotted key, formatted value with unit)]`` for the generic tables."""
    rows: list[tuple[str, str]] = []
    if isinstance(block, Mapping):
        for key, value in block.items():
            name = f"{prefix}.{key}" if prefix else str(key)
            if isinstance(value, Mapping):
                rows.extend(flatten(value, name, max_list))
            elif isinstance(value, (list, tuple)) and len(value) == 2 and str(key).startswith("ci"):
                rows.append((name, fmt_ci(value, unit_for(prefix.split(".")[-1] if prefix else ""))))
            elif isinstance(value, (list, tuple)):
                if len(value) > max_list:
                    rows.append((name, f"{len(value)} values (see result.json)"))
                else:
                    rows.append((name, ", ".join(fmt(v) if not isinstance(v, (list, tuple)) else
                                                 "[" + ", ".join(fmt(u) for u in v) + "]" for v in value)
                                 or "none"))
            else:
                unit = unit_for(str(key))
                rows.append((name, f"{fmt(value)} {unit}".strip() if value is not None else "—"))
    elif block is not None:
        rows.append((prefix or "value", fmt(block)))
    return rows


def dpy_significant(result: Mapping) -> bool:
    """True when result.json claims a significant annual cycle with an estimate
    (:class:`bandgeo.results.ResultSummary`, the one reader of result.json)."""
    from ..results import ResultSummary

    return ResultSummary.from_json(dict(result or {})).annual_significant


def cycle_counts(result: Mapping) -> list[float]:
    """Bands per cycle, cycle by cycle, from the cycle-count method block (empty if absent)."""
    block = ((result.get("days_per_year") or {}).get("methods") or {}).get("cycle_count") or {}
    for key in ("per_cycle_counts", "counts", "per_cycle", "cycle_counts", "bands_per_cycle", "counts_per_cycle"):
        value = block.get(key) if isinstance(block, Mapping) else None
        if isinstance(value, (list, tuple)) and value:
            return [float(v) for v in value if v is not None]
    return []


def collect_warnings(state: Any) -> list[str]:
    """Every warning from the result, specimen and segmentation, plus flagged stretches, deduplicated."""
    out: list[str] = []
    result = getattr(state, "result", None) or {}
    sources = [result.get("warnings") or [],
               getattr(getattr(state, "specimen", None), "warnings", None) or [],
               getattr(getattr(state, "segmentation", None), "warnings", None) or []]
    for src in sources:
        for w in src:
            text = " ".join(str(w).split())
            if text and text not in out:
                out.append(text)
    seg = getattr(state, "segmentation", None)
    flagged = ((getattr(seg, "resolution", None) or {}).get("flagged") or []) if seg is not None else []
    out.extend(_flagged_summary(flagged))
    if not dpy_significant(result):
        text = "no significant annual cycle was found: this report gives no days-per-year estimate"
        if not any("annual" in w and "signific" in w for w in out):
            out.insert(0, text)
    return out


def _flagged_summary(flagged, show: int = 6) -> list[str]:
    """One warning per reason for the flagged stretches: count, total length and the first few."""
    groups: dict[str, list] = {}
    for item in flagged:
        try:
            s0, s1, reason = item
            groups.setdefault(str(reason), []).append((float(s0), float(s1)))
        except (TypeError, ValueError):
            groups.setdefault(str(item), [])
    lines = []
    for reason, spans in groups.items():
        if not spans:
            lines.append(f"flagged stretch: {reason}")
            continue
        total = sum(abs(b - a) for a, b in spans)
        where = ", ".join(f"{fmt(a)}–{fmt(b)}" for a, b in spans[:show]) + (", …" if len(spans) > show else "")
        n = len(spans)
        lines.append(f"{n} stretch{'es' if n > 1 else ''} along the axis flagged ({fmt(total)} mm in all): "
                     f"{reason}; at {where} mm")
    return lines


def daily_supported(result: Mapping) -> bool:
    """True when the daily test's verdict supports regular (daily) increments."""
    verdict = str((result.get("daily_test") or {}).get("verdict") or "")
    return verdict.startswith("consistent")


def dpy_unit(result: Mapping) -> str:
    """Unit of the annual estimate: solar days per year only when the daily test supports it."""
    return DPY_UNIT if daily_supported(result) else "bands per annual cycle"


def key_results(result: Mapping) -> list[dict]:
    """Rows of the key-results table, in reading order."""
    rows = []
    bands = result.get("bands") or {}
    rows.append({"name": "growth bands counted", "value": fmt(bands.get("count")), "ci95": "—",
                 "method": str(bands.get("method") or "segmentation")})
    for key, label in (("mean_thickness_mm", "mean band thickness"),
                       ("median_thickness_mm", "median band thickness")):
        if bands.get(key) is not None:
            ci = bands.get(f"{key}_ci95") or (bands.get("ci95") if key == "mean_thickness_mm" else None)
            method = bands.get(key.replace("_mm", "_method")) or bands.get("method") or "—"
            rows.append({"name": label, "value": f"{fmt(bands[key])} mm", "ci95": fmt_ci(ci, "mm"),
                         "method": str(method)})
    if dpy_significant(result):
        dpy, unit = result["days_per_year"], dpy_unit(result)
        rows.append(dict(estimate_row("days per year (combined)", dpy, unit), highlight=True))
        for key, block in ((dpy.get("methods") or {}).items()):
            rows.append(estimate_row(f"days per year {METHOD_LABELS.get(key, key)}", block, unit))
        for key, label in (("length_of_day_hours", "length of day"), ("sidereal_day_hours", "sidereal day")):
            if isinstance(result.get(key), Mapping):
                rows.append(estimate_row(label, result[key], "h"))
    return rows


def method_estimates(result: Mapping) -> list[tuple[str, float, float | None, float | None]]:
    """(label, estimate, ci low, ci high) for the days-per-year figure; empty if not significant."""
    if not dpy_significant(result):
        return []
    dpy = result["days_per_year"]
    out = []

    def add(label, block):
        est = block.get("estimate") if isinstance(block, Mapping) else None
        if est is None:
            return
        ci = block.get("ci95") or [None, None]
        out.append((label, float(est), None if ci[0] is None else float(ci[0]),
                    None if ci[1] is None else float(ci[1])))

    add("this specimen, combined", dpy)
    for key, block in (dpy.get("methods") or {}).items():
        add(f"this specimen, {METHOD_LABELS.get(key, key)}", block)
    return out
