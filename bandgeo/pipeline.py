"""The whole job in one place: scan -> specimen -> features -> segmentation -> (review edits) -> bands
-> series -> periodicity -> astronomy -> result folder and report.

One path::

    inputs   = upstream(scan, params)                          # load, orient, features, segment
             | ResultFolder(DIR).load_inputs()                 # or read back once from a folder
    analysis = downstream(specimen, segmentation, review, params)   # in memory, no file read
    save(analysis, DIR)                                        # written on the side, swapped in

``analyze``, ``rerun``, ``load_state``, ``bandgeo report``, the batch and the review page
(:class:`Rerunner`) are thin callers of these three. Each stage is called through its own module's
public function, so a notebook user can run the same steps one by one.
"""
from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Callable, Optional

import numpy as np

from .constants import DEFAULT_SEED
from .document import ASSUMPTIONS, library_versions, result_document  # noqa: F401
from .errors import InputError
from .progress import report as _report
from .results import DERIVED_FILES, REVIEW_FILE, RUN_FILE, ResultFolder, ReviewInfo, RunParams, save_specimen
from .atomic import write_json

if TYPE_CHECKING:  # pragma: no cover - types only
    from .measure import BandTable
    from .scan import Specimen
    from .segment import Segmentation
    from .series import BandSeries
    from .spectral.result import PeriodicityResult

#: Stage names in pipeline order, used for timings and progress.
STAGES = ("load", "orient", "features", "segment", "review", "measure", "series", "periodicity",
          "astronomy", "report")
UPSTREAM = STAGES[:4]
ALL_FORMATS = ("html", "pdf", "csv", "ply")


@dataclass
class Analysis:
    """Everything known about one analysed specimen, in memory.

    ``segmentation`` is the one in force (automatic + review edits); ``result`` is the
    ``result.json`` document (docs/result-schema.md) built from the typed parts.
    """

    specimen: "Specimen"
    segmentation: "Segmentation"
    auto_segmentation: "Segmentation"
    band_table: "BandTable"
    series: "BandSeries"
    periodicity: "PeriodicityResult"
    astronomy: dict
    review: ReviewInfo
    params: RunParams
    result: dict
    stage_seconds: dict[str, float] = field(default_factory=dict)
    folder: Optional[Path] = None
    #: What was found and done about an earlier run cut short in the folder (one line each).
    recovered: list[str] = field(default_factory=list)


#: Older names of :class:`Analysis` (same object).
AnalysisState = Analysis
AnalysisResult = Analysis


class _Timer:
    """Times the stages and forwards progress.

    ``progress(description, done, total)`` hears, in stage units: ``("features", 2, 10)`` when a stage
    starts, ``("features: curvature: scales", 2.5, 10)`` from the stage's own reports, and
    ``("features done", 3, 10)`` at its end. A stage function that has a ``progress`` parameter and is
    not given one gets a callback that forwards its reports so. A display that understands stages
    (``bandgeo.progress.bar``) is also told each stage's start, inner fraction and end, with the mesh's
    face count once known (``bandgeo.progress.stage_event``), for its estimate of the time left.
    """

    def __init__(self, progress: Optional[Callable], stages=STAGES):
        self.progress = progress
        self.seconds: dict[str, float] = {}
        self.stages = list(stages)
        self.faces: Optional[int] = None

    def run(self, name: str, fn: Callable, *args, **kwargs):
        from . import progress as _progress

        index = self.stages.index(name) if name in self.stages else 0
        total = len(self.stages)
        self.faces = _progress.face_count(args, self.faces)
        _progress.stage_event(self.progress, "start", name, faces=self.faces)
        _report(self.progress, f"{name}", index, total)
        if self.progress is not None and "progress" not in kwargs and _progress.takes_progress(fn):
            kwargs["progress"] = _progress.inner_callback(self.progress, name, index, total)
        start = time.perf_counter()
        value = fn(*args, **kwargs)
        spent = time.perf_counter() - start
        self.seconds[name] = round(self.seconds.get(name, 0.0) + spent, 4)
        self.faces = _progress.face_count((value,), self.faces)
        _progress.stage_event(self.progress, "end", name, faces=self.faces, seconds=spent)
        _report(self.progress, f"{name} done", index + 1, total)
        return value


# ----------------------------------------------------------------------------------------------------
# Upstream: scan -> specimen -> features -> automatic segmentation


