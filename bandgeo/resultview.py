"""The typed view of ``result.json`` (schema ``bandgeo.result/1``): what the CLI, the batch, the review
page and the report read out of a result. Part of :mod:`bandgeo.results`, which re-exports it."""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Optional

from .constants import YEAR_SECONDS
from .errors import InputError


def _number(value: Any) -> Optional[float]:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _interval(value: Any) -> Optional[tuple[float, float]]:
    if isinstance(value, (list, tuple)) and len(value) == 2:
        low, high = _number(value[0]), _number(value[1])
        if low is not None and high is not None and low <= high:
            return low, high
    return None


def _block(value: Any) -> dict:
    return value if isinstance(value, dict) else {}


@dataclass(frozen=True)
class Estimate:
    """One figure a user sees: value, 95 % interval, unit and method (``None`` estimate: none given)."""

    estimate: Optional[float]
    ci95: Optional[tuple[float, float]]
    unit: str
    method: Optional[str] = None
    significant: Optional[bool] = None
    p_value: Optional[float] = None

    @classmethod
    def from_json(cls, block: Any, unit: str) -> Optional["Estimate"]:
        if not isinstance(block, dict):
            return None
        method = block.get("method")
        if not isinstance(method, str):
            methods = block.get("methods")
            method = ", ".join(sorted(methods)) if isinstance(methods, dict) and methods else None
        significant = block.get("significant")
        return cls(estimate=_number(block.get("estimate")), ci95=_interval(block.get("ci95")),
                   unit=str(block.get("unit") or unit), method=method,
                   significant=bool(significant) if isinstance(significant, bool) else None,
                   p_value=_number(block.get("p_value")))

    def text(self, digits: int = 1) -> str:
        """``400.0 days/yr (95% interval 390.0 to 410.0 days/yr)``, or ``none``."""
        if self.estimate is None:
            return "none"
        text = f"{self.estimate:.{digits}f} {self.unit}"
        if self.ci95 is not None:
            text += f" (95% interval {self.ci95[0]:.{digits}f} to {self.ci95[1]:.{digits}f} {self.unit})"
        return text


@dataclass(frozen=True)
class ResultSummary:
    """The figures of a ``result.json`` that the CLI, the batch and the review page show.

    A days-per-year block that is not significant gives ``days_per_year = None`` (whatever the file
    holds): "no annual cycle" is never turned into an estimate, nor anything derived from one.
    """

    specimen_id: str
    scan_sha256: Optional[str]
    band_count: int
    mean_thickness_mm: Optional[float]
    median_thickness_mm: Optional[float]
    daily_verdict: Optional[str]
    annual_significant: bool
    annual_p_value: Optional[float]
    annual_method: Optional[str]
    days_per_year: Optional[Estimate]
    length_of_day_hours: Optional[Estimate]
    days_per_synodic_month: Optional[Estimate]
    earth_moon_distance_km: Optional[Estimate]
    warnings: tuple[str, ...]
    review: dict
    sheet: dict
    raw: dict = field(repr=False, compare=False, default_factory=dict)

    @classmethod
    def from_json(cls, result: Any) -> "ResultSummary":
        if not isinstance(result, dict):
            raise InputError("result.json does not hold a JSON object; re-run 'bandgeo analyze'")
        specimen, bands = _block(result.get("specimen")), _block(result.get("bands"))
        dpy_block = _block(result.get("days_per_year"))
        significant = bool(dpy_block.get("significant", False))
        dpy = Estimate.from_json(dpy_block, "days/yr") if significant else None
        if dpy is not None and dpy.estimate is None:
            dpy = None
        lod = Estimate.from_json(result.get("length_of_day_hours"), "h") if dpy is not None else None
        if dpy is not None and (lod is None or lod.estimate is None):
            lod = _lod_from_dpy(dpy)
        tidal = Estimate.from_json(_block(result.get("tidal")).get("days_per_synodic_month"), "days")
        if tidal is not None and not tidal.significant:
            tidal = None
        distance = _block(_block(result.get("earth_moon_distance")).get("angular_momentum"))
        scan = _block(specimen.get("scan"))
        sha = _block(result.get("provenance")).get("input_sha256") or scan.get("sha256")
        count = bands.get("count")
        return cls(
            specimen_id=str(specimen.get("id") or "specimen"),
            scan_sha256=sha if isinstance(sha, str) else None,
            band_count=int(count) if isinstance(count, int) and not isinstance(count, bool) else 0,
            mean_thickness_mm=_number(bands.get("mean_thickness_mm")),
            median_thickness_mm=_number(bands.get("median_thickness_mm")),
            daily_verdict=(_block(result.get("daily_test")).get("verdict") or None),
            annual_significant=significant and dpy is not None,
            annual_p_value=_number(dpy_block.get("p_value")),
            annual_method=Estimate.from_json(dpy_block, "days/yr").method if dpy_block else None,
            days_per_year=dpy, length_of_day_hours=lod, days_per_synodic_month=tidal,
            earth_moon_distance_km=Estimate.from_json(distance.get("distance_km"), "km"),
            warnings=tuple(str(w) for w in result.get("warnings") or [] if w is not None),
            review=_block(result.get("review")), sheet=_sheet_fields(specimen), raw=result)


def _lod_from_dpy(dpy: Estimate) -> Estimate:
    """LOD = Y / N with Y the tropical year (docs/astronomy.md); the interval maps through the same
    monotone function."""
    hours = YEAR_SECONDS / 3600.0
    ci = None
    if dpy.ci95 is not None and dpy.ci95[0] > 0:
        ci = (hours / dpy.ci95[1], hours / dpy.ci95[0])
    return Estimate(hours / dpy.estimate, ci, "h", "LOD = Y / N from days per year", True, dpy.p_value)


def _sheet_fields(specimen: dict) -> dict:
    """Age, horizon and locality recorded in a result's ``specimen`` block or its ``sheet``."""
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


