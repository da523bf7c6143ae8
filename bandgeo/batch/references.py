"""Published days-per-year and length-of-day points, cited, to plot beside a compilation.

The points come from ``bandgeo.astro.reference_points()`` when that function exists; otherwise from
the small table below, transcribed from the project's verified list (docs and
``/work/shared/reference-values.md`` at the time of writing). Where a source gives only one of the
two quantities, the other is derived with LOD = Y / N (Y = 365.24219 d of 86400 s) and marked
``derived``.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Optional

from ..constants import YEAR_SECONDS

_DAY_H = YEAR_SECONDS / 3600.0  # hours in a year: LOD [h] = _DAY_H / N


@dataclass
class ReferencePoint:
    """One published constraint: age, days per year and length of day, each with its interval."""

    label: str
    citation: str
    age_ma: float
    age_err_ma: Optional[float]
    days_per_year: float
    dpy_ci: Optional[tuple[float, float]]
    length_of_day_h: float
    lod_ci: Optional[tuple[float, float]]
    note: str = ""
    derived: list = field(default_factory=list)


def _from_dpy(label, citation, age, age_err, n, half, note="", interval_note=""):
    ci = None if half is None else (n - half, n + half)
    lod_ci = None if ci is None else (_DAY_H / ci[1], _DAY_H / ci[0])
    return ReferencePoint(label, citation, age, age_err, n, ci, _DAY_H / n, lod_ci,
                          note=" ".join(x for x in (note, interval_note) if x), derived=["length_of_day_h"])


def _builtin() -> list[ReferencePoint]:
    williams2000 = ReferencePoint(
        "~620 Ma tidal rhythmites", "Williams (2000) Rev. Geophys. 38:37-59", 620.0, None,
        400.0, (393.0, 407.0), 21.9, (21.5, 22.3), note="400 ± 7 solar days/yr; LOD 21.9 ± 0.4 h")
    meyers = ReferencePoint(
        "1.4 Ga cyclostratigraphy", "Meyers & Malinverno (2018) PNAS 115:6363-6368", 1400.0, None,
        _DAY_H / 18.68, (_DAY_H / 18.93, _DAY_H / 18.43), 18.68, (18.43, 18.93),
        note="LOD 18.68 ± 0.25 h (2 sigma); days/yr derived as Y / LOD", derived=["days_per_year"])
    return [
        ReferencePoint("present day", "standard almanac values (tropical year 365.24219 d)", 0.0, None,
                       365.24219, None, 24.0, None, note="reference value"),
        _from_dpy("Middle Devonian corals", "Wells (1963) Nature 197:948-950", 390.0, None, 400.0, None,
                  note="~400 growth lines/yr, no interval given; age ~390 Ma for the Middle Devonian "
                       "(from memory)"),
        williams2000,
        _from_dpy("~650 Ma rhythmites", "Williams (1989) J. Geol. Soc. London 146:97-111", 650.0, None,
                  400.0, 20.0, note="400 ± 20 days/yr"),
        _from_dpy("~850 Ma heliotropic stromatolite", "Vanyo & Awramik (1985) Precambrian Res. 29:121-142",
                  850.0, None, 435.0, None,
                  note="435 laminae per annual sway wave, no interval given; method and age disputed by "
                       "Williams, Jenkins & Walter (2007) Palaeogeogr. Palaeoclimatol. Palaeoecol. "
                       "249:80-89"),
        meyers,
    ]


def _coerce(item) -> Optional[ReferencePoint]:
    """Best-effort reading of one entry of ``bandgeo.astro.reference_points()``."""
    get = item.get if isinstance(item, dict) else (lambda k, d=None: getattr(item, k, d))

    def value(*names):
        for name in names:
            v = get(name)
            if isinstance(v, dict):
                v = v.get("estimate", v.get("value"))
            if isinstance(v, (int, float)):
                return float(v)
        return None

    def interval(*names):
        for name in names:
            v = get(name)
            if isinstance(v, dict):
                v = v.get("ci95")
            if isinstance(v, (list, tuple)) and len(v) == 2 and all(isinstance(x, (int, float)) for x in v):
                return (float(v[0]), float(v[1]))
        return None

    age = value("age_ma")
    n = value("days_per_year", "solar_days_per_year")
    lod = value("length_of_day_h", "length_of_day_hours", "lod_h")
    if age is None or (n is None and lod is None):
        return None
    derived = []
    dpy_ci = interval("days_per_year_ci95", "dpy_ci95", "days_per_year")
    lod_ci = interval("length_of_day_ci95", "lod_ci95", "length_of_day_hours", "length_of_day_h")
    dpy_err = value("days_per_year_err")  # a published "±": plotted as value ± err
    lod_err = value("length_of_day_err_hours", "length_of_day_err_h")
    if dpy_ci is None and n is not None and dpy_err:
        dpy_ci = (n - dpy_err, n + dpy_err)
    if lod_ci is None and lod is not None and lod_err:
        lod_ci = (lod - lod_err, lod + lod_err)
    if dpy_ci is None and lod_ci is not None and n is not None and lod is not None:
        derived.append("days_per_year")
        dpy_ci = (_DAY_H / lod_ci[1], _DAY_H / lod_ci[0])
    if lod_ci is None and dpy_ci is not None and n is not None and lod is not None:
        derived.append("length_of_day_h")
        lod_ci = (_DAY_H / dpy_ci[1], _DAY_H / dpy_ci[0])
    if n is None:
        n, derived = _DAY_H / lod, ["days_per_year"]
        dpy_ci = None if lod_ci is None else (_DAY_H / lod_ci[1], _DAY_H / lod_ci[0])
    if lod is None:
        lod, derived = _DAY_H / n, ["length_of_day_h"]
        lod_ci = None if dpy_ci is None else (_DAY_H / dpy_ci[1], _DAY_H / dpy_ci[0])
    citation = get("citation") or get("source") or get("reference") or ""
    label = get("label") or get("name") or get("quantity") or citation
    return ReferencePoint(str(label), str(citation), age, value("age_err_ma"), n, dpy_ci, lod, lod_ci,
                          note=str(get("note") or get("status") or ""), derived=derived)


def reference_points() -> tuple[list[ReferencePoint], str]:
    """The reference points and where they came from (``"bandgeo.astro"`` or ``"built-in table"``)."""
    try:
        from .. import astro
    except ImportError:
        return _builtin(), "built-in table"
    fn = getattr(astro, "reference_points", None)
    if fn is None:
        return _builtin(), "built-in table"
    try:
        points = [p for p in (_coerce(item) for item in fn()) if p is not None]
    except Exception:  # an unexpected shape must not break a compilation
        points = []
    if not points:
        return _builtin(), "built-in table"
    return points, "bandgeo.astro.reference_points()"