#: Angle between the column's own long axis and the paleo-vertical given, above which a warning is
#: raised. Heliotropic leans reported for fossil columns are a few degrees to some tens of degrees
#: (common practice: treat a lean beyond 30 degrees as a probable way-up or bedding mistake).
AXIS_VERTICAL_WARN_DEG = 30.0


def orientation_warnings(specimen) -> list[str]:
    """Warn when a given way-up disagrees with the column's own long axis (a likely input mistake)."""
    summary = specimen.summary or {}
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


def _import_later_stages() -> None:
    """Import the modules of the stages after the features (segmentation: scipy.signal, scikit-learn;
    periodicity: astropy; report: matplotlib, jinja2), about 2.5 s of a fresh process's CPU."""
    from . import segment, spectral  # noqa: F401

    import astropy.timeseries  # noqa: F401  (spectral's Lomb-Scargle, imported where it is used)

    from .report import build, comparison, exports, figures, html, specimen_view, tilt  # noqa: F401


#: The import thread of :class:`_Prefetch` while it runs (one per process).
_PREFETCH: dict = {}


class _Prefetch:
    """Imports the later stages' modules in a background thread while this one loads, orients and
    computes the features (mostly numpy work that leaves the other core idle), so that a fresh process
    (``bandgeo analyze``, a batch worker) does not wait for them at the segmentation, periodicity and
    report stages. The same modules, only earlier: nothing else changes. ``BANDGEO_PREFETCH=0`` turns it
    off; it is not used on one core. :meth:`join` waits for it (before anything forks or imports)."""

    def __init__(self):
        import os
        import sys
        import threading

        self.thread = None
        running = _PREFETCH.get("thread")
        if running is not None and running.is_alive():  # an earlier run's, cut short by a failure
            self.thread = running
            return
        if os.environ.get("BANDGEO_PREFETCH", "1").strip().lower() in ("0", "no", "false", "off"):
            return
        if all(m in sys.modules for m in ("bandgeo.segment", "astropy.timeseries", "bandgeo.report.build")):
            return
        try:
            cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
        except OSError:
            cores = 1
        if cores < 2:
            return
        self.thread = threading.Thread(target=self._run, name="bandgeo-imports", daemon=True)
        self.thread.start()
        _PREFETCH["thread"] = self.thread

    @staticmethod
    def _run() -> None:
        try:
            _import_later_stages()
        except Exception:  # noqa: BLE001 - the stages import what they need again, and report any failure
            pass

    def join(self) -> None:
        if self.thread is not None:
            self.thread.join()
            self.thread = None


def upstream(scan_path, params: RunParams, *, sheet=None, timer: Optional[_Timer] = None):
    """Load, orient, compute features and segment. Returns ``(specimen, segmentation, params)`` with the
    automatic stages' own choices recorded in ``params.features`` / ``params.segmenter``."""
    from . import features as _features
    from . import scan as _scan

    timer = timer or _Timer(None)
    if sheet is None and params.sheet is not None:
        sheet = _scan.read_sheet(params.sheet)
    scan = timer.run("load", _scan.load_scan, Path(scan_path))
    prefetch = _Prefetch()  # once the scan has been read: a file refused costs no imports
    specimen = timer.run("orient", _scan.prepare, scan, units=params.units, up=params.up, north=params.north,
                         strike_dip=params.strike_dip, sheet=sheet, scale=params.scale)
    del scan  # the raw arrays (1.5 GB at 40 M faces) are not needed past this point
    specimen.warnings.extend(orientation_warnings(specimen))
    feats = timer.run("features", _features.compute_features, specimen)
    prefetch.join()  # (a failure above leaves the daemon thread to finish on its own)
    from . import segment as _segment

    segmenter = _segment.BandSegmenter(random_state=params.seed)
    auto = timer.run("segment", lambda progress=None: segmenter.fit(specimen, feats, progress=progress).segmentation_)
    params = params.with_stages(
        {"scales_mm": np.asarray(feats.scales_mm).tolist(), "band_spacing_mm": float(feats.band_spacing_mm),
         "band_spacing_method": feats.band_spacing_method,
         "processing": (feats.info.get("processing") or {}).get("note")}, segmenter.get_params())
    return specimen, auto, params


# ----------------------------------------------------------------------------------------------------
# Downstream: review edits -> measurement -> series -> periodicity -> astronomy (in memory)


