"""The few numbers a batch needs out of one specimen's result.json, read through
:class:`bandgeo.results.ResultSummary` (the one reader of the result folder)."""
from __future__ import annotations

from pathlib import Path
from typing import Optional

from ..results import RESULT_FILE, ResultSummary, read_json_or_none

__all__ = ["RESULT_FILE", "JOB_FILE", "JOB_SCHEMA", "read_json", "input_sha256", "digest", "sheet_block"]

#: Written by the batch beside result.json once a specimen is analysed: its job key and sheet fields.
JOB_FILE = "batch_job.json"
JOB_SCHEMA = "bandgeo.batch-job/1"


def read_json(path: Path) -> Optional[dict]:
    """The JSON object in ``path``, or None when it is missing or unreadable."""
    return read_json_or_none(path)


def input_sha256(result: dict) -> Optional[str]:
    """The scan's SHA-256 recorded in a result (``provenance.input_sha256`` or
    ``specimen.scan.sha256``, docs/result-schema.md), or None if absent."""
    return ResultSummary.from_json(result).scan_sha256


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
    s = ResultSummary.from_json(result)
    dpy, lod = s.days_per_year, s.length_of_day_hours
    low, high = (dpy.ci95 if dpy is not None and dpy.ci95 else (None, None))
    lod_low, lod_high = (lod.ci95 if lod is not None and lod.ci95 else (None, None))
    return {
        "days_per_year": None if dpy is None else dpy.estimate, "dpy_low": low, "dpy_high": high,
        "significant": s.annual_significant, "p_value": s.annual_p_value, "method": s.annual_method,
        "length_of_day_h": None if lod is None else lod.estimate, "lod_low": lod_low, "lod_high": lod_high,
    }


def sheet_block(result: dict) -> dict:
    """Age, horizon and locality recorded in a result's ``specimen`` block or its ``sheet``
    (keys absent when unknown)."""
    return dict(ResultSummary.from_json(result).sheet)
