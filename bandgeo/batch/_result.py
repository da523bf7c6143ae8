"""Read the few numbers a batch needs out of one specimen's result.json (schema bandgeo.result/1)."""
from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any, Optional

from ..constants import YEAR_SECONDS

RESULT_FILE = "result.json"
#: Written by the batch beside result.json once a specimen is analysed: its job key and sheet fields.
JOB_FILE = "batch_job.json"
JOB_SCHEMA = "bandgeo.batch-job/1"


def read_json(path: Path) -> Optional[dict]:
    """The JSON object in ``path``, or None when it is missing or unreadable."""
    try:
        with open(path, encoding="utf-8") as fh:
            data = json.load(fh)
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) else None


def _number(value: Any) -> Optional[float]:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _interval(value: Any) -> tuple[Optional[float], Optional[float]]:
    if isinstance(value, (list, tuple)) and len(value) == 2:
        low, high = _number(value[0]), _number(value[1])
        if low is not None and high is not None and low <= high:
            return low, high
    return None, None


def input_sha256(result: dict) -> Optional[str]:
    """The scan's SHA-256 recorded in a result (``provenance.input_sha256`` or
    ``specimen.scan.sha256``, docs/result-schema.md), or None if absent."""
    provenance = result.get("provenance") if isinstance(result.get("provenance"), dict) else {}
    scan = (result.get("specimen") or {}).get("scan") if isinstance(result.get("specimen"), dict) else None
    for value in (provenance.get("input_sha256"), (scan or {}).get("sha256") if isinstance(scan, dict) else None):
        if isinstance(value, str):
            return value
    return None


def digest(result: dict) -> dict:
    """Days per year and length of day of one result, as flat numbers.

    Returns
    -------
    dict
        ``days_per_year, dpy_low, dpy_high, significant, p_value, method, length_of_day_h, lod_low,
        lod_high``. A non-significant result has ``days_per_year = None`` whatever the file holds:
        "no annual cycle" is never turned into an estimate. When the result gives days per year but
        no length of day, LOD = Y / N with Y the tropical year (docs/astronomy.md), and the interval
        maps through the same monotone function.
    """
    dpy = result.get("days_per_year") if isinstance(result.get("days_per_year"), dict) else {}
    significant = bool(dpy.get("significant", False))
    estimate = _number(dpy.get("estimate")) if significant else None
    low, high = _interval(dpy.get("ci95")) if significant else (None, None)
    method = dpy.get("method")
    if not isinstance(method, str):
        methods = dpy.get("methods")
        method = ", ".join(sorted(methods)) if isinstance(methods, dict) else None
    lod = result.get("length_of_day_hours")
    lod = lod if isinstance(lod, dict) else {}
    lod_est = _number(lod.get("estimate")) if significant else None
    lod_low, lod_high = _interval(lod.get("ci95")) if significant else (None, None)
    if estimate is not None and lod_est is None:
        lod_est = YEAR_SECONDS / estimate / 3600.0
        if low is not None and high is not None and low > 0:
            lod_low, lod_high = YEAR_SECONDS / high / 3600.0, YEAR_SECONDS / low / 3600.0
    return {
        "days_per_year": estimate, "dpy_low": low, "dpy_high": high, "significant": significant,
        "p_value": _number(dpy.get("p_value")), "method": method,
        "length_of_day_h": lod_est, "lod_low": lod_low, "lod_high": lod_high,
    }


def sheet_block(result: dict) -> dict:
    """Age, horizon and locality recorded in a result's ``specimen`` block or its ``sheet``
    (keys absent when unknown)."""
    specimen = result.get("specimen") if isinstance(result.get("specimen"), dict) else {}
    sources = [specimen] + ([specimen["sheet"]] if isinstance(specimen.get("sheet"), dict) else [])
    out: dict = {}
    for block in sources:
        for key in ("age_ma", "age_err_ma"):
            if key not in out and _number(block.get(key)) is not None:
                out[key] = _number(block[key])
        for key in ("horizon", "locality"):
            if key not in out and isinstance(block.get(key), str) and block[key]:
                out[key] = block[key]
    return out