def review_stage(specimen, auto, review: Optional[dict], warnings: list):
    """Apply a review (a dict as ``bandgeo.review.store.read_review`` gives) to the automatic
    segmentation. A review made on another scan, in other units or frame, or on another segmentation
    (``bandgeo.review.basis.check_review``) is not applied: a warning says why.
    Returns ``(segmentation, ReviewInfo)``."""
    from .review.apply import apply_review
    from .review.basis import check_review

    if review is None:
        return auto, ReviewInfo()
    reasons = check_review(review, specimen, auto)
    if reasons:
        warnings.append(f"review.json does not fit this analysis ({'; '.join(reasons)}); its edits were not "
                        f"applied. Set it aside and review again, or re-run with the scan and units it was "
                        f"made on.")
        return auto, ReviewInfo(ignored="; ".join(reasons))
    seg = apply_review(auto, specimen, review)
    edits = review.get("edits") or []
    return seg, ReviewInfo(edited=bool(edits), n_edits=len(edits), saved=review.get("saved"),
                           notes=str(review.get("notes") or ""), marked_stretches=list(review.get("stretches") or []))


def _periodicity(series, params: RunParams, segmentation, table, progress: Optional[Callable] = None):
    """The periodicity figures (``bandgeo.spectral.periodicity_figures``, the same function the
    ``periodicity`` command calls): tests, days per year widened by the band-count uncertainty, and the
    astronomy block (length of day, tidal months, Earth-Moon distance). ``progress`` hears the tests'
    own reports (daily test, the Monte Carlo searches, the intervals, the tidal test) as one fraction."""
    from . import spectral as _spectral
    from . import uncertainty as _uncertainty
    from .progress import in_phases

    figures = _spectral.periodicity_figures(
        series, count_uncertainty=_uncertainty.count_uncertainty(segmentation),
        min_period_bands=params.min_period_bands, max_period_bands=params.max_period_bands, n_sim=params.n_sim,
        seed=params.seed, band_flags=list(table.flags), progress=in_phases(progress, 5, final="periodicity"))
    return figures["periodicity"], figures["blocks"], figures["astronomy"]


def downstream(specimen: "Specimen", segmentation: "Segmentation", review: Optional[dict], params: RunParams,
               *, progress: Optional[Callable] = None, stage_seconds: Optional[dict] = None,
               timer: Optional[_Timer] = None) -> Analysis:
    """Review edits -> measurement -> series -> periodicity -> astronomy, all in memory.

    Parameters
    ----------
    specimen, segmentation
        The oriented specimen and its automatic segmentation (neither is modified).
    review : dict or None
        The review (``read_review`` form); None: no edits.
    params : RunParams
        Seed, Monte Carlo size and searched band of the periodicity tests.
    stage_seconds : dict, optional
        Timings of the upstream stages, kept in the result's provenance.
    """
    from . import measure as _measure
    from . import series as _series

    timer = timer or _Timer(progress)
    warnings: list[str] = []
    seg, info = timer.run("review", review_stage, specimen, segmentation, review, warnings)
    table = timer.run("measure", _measure.measure_bands, specimen, seg)
    series = timer.run("series", _series.build_series, table, seg, specimen)
    periodicity, per, astronomy = timer.run("periodicity", _periodicity, series, params, seg, table)
    seconds = {**(stage_seconds or {}), **timer.seconds}
    result = result_document(specimen, seg, table, per, astronomy, info, params, seconds, warnings)
    return Analysis(specimen=specimen, segmentation=seg, auto_segmentation=segmentation, band_table=table,
                    series=series, periodicity=periodicity, astronomy=astronomy, review=info, params=params,
                    result=result, stage_seconds=seconds)


# ----------------------------------------------------------------------------------------------------
# Saving: outputs written on the side and swapped in at the end


def _write_outputs(analysis: Analysis, staged: Path, formats, progress, result: bool = True) -> None:
    """Write the report (``formats``) and result.json (once, last; ``result=False``: not at all) into
    ``staged``."""
    if formats:
        from . import report as _report_mod

        timer = _Timer(progress)
        analysis.folder = staged
        try:
            timer.run("report", _report_mod.write_report, analysis, staged, formats=tuple(formats))
        finally:
            analysis.folder = None
        analysis.stage_seconds["report"] = timer.seconds["report"]
        analysis.result["provenance"]["stage_seconds"] = dict(analysis.stage_seconds)
    else:
        analysis.band_table.to_csv(staged / "bands.csv")
    if result:
        write_json(staged / "result.json", analysis.result)


