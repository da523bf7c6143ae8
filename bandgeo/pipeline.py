"""The whole job in one place: scan -> specimen -> features -> segmentation (+ review) -> bands ->
series -> periodicity -> astronomy -> result folder and report.

Each stage is called through its own module's public function, so a notebook user can run the same
steps one by one. This module only wires them together, times them, records every parameter, and
writes the result folder (see DEVELOPERS.md, "Result folder").
"""
from __future__ import annotations

import dataclasses
import datetime as _dt
import platform
import time
from pathlib import Path
from typing import Any, Callable, Optional

import numpy as np

from . import __version__
from .atomic import write_json
from .constants import DEFAULT_SEED, RESULT_SCHEMA
from .errors import InputError
from .progress import report as _report
from .state import load_specimen, read_result, save_specimen

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

#: Stage names in pipeline order, used for timings and progress.
STAGES = ("load", "orient", "features", "segment", "review", "measure", "series", "periodicity",
          "astronomy", "report")


@dataclasses.dataclass
class AnalysisState:
    """Everything known about one analysed specimen folder.

    Attributes
    ----------
    folder : Path
        The specimen's result folder.
    result : dict
        The content of ``result.json`` (schema ``bandgeo.result/1``, see docs/result-schema.md).
    specimen : bandgeo.scan.Specimen
        The oriented, cleaned mesh (specimen frame, millimetres).
    segmentation : bandgeo.segment.Segmentation
        The segmentation in force: the automatic one with the review edits applied, if any.
    band_table : bandgeo.measure.BandTable
    series : bandgeo.series.BandSeries
    periodicity : bandgeo.spectral.PeriodicityResult
    auto_segmentation : bandgeo.segment.Segmentation
        The automatic segmentation before review edits.
    """

    folder: Path
    result: dict
    specimen: Any
    segmentation: Any
    band_table: Any
    series: Any
    periodicity: Any
    auto_segmentation: Any = None


#: The object ``analyze`` returns (same as the state ``load_state`` gives back).
AnalysisResult = AnalysisState


class _Timer:
    """Times the stages and forwards progress."""

    def __init__(self, progress: Optional[Callable], stages=STAGES):
        self.progress = progress
        self.seconds: dict[str, float] = {}
        self.stages = list(stages)

    def run(self, name: str, fn: Callable, *args, **kwargs):
        index = self.stages.index(name) if name in self.stages else 0
        _report(self.progress, f"{name}", index, len(self.stages))
        start = time.perf_counter()
        value = fn(*args, **kwargs)
        self.seconds[name] = round(self.seconds.get(name, 0.0) + time.perf_counter() - start, 4)
        _report(self.progress, f"{name} done", index + 1, len(self.stages))
        return value


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


