"""Published days-per-year reference points shown beside a specimen's estimate, with citations.

``bandgeo.astro.reference_points()`` is used when the astronomy module provides it; otherwise the
table below, transcribed from /work/shared/reference-values.md (sources checked there), is used.
"""
from __future__ import annotations

from typing import Any

from ..constants import YEAR_SECONDS

_LOD_MM2018_H, _LOD_MM2018_ERR_H = 18.68, 0.25     # Meyers & Malinverno (2018) PNAS 115:6363, 2 sigma
_N_MM2018 = YEAR_SECONDS / 3600.0 / _LOD_MM2018_H   # N = Y / LOD (formula in reference-values.md)

#: Fallback table: age (Ma), its uncertainty, solar days per year, uncertainty (None if not given).
FALLBACK = [
    {"label": "present day", "age_ma": 0.0, "age_err_ma": None, "days_per_year": 365.24219,
     "err": None, "citation": "standard almanac value (tropical year / mean solar day)", "note": ""},
    {"label": "Middle Devonian corals", "age_ma": 388.0, "age_err_ma": 5.0, "days_per_year": 400.0,
     "err": None, "citation": "Wells (1963) Nature 197:948-950",
     "note": "about 400 growth lines per year; age span of the Middle Devonian from memory"},
    {"label": "Middle Devonian corals, months x days", "age_ma": 388.0, "age_err_ma": 5.0,
     "days_per_year": 13.0 * 30.5, "err": None, "citation": "Scrutton (1965) Palaeontology 7:552-558",
     "note": "13 months of 30.5 days"},
    {"label": "tidal rhythmites, ~620 Ma", "age_ma": 620.0, "age_err_ma": None, "days_per_year": 400.0,
     "err": 7.0, "citation": "Williams (2000) Rev. Geophys. 38:37-59", "note": ""},
    {"label": "tidal rhythmites, ~650 Ma", "age_ma": 650.0, "age_err_ma": None, "days_per_year": 400.0,
     "err": 20.0, "citation": "Williams (1989) J. Geol. Soc. London 146:97-111", "note": ""},
    {"label": "heliotropic stromatolite, ~850 Ma", "age_ma": 850.0, "age_err_ma": None,
     "days_per_year": 435.0, "err": None, "citation": "Vanyo & Awramik (1985) Precambrian Res. 29:121-142",
     "note": "no uncertainty given; method and age disputed by Williams, Jenkins & Walter (2007) "
             "Palaeogeogr. Palaeoclimatol. Palaeoecol. 249:80-89"},
    {"label": "cyclostratigraphy, 1.4 Ga", "age_ma": 1400.0, "age_err_ma": None,
     "days_per_year": _N_MM2018, "err": _N_MM2018 * _LOD_MM2018_ERR_H / _LOD_MM2018_H,
     "citation": "Meyers & Malinverno (2018) PNAS 115:6363-6368",
     "note": "converted here from their length of day 18.68 +/- 0.25 h (2 sigma) by N = year / LOD"},
]


def _as_dict(point: Any) -> dict | None:
    if isinstance(point, dict):
        d = dict(point)
    else:
        d = {k: getattr(point, k) for k in dir(point) if not k.startswith("_")}
    value = d.get("days_per_year")
    if value is None and "day" in str(d.get("quantity", "")) and "year" in str(d.get("quantity", "")):
        value = d.get("value")
    age = d.get("age_ma")
    if value is None or age is None:
        return None
    err = d.get("err", d.get("days_per_year_err", d.get("uncertainty")))
    label = str(d.get("label", d.get("name", "")) or "")
    citation = str(d.get("citation", d.get("source", "")) or "")
    if not label and "; " in citation:                 # "Author (year) Journal; what was measured"
        citation, label = citation.split("; ", 1)
    return {"label": label, "age_ma": float(age),
            "age_err_ma": d.get("age_err_ma"), "days_per_year": float(value),
            "err": None if err is None else float(err),
            "citation": citation, "note": str(d.get("note", "") or "")}


def reference_points() -> list[dict]:
    """Days-per-year reference points: ``[{label, age_ma, age_err_ma, days_per_year, err, citation, note}]``."""
    try:
        from .. import astro  # the astronomy stage, when present
        points = [p for p in (_as_dict(x) for x in astro.reference_points()) if p is not None]
        if points:
            return points
    except (ImportError, AttributeError, TypeError, ValueError):
        pass
    return [dict(p) for p in FALLBACK]