class _Background:
    """``fn(*args)`` in a thread; :meth:`join` waits and raises what it raised. The inputs of later re-runs
    (mostly ``specimen.npz``: 86 MB at 2 M faces, written and synced with the GIL released) are written so
    while the report is drawn."""

    def __init__(self, fn, *args):
        import threading

        self.error: Optional[BaseException] = None

        def run():
            try:
                fn(*args)
            except BaseException as exc:  # noqa: BLE001 - handed to the caller by join()
                self.error = exc

        self.thread = threading.Thread(target=run, name="bandgeo-save-inputs", daemon=True)
        self.thread.start()

    def join(self) -> None:
        self.thread.join()
        if self.error is not None:
            raise self.error


def save(analysis: Analysis, folder, *, formats=ALL_FORMATS, inputs: bool = False, set_aside_review: bool = False,
         progress: Optional[Callable] = None) -> Path:
    """Write an analysis into ``folder``: result.json (once), the report in ``formats`` (none: bands.csv
    only) and, with ``inputs=True``, the inputs of later re-runs (run.json, specimen.npz, the automatic
    segmentation). Everything is written into a hidden staging folder first and swapped in at the end: a
    failure leaves ``folder`` as it was, and derived outputs this run did not write (an older report)
    are removed so that they never sit beside a newer result.json."""
    folder = ResultFolder(folder)
    formats = tuple(formats or ())

    def write_inputs(staged: Path) -> None:
        write_json(staged / RUN_FILE, analysis.params.document())
        analysis.auto_segmentation.save(staged)
        save_specimen(staged, analysis.specimen, analysis.auto_segmentation)

    def write(staged: Path) -> None:
        saver = _Background(write_inputs, staged) if inputs and formats else None
        try:
            if inputs and saver is None:
                write_inputs(staged)
            _write_outputs(analysis, staged, formats, progress)
        finally:
            if saver is not None:
                saver.join()  # raises what the inputs' writing raised

    with folder.staging() as staged:
        write(staged)
        folder.swap_in(staged, remove=DERIVED_FILES, set_aside=(REVIEW_FILE,) if set_aside_review else ())
    analysis.folder = folder.path
    return folder.path


# ----------------------------------------------------------------------------------------------------
# Thin callers


def analyze(scan_path, out_dir, *, units=None, up=None, north=None, strike_dip=None, sheet=None,
            scale=None, seed: int = DEFAULT_SEED, keep_review: bool = True, report: bool = True,
            min_period_bands=None, max_period_bands=None, n_sim: int = 1000,
            progress: Optional[Callable] = None) -> Analysis:
    """Run the whole job on one scan and write the result folder.

    Parameters
    ----------
    scan_path : path
        The scan (PLY, OBJ, STL, OFF, glTF/GLB). Never modified.
    out_dir : path
        The specimen's result folder; created if missing. A ``review.json`` already there is kept and
        applied unless ``keep_review=False`` (then it is renamed aside, never deleted). Outputs are
        written on the side and swapped in at the end: a failed run leaves the folder as it was.
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
    """
    from . import scan as _scan

    folder = ResultFolder(out_dir)
    if folder.path.exists() and not folder.path.is_dir():
        raise InputError(f"the output {str(folder.path)!r} exists and is not a folder; give a folder for --out")
    sheet_obj = _scan.read_sheet(sheet) if isinstance(sheet, (str, Path)) else sheet
    params = RunParams.make(scan=scan_path, units=units, up=up, north=north, strike_dip=strike_dip, sheet=sheet,
                            scale=scale, seed=seed, keep_review=keep_review, min_period_bands=min_period_bands,
                            max_period_bands=max_period_bands, n_sim=n_sim)
    timer = _Timer(progress)
    specimen, auto, params = upstream(scan_path, params, sheet=sheet_obj, timer=timer)
    review = folder.load_review() if keep_review and folder.path.is_dir() else None
    typeset = None
    if report and "pdf" in ALL_FORMATS:
        from .report import typeset

        typeset.prestart()  # WeasyPrint loads in its helper process while the next stages run
    try:
        analysis = downstream(specimen, auto, review, params, timer=timer)
        analysis.recovered = folder.recover()  # only now: a run that fails on its input writes nothing
        save(analysis, folder.path, formats=ALL_FORMATS if report else (), inputs=True,
             set_aside_review=not keep_review, progress=progress)
    finally:
        if typeset is not None:
            typeset.discard_started()
    from .segment.model import clear_projections

    clear_projections()  # made by the segmentation, re-used by the measurement; a batch moves on
    return analysis