def analyze(scan_path, out_dir, *, units=None, up=None, north=None, strike_dip=None, sheet=None,
            scale=None, seed: int = DEFAULT_SEED, keep_review: bool = True, report: bool = True,
            min_period_bands=None, max_period_bands=None, n_sim: int = 1000,
            progress: Optional[Callable] = None) -> AnalysisState:
    """Run the whole job on one scan and write the result folder.

    Parameters
    ----------
    scan_path : path
        The scan (PLY, OBJ, STL, OFF, glTF/GLB). Never modified.
    out_dir : path
        The specimen's result folder; created if missing. A ``review.json`` already there is kept and
        applied unless ``keep_review=False`` (then it is renamed aside, never deleted).
    units, up, north, strike_dip, sheet, scale
        Passed to :func:`bandgeo.scan.prepare` (units of the file, paleo-up and north vectors in the scan
        frame, bedding strike/dip in degrees, a specimen sheet path or object, a scale factor).
    seed : int
        Seed of every stochastic step (clustering subsample, Monte Carlo significance, bootstrap).
    min_period_bands, max_period_bands : float, optional
        Narrow the annual search band (bands per cycle). By default it runs from a few bands per cycle
        up to about a third of the record, and is stated in the result.
    n_sim : int
        Monte Carlo replicates for significance and intervals.

    Returns
    -------
    AnalysisState
    """
    from . import features as _features
    from . import scan as _scan
    from . import segment as _segment

    out_dir = Path(out_dir)
    scan_path = Path(scan_path)
    timer = _Timer(progress)
    if out_dir.exists() and not out_dir.is_dir():
        raise InputError(f"the output {str(out_dir)!r} exists and is not a folder; give a folder for --out")
    if isinstance(sheet, (str, Path)):
        sheet = _scan.read_sheet(sheet)

    scan = timer.run("load", _scan.load_scan, scan_path)
    specimen = timer.run("orient", _scan.prepare, scan, units=units, up=up, north=north,
                         strike_dip=strike_dip, sheet=sheet, scale=scale)
    specimen.warnings.extend(orientation_warnings(specimen))
    feats = timer.run("features", _features.compute_features, specimen)
    segmenter = _segment.BandSegmenter(random_state=seed)
    auto = timer.run("segment", lambda: segmenter.fit(specimen, feats).segmentation_)

    out_dir.mkdir(parents=True, exist_ok=True)
    auto.save(out_dir)
    save_specimen(out_dir, specimen, auto)
    if not keep_review:
        _set_review_aside(out_dir)

    parameters = {
        "scan": str(scan_path), "units": units, "up": None if up is None else [float(v) for v in up],
        "north": None if north is None else [float(v) for v in north],
        "strike_dip": None if strike_dip is None else [float(v) for v in strike_dip],
        "sheet": getattr(sheet, "path", None) if sheet is not None else None,
        "scale": scale, "seed": int(seed), "keep_review": bool(keep_review),
        "min_period_bands": min_period_bands, "max_period_bands": max_period_bands, "n_sim": int(n_sim),
        "features": {"scales_mm": np.asarray(feats.scales_mm).tolist(),
                     "band_spacing_mm": float(feats.band_spacing_mm),
                     "band_spacing_method": feats.band_spacing_method},
        "segmenter": segmenter.get_params() if hasattr(segmenter, "get_params") else {},
    }
    state = _downstream(out_dir, specimen, auto, parameters, timer, report=report)
    return state


#: Angle between the column's own long axis and the paleo-vertical given, above which a warning is
#: raised. Heliotropic leans reported for fossil columns are a few degrees to some tens of degrees
#: (common practice: treat a lean beyond 30 degrees as a probable way-up or bedding mistake).
AXIS_VERTICAL_WARN_DEG = 30.0


def orientation_warnings(specimen) -> list[str]:
    """Warn when a given way-up disagrees with the column's own long axis (a likely input mistake)."""
    summary = getattr(specimen, "summary", None) or {}
    given, estimated = summary.get("paleo_up_scan"), summary.get("estimated_up_scan")
    if specimen.up_source == "estimated" or given is None or estimated is None:
        return []
    if (summary.get("estimated_up_confidence") or 0.0) < 0.8:
        return []
    g, e = np.asarray(given, float), np.asarray(estimated, float)
    angle = float(np.degrees(np.arccos(np.clip(g @ e / (np.linalg.norm(g) * np.linalg.norm(e)), -1, 1))))
    if angle >= 180.0 - AXIS_VERTICAL_WARN_DEG:
        return [f"the way-up given ({specimen.up_source}) points to the end of the column that looks like its "
                f"base ({180 - angle:.0f} deg from the base-to-top axis); check that the way-up is not reversed"]
    if angle <= AXIS_VERTICAL_WARN_DEG:
        return []
    return [f"the column's long axis lies {min(angle, 180 - angle):.0f} deg from the paleo-vertical given "
            f"({specimen.up_source}); tilt and sway are measured against that vertical, so check the way-up "
            "vector and the bedding"]


def _set_review_aside(folder: Path) -> Optional[Path]:
    """Rename an existing review file aside (never delete a user's work)."""
    review = folder / "review.json"
    if not review.exists():
        return None
    stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    target = folder / f"review.set-aside-{stamp}.json"
    review.rename(target)
    return target


def _apply_review(folder: Path, specimen, auto, warnings: list):
    """Apply ``review.json`` (if any) to the automatic segmentation. Returns (segmentation, review info)."""
    from . import review as _review

    review = _review.read_review(folder)
    if review is None:
        return auto, {"edited": False, "n_edits": 0}
    sha = review.get("scan_sha256")
    if sha and sha != specimen.scan_sha256:
        warnings.append("review.json was made on a different scan (SHA-256 differs); its edits were not "
                        "applied. Re-review, or re-run with the original scan.")
        return auto, {"edited": False, "n_edits": 0, "ignored": "scan differs"}
    seg = _review.apply_review(auto, specimen, review)
    edits = review.get("edits", [])
    info = {"edited": bool(edits), "n_edits": len(edits),
            "saved": review.get("saved"), "notes": review.get("notes", ""),
            "marked_stretches": review.get("stretches", [])}
    return seg, info


