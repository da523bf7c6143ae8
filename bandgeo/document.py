"""``result.json`` built from an analysis held in memory (schema ``bandgeo.result/1``,
docs/result-schema.md)."""
from __future__ import annotations

import datetime as _dt
import platform
from typing import TYPE_CHECKING, Optional

import numpy as np

from . import __version__
from .constants import RESULT_SCHEMA

if TYPE_CHECKING:  # pragma: no cover - types only
    from .measure import BandTable
    from .results import ReviewInfo, RunParams
    from .scan import Specimen
    from .segment import Segmentation

#: Assumptions every days-per-year figure rests on; the report prints them beside the numbers.
ASSUMPTIONS = [
    "Each band is taken to be one day's lamina; the daily test below says whether the spacing supports "
    "that (modern subtidal stromatolites can add about one lamina a day: Gebelein 1969).",
    "Band counts are minima: stromatolite records are rarely complete and missing days are not counted "
    "(Pannella 1972).",
    "The sway-based estimate assumes heliotropism, i.e. that the column leaned toward the seasonal sun; "
    "not every author accepts that fossil columns record it (Williams, Jenkins & Walter 2007).",
    "Length of day assumes a constant length of year, 365.24219 days of 86400 s (tidal friction barely "
    "changes Earth's orbit).",
]


def library_versions() -> dict[str, str]:
    """Versions of bandgeo and the libraries whose results it depends on."""
    from importlib import metadata

    names = ["numpy", "scipy", "scikit-learn", "open3d", "trimesh", "astropy", "matplotlib"]
    versions = {"bandgeo": __version__, "python": platform.python_version()}
    for name in names:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:  # pragma: no cover - all are dependencies
            versions[name] = "not installed"
    return versions


def astronomy_block(per: dict) -> dict:
    """The astronomy block from the ``days_per_year`` and ``tidal`` blocks
    (``bandgeo.spectral.astronomy_block``, shared with the ``periodicity`` command)."""
    from .spectral import astronomy_block as _block

    return _block(per)


def _mean_ci95(values: np.ndarray):
    if values.size < 3:
        return None
    from scipy import stats

    half = stats.t.ppf(0.975, values.size - 1) * values.std(ddof=1) / np.sqrt(values.size)
    return [float(values.mean() - half), float(values.mean() + half)]


def up_in_scan(specimen: "Specimen") -> list:
    """The paleo-up direction expressed in the scan frame (inverse of the specimen rotation)."""
    rot = np.asarray(specimen.scan_to_specimen, dtype=float)[:3, :3]
    up = np.linalg.solve(rot, np.array([0.0, 0.0, 1.0]))
    return (up / np.linalg.norm(up)).tolist()


def specimen_block(specimen: "Specimen") -> dict:
    sheet = specimen.sheet.to_dict() if specimen.sheet is not None else {}
    return {
        "id": specimen.specimen_id,
        "scan": {"path": specimen.scan_path, "sha256": specimen.scan_sha256,
                 "units": specimen.units, "mm_per_unit": specimen.mm_per_unit},
        "sheet": sheet,
        "up": {"source": specimen.up_source, "confidence": specimen.up_confidence,
               "vector_scan": up_in_scan(specimen)},
        "north_known": specimen.north_known,
        "cleaning": specimen.cleaning,
        "transforms": specimen.transforms,
        "scan_to_specimen": np.asarray(specimen.scan_to_specimen).tolist(),
        "n_vertices": int(len(specimen.vertices_mm)), "n_faces": int(len(specimen.faces)),
        "age_ma": sheet.get("age_ma"), "age_err_ma": sheet.get("age_err_ma"),
        "locality": sheet.get("locality"), "horizon": sheet.get("horizon"),
        "formation": sheet.get("formation"),
    }


def bands_block(table: "BandTable", seg: "Segmentation") -> dict:
    thickness = np.asarray(table.thickness_axis_mm, dtype=float)
    finite = thickness[np.isfinite(thickness)]
    return {
        "count": int(len(thickness)),
        "boundaries": int(len(seg.boundaries)),
        "mean_thickness_mm": float(finite.mean()) if finite.size else None,
        "median_thickness_mm": float(np.median(finite)) if finite.size else None,
        "mean_thickness_mm_ci95": _mean_ci95(finite),
        "mean_thickness_method": "mean of band thickness along the axis; t-interval",
        "resolution": seg.resolution,
    }


def result_document(specimen: "Specimen", seg: "Segmentation", table: "BandTable", per: dict, astronomy: dict,
                    review: "ReviewInfo", params: "RunParams", seconds: dict, warnings: list,
                    created: Optional[str] = None) -> dict:
    """The ``result.json`` document of one analysis (every block documented in docs/result-schema.md)."""
    all_warnings = list(specimen.warnings) + list(seg.warnings) + list(per.get("warnings", [])) + warnings
    parameters = params.to_json()
    document = {
        "schema": RESULT_SCHEMA,
        "bandgeo_version": __version__,
        "specimen": specimen_block(specimen),
        "bands": bands_block(table, seg),
        "daily_test": per.get("daily_test"),
        "days_per_year": per.get("days_per_year"),
        "tidal": per.get("tidal"),
        "hiatus": per.get("hiatus"),
        "length_of_day_hours": astronomy.get("length_of_day_hours"),
        "sidereal_day_hours": astronomy.get("sidereal_day_hours"),
        "synodic_months_per_year": astronomy.get("synodic_months_per_year"),
        "earth_moon_distance": astronomy.get("earth_moon_distance"),
        "review": review.to_json(),
        "warnings": all_warnings,
        "assumptions": ASSUMPTIONS,
        "provenance": {
            "input_sha256": specimen.scan_sha256,
            "versions": library_versions(),
            "parameters": parameters,
            "seed": parameters.get("seed"),
            "stage_seconds": seconds,
            "created": created or _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
            "platform": platform.platform(),
        },
    }
    if astronomy.get("length_of_day_hours_thickness_route") is not None:
        document["length_of_day_hours_thickness_route"] = astronomy["length_of_day_hours_thickness_route"]
    return document