def load_state(folder, progress: Optional[Callable] = None) -> Analysis:
    """Rebuild the analysis of a folder from its saved inputs (specimen cache, segmentation, review,
    run parameters). Measurement and periodicity are recomputed with the saved parameters and seed, so
    the result is the one written, with any newer review edits applied. Nothing is written."""
    inputs = ResultFolder(folder).load_inputs()
    analysis = downstream(inputs.specimen, inputs.segmentation, inputs.review, inputs.params,
                          progress=progress, stage_seconds=inputs.stage_seconds)
    analysis.folder = Path(folder)
    return analysis


def rerun(folder, report: bool = True, progress: Optional[Callable] = None) -> Analysis:
    """Re-run everything after the segmentation (e.g. after a review save) and rewrite the outputs."""
    return Rerunner(folder)(report=report, progress=progress)


class Rerunner:
    """Re-runs the stages a review edit changes (measurement, series, periodicity, report) from inputs
    held in memory: the specimen, the automatic segmentation and the run parameters are read from the
    folder once, when this object is made (or handed over by a caller that holds them already).

    ``rerunner(folder=None, review=None, report=True)``: with ``review`` given (the review the page
    holds), nothing is read from disk; without it, ``review.json`` is read.
    """

    def __init__(self, folder, *, specimen: "Optional[Specimen]" = None,
                 segmentation: "Optional[Segmentation]" = None, params: Optional[RunParams] = None):
        self.folder = ResultFolder(folder).require()
        if specimen is None or segmentation is None or params is None:
            inputs = self.folder.load_inputs(review=False)
            specimen = specimen if specimen is not None else inputs.specimen
            segmentation = segmentation if segmentation is not None else inputs.segmentation
            params = params if params is not None else inputs.params
            self.stage_seconds = inputs.stage_seconds
        else:
            self.stage_seconds = {}
        self.specimen, self.segmentation, self.params = specimen, segmentation, params

    def warm(self, review: Optional[dict] = None, progress: Optional[Callable] = None) -> None:
        """Prepare what every save re-uses, ahead of the first (the review page calls this from a
        background thread): the vertices' projection on the centreline and their bands for the automatic
        boundaries and for ``review`` (default: the folder's review.json), the unrolled coordinates
        of the relief profile, and the stages' first imports. Nothing is written. ``progress`` hears
        each of the four steps."""
        from .segment.model import assign_bands, vertex_projection
        from .unroll import height_order, unroll

        vertices, axis = self.specimen.vertices_mm, self.segmentation.axis
        _report(progress, "bands of the vertices", 0, 4)
        assign_bands(vertices, self.segmentation.boundaries, axis)
        _report(progress, "projection on the centreline", 1, 4)
        vertex_projection(vertices, axis).keep_sorted()
        _report(progress, "unrolled mesh", 2, 4)
        if len(vertices) <= 2_000_000:  # the relief profile's own (not subsampled) vertices
            height_order(unroll(vertices, axis))
        if review is None:
            review = self.folder.load_review()
        _report(progress, "one analysis", 3, 4)
        downstream(self.specimen, self.segmentation, review, self.params)
        _report(progress, "ready", 4, 4)

    def __call__(self, folder=None, review: Optional[dict] = None, report: bool = True,
                 progress: Optional[Callable] = None, formats=ALL_FORMATS) -> Analysis:
        if folder is not None and Path(folder).resolve() != self.folder.path.resolve():
            raise InputError(f"this re-runner holds the inputs of {self.folder.path}, not {folder}")
        if review is None:
            review = self.folder.load_review()
        analysis = downstream(self.specimen, self.segmentation, review, self.params, progress=progress,
                              stage_seconds=self.stage_seconds)
        save(analysis, self.folder.path, formats=formats if report else (), progress=progress)
        return analysis


def write_analysis_report(analysis: Analysis, folder, formats=ALL_FORMATS, progress=None,
                          rewrite_result: bool = True) -> dict:
    """``bandgeo report``: rewrite result.json and the report ``formats`` from an analysis held in
    memory (other derived outputs already in the folder are kept). Returns {name: path}.

    ``rewrite_result=False`` leaves result.json alone: for a caller that has just saved the same
    analysis without its report (the review page shows the figures first, then the report follows)."""
    rf = ResultFolder(folder)
    with rf.staging() as staged:
        _write_outputs(analysis, staged, tuple(formats), progress, result=rewrite_result)
        names = sorted(p.name for p in staged.iterdir())
        rf.swap_in(staged, remove=("report.stale.html", "report.stale.pdf"))
    analysis.folder = rf.path
    return {name: rf.file(name) for name in names}