def _downstream(folder: Path, specimen, auto, parameters: dict, timer: _Timer, report: bool = True,
                stage_seconds: Optional[dict] = None, write: bool = True) -> AnalysisState:
    """Review edits -> measurement -> series -> periodicity -> astronomy -> result.json (+ report)."""
    from . import astro as _astro
    from . import measure as _measure
    from . import series as _series
    from . import spectral as _spectral
    from . import uncertainty as _uncertainty

    warnings: list[str] = []
    seg, review_info = timer.run("review", _apply_review, folder, specimen, auto, warnings)
    table = timer.run("measure", _measure.measure_bands, specimen, seg)
    series = timer.run("series", _series.build_series, table, seg, specimen)
    periodicity = timer.run("periodicity", _spectral.test_periodicity, series,
                            min_period_bands=parameters.get("min_period_bands"),
                            max_period_bands=parameters.get("max_period_bands"),
                            n_sim=parameters.get("n_sim", 1000), seed=parameters.get("seed", DEFAULT_SEED))
    per = periodicity.to_dict()
    counting = _uncertainty.count_uncertainty(seg)
    per["days_per_year"] = _uncertainty.widen_days_per_year(per.get("days_per_year") or {}, counting)
    astronomy = timer.run("astronomy", _astronomy_block, _astro, per)

    seconds = dict(stage_seconds or {})
    seconds.update(timer.seconds)
    result = _result_dict(specimen, seg, table, per, astronomy, review_info, parameters, seconds,
                          warnings)
    state = AnalysisState(folder=folder, result=result, specimen=specimen, segmentation=seg,
                          band_table=table, series=series, periodicity=periodicity, auto_segmentation=auto)
    if write:
        write_json(folder / "result.json", result)
        if report:
            from . import report as _report_mod

            timer.run("report", _report_mod.write_report, state, folder)
            result["provenance"]["stage_seconds"] = dict(timer.seconds)
            write_json(folder / "result.json", result)
        else:
            table.to_csv(folder / "bands.csv")
    return state


def _astronomy_block(astro, per: dict) -> dict:
    """Length of day, sidereal day and (with tidal months) the Earth-Moon distance."""
    dpy = per.get("days_per_year") or {}
    block: dict[str, Any] = {"length_of_day_hours": None, "sidereal_day_hours": None,
                             "earth_moon_distance": None, "synodic_months_per_year": None}
    if not dpy.get("significant") or dpy.get("estimate") is None:
        return block
    rot = astro.rotation_from_days_per_year(dpy["estimate"], dpy.get("ci95"))
    block["length_of_day_hours"] = rot.get("length_of_day_hours")
    block["sidereal_day_hours"] = rot.get("sidereal_day_hours")
    block["rotation"] = rot
    tidal = (per.get("tidal") or {}).get("days_per_synodic_month")
    if tidal and tidal.get("significant") and tidal.get("estimate"):
        months = astro.months_per_year(dpy["estimate"], tidal["estimate"],
                                       days_per_year_ci95=dpy.get("ci95"),
                                       days_per_month_ci95=tidal.get("ci95"))
        block["synodic_months_per_year"] = months
        block["earth_moon_distance"] = astro.earth_moon_distance(
            synodic_months_per_year=months["estimate"], days_per_year=dpy["estimate"],
            months_ci95=months.get("ci95"), days_per_year_ci95=dpy.get("ci95"))
    return block


def _result_dict(specimen, seg, table, per, astronomy, review_info, parameters, seconds, warnings) -> dict:
    sheet = specimen.sheet
    sheet_dict = sheet.to_dict() if hasattr(sheet, "to_dict") else dict(sheet or {})
    thickness = np.asarray(table.thickness_axis_mm, dtype=float)
    finite = thickness[np.isfinite(thickness)]
    all_warnings = list(specimen.warnings) + list(seg.warnings) + list(per.get("warnings", [])) + warnings
    result = {
        "schema": RESULT_SCHEMA,
        "bandgeo_version": __version__,
        "specimen": {
            "id": specimen.specimen_id,
            "scan": {"path": specimen.scan_path, "sha256": specimen.scan_sha256,
                     "units": specimen.units, "mm_per_unit": specimen.mm_per_unit},
            "sheet": sheet_dict,
            "up": {"source": specimen.up_source, "confidence": specimen.up_confidence,
                   "vector_scan": _up_in_scan(specimen)},
            "north_known": specimen.north_known,
            "cleaning": specimen.cleaning,
            "transforms": specimen.transforms,
            "scan_to_specimen": np.asarray(specimen.scan_to_specimen).tolist(),
            "n_vertices": int(len(specimen.vertices_mm)), "n_faces": int(len(specimen.faces)),
            "age_ma": sheet_dict.get("age_ma"), "age_err_ma": sheet_dict.get("age_err_ma"),
            "locality": sheet_dict.get("locality"), "horizon": sheet_dict.get("horizon"),
            "formation": sheet_dict.get("formation"),
        },
        "bands": {
            "count": int(len(thickness)),
            "boundaries": int(len(seg.boundaries)),
            "mean_thickness_mm": float(finite.mean()) if finite.size else None,
            "median_thickness_mm": float(np.median(finite)) if finite.size else None,
            "mean_thickness_mm_ci95": _mean_ci95(finite),
            "mean_thickness_method": "mean of band thickness along the axis; t-interval",
            "resolution": seg.resolution,
        },
        "daily_test": per.get("daily_test"),
        "days_per_year": per.get("days_per_year"),
        "tidal": per.get("tidal"),
        "hiatus": per.get("hiatus"),
        "length_of_day_hours": astronomy.get("length_of_day_hours"),
        "sidereal_day_hours": astronomy.get("sidereal_day_hours"),
        "synodic_months_per_year": astronomy.get("synodic_months_per_year"),
        "earth_moon_distance": astronomy.get("earth_moon_distance"),
        "review": review_info,
        "warnings": all_warnings,
        "assumptions": ASSUMPTIONS,
        "provenance": {
            "input_sha256": specimen.scan_sha256,
            "versions": library_versions(),
            "parameters": parameters,
            "seed": parameters.get("seed"),
            "stage_seconds": seconds,
            "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
            "platform": platform.platform(),
        },
    }
    return result


def _mean_ci95(values: np.ndarray):
    if values.size < 3:
        return None
    from scipy import stats

    half = stats.t.ppf(0.975, values.size - 1) * values.std(ddof=1) / np.sqrt(values.size)
    return [float(values.mean() - half), float(values.mean() + half)]


def _up_in_scan(specimen) -> list:
    """The paleo-up direction expressed in the scan frame (inverse of the specimen rotation)."""
    m = np.asarray(specimen.scan_to_specimen, dtype=float)
    rot = m[:3, :3]
    up = np.linalg.solve(rot, np.array([0.0, 0.0, 1.0]))
    return (up / np.linalg.norm(up)).tolist()


# ----------------------------------------------------------------------------------------------------
# Reloading a result folder


def load_state(folder, progress: Optional[Callable] = None) -> AnalysisState:
    """Rebuild the state of an analysed folder from its saved files (segmentation, review, mesh cache).

    Measurement and periodicity are recomputed from the saved segmentation with the saved parameters and
    seed, so the result is the same as the one written, with any newer review edits applied. Nothing is
    written.
    """
    return _reload(folder, progress=progress, write=False, report=False)


def rerun(folder, report: bool = True, progress: Optional[Callable] = None) -> AnalysisState:
    """Re-run everything after the segmentation (e.g. after a review save) and rewrite the outputs."""
    return _reload(folder, progress=progress, write=True, report=report)


def _reload(folder, progress, write: bool, report: bool) -> AnalysisState:
    from .segment import Segmentation

    folder = Path(folder)
    if not folder.is_dir():
        raise InputError(f"{str(folder)!r} is not a folder; give the folder written by 'bandgeo analyze'")
    previous = read_result(folder)
    specimen = load_specimen(folder)
    auto = Segmentation.load(folder)
    provenance = previous.get("provenance") or {}
    parameters = dict(provenance.get("parameters") or {})
    stage_seconds = {k: v for k, v in (provenance.get("stage_seconds") or {}).items()
                     if k in ("load", "orient", "features", "segment")}
    timer = _Timer(progress)
    return _downstream(folder, specimen, auto, parameters, timer, report=report,
                       stage_seconds=stage_seconds, write=write)
