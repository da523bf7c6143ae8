"""Build the report of one analysed specimen: figures once, then HTML, PDF, CSV and PLY outputs."""
from __future__ import annotations

import datetime as _dt
import time
from pathlib import Path
from typing import Any, Iterable, Mapping

import numpy as np

from .. import __version__
from ..atomic import atomic_path, write_text
from ..errors import InputError, ParameterError
from ..progress import report as _progress
from . import model
from .references import reference_points
from .spectra import normalise_evolutive, normalise_spectra

FORMATS = ("html", "pdf", "csv", "ply")
OUTPUT_NAMES = {"html": ["report.html"], "pdf": ["report.pdf"], "csv": ["bands.csv", "spectra.csv"],
                "ply": ["labelled_mesh.ply"]}


def _check(state: Any, folder, formats) -> tuple[Path, tuple[str, ...]]:
    result = getattr(state, "result", None)
    if not isinstance(result, Mapping) or not result:
        raise InputError("the analysis state has no result (result.json); run 'bandgeo analyze' first")
    if isinstance(formats, str):
        formats = (formats,)
    formats = tuple(str(f).lower() for f in formats)
    unknown = [f for f in formats if f not in FORMATS]
    if unknown or not formats:
        raise ParameterError(f"expected formats among {', '.join(FORMATS)} but got {list(formats)!r}")
    folder = Path(folder if folder is not None else getattr(state, "folder", None) or "")
    if not str(folder):
        raise ParameterError("no output folder: give folder= or a state with .folder set")
    if "ply" in formats and (getattr(state, "specimen", None) is None or
                             getattr(state, "segmentation", None) is None):
        raise InputError("the labelled mesh needs the specimen and its segmentation; the folder lacks "
                         "specimen.npz or segmentation files; rerun 'bandgeo analyze'")
    return folder, formats


def _dpy_frequency(result: Mapping) -> float | None:
    if not model.dpy_significant(result):
        return None
    est = float(result["days_per_year"]["estimate"])
    return 1.0 / est if est > 0 else None


def _figure_specs(state: Any) -> list[tuple[str, str, str, Any, bool]]:
    """(id, title, caption, builder, raster) for every figure, in report order."""
    from . import comparison, figures, render3d, unroll

    result = state.result
    spec = getattr(state, "specimen", None)
    seg = getattr(state, "segmentation", None)
    series = getattr(state, "series", None)
    per = getattr(state, "periodicity", None)
    dpy = result.get("days_per_year") or {}
    searched = dpy.get("searched_band_bands_per_cycle")
    searched = [float(x) for x in searched] if isinstance(searched, (list, tuple)) and len(searched) == 2 \
        and None not in searched else None
    f_est = _dpy_frequency(result)
    seed = int((result.get("provenance") or {}).get("seed") or 0)
    specs = []
    if spec is not None and seg is not None and getattr(seg, "vertex_band", None) is not None:
        def views():
            tri, fb = render3d.decimate_for_render(spec.vertices_mm, spec.faces, seg.vertex_band, seed=seed)
            return render3d.render_views(tri, fb, north_known=bool(getattr(spec, "north_known", False)))
        specs.append(("views", "The specimen and its bands",
                      "Orthographic views of the oriented specimen (z = way up), shaded by surface "
                      "orientation. Band colours repeat every seven bands so that neighbours differ.",
                      views, True))

        def unrolled():
            s, az, r = unroll.unroll_vertices(spec.vertices_mm, seg.axis)
            spacing = None
            bt = getattr(state, "band_table", None)
            if bt is not None and getattr(bt, "thickness_axis_mm", None) is not None and len(bt.thickness_axis_mm):
                spacing = 4.0 * float(np.nanmedian(bt.thickness_axis_mm))
            flagged = [tuple(x) for x in (getattr(seg, "resolution", None) or {}).get("flagged") or []]
            return figures.unrolled_figure(s, az, r, list(seg.boundaries), seg.axis, flagged, spacing)
        specs.append(("unrolled", "Unrolled side surface",
                      "Relief of the side surface against azimuth and height along the column axis, "
                      "with each detected boundary drawn where its fitted plane meets the mean cylinder.",
                      unrolled, False))
    if series is not None:
        specs.append(("series", "Thickness and tilt series",
                      "Band thickness and the tilt of the growth direction against band number. The annual "
                      "fit is a least-squares sinusoid plus linear trend at the estimated annual period.",
                      lambda: figures.series_figure(series, None if f_est is None else 1.0 / f_est), False))
    if per is not None:
        spectra = normalise_spectra(getattr(per, "spectra", None))
        specs.append(("periodograms", "Periodograms and red-noise significance",
                      "Whole spectra, not only the winning peak. The shaded region is the band searched for "
                      "an annual cycle; the dashed and dash-dotted curves are the 95 % and 99 % levels of "
                      "the fitted red-noise (AR(1)) background.",
                      lambda: figures.periodogram_figure(spectra, searched, f_est), False))
        evol = normalise_evolutive(getattr(per, "spectra", None))
        if evol:
            specs.append(("evolutive", "Evolutive spectrum",
                          "Spectra in sliding windows: a true annual cycle persists through the record.",
                          lambda: figures.evolutive_figure(evol, searched), False))
    counts = model.cycle_counts(result) if f_est is not None else []
    cc = (dpy.get("methods") or {}).get("cycle_count") or {}
    cc_method = str(cc.get("method") or "") if isinstance(cc, Mapping) else ""
    specs.append(("counts", "Cycle-by-cycle counts",
                  "Bands counted in each successive annual cycle; each count is a minimum."
                  + (f" Method: {cc_method}." if cc_method and counts else ""),
                  lambda: figures.counts_figure(
                      counts, cc.get("estimate") if isinstance(cc, Mapping) else None,
                      "No cycle-by-cycle counts: no significant annual cycle." if f_est is None else
                      "No cycle-by-cycle counts: the cycle-count method needs a significant annual cycle "
                      "in the thickness series, and there was none."),
                  False))
    sp = result.get("specimen") or {}
    refs = reference_points()
    specs.append(("days_per_year", "Days per year beside published values",
                  "Estimates from this specimen with 95 % intervals, and published values numbered as in "
                  "the reference list.",
                  lambda: comparison.days_per_year_figure(_labelled_estimates(result), refs,
                                                          sp.get("age_ma"), sp.get("age_err_ma"),
                                                          model.dpy_significant(result)), False))
    return specs


def _labelled_estimates(result: Mapping) -> list:
    """The figure's estimates, labelled as bands per cycle when the daily test did not back days."""
    est = model.method_estimates(result)
    if model.daily_supported(result):
        return est
    return [(f"{label} (bands per cycle; not shown to be daily)", e, lo, hi) for label, e, lo, hi in est]


def report_context(state: Any, figures: list[dict]) -> dict:
    """Everything the template shows, already formatted (see :mod:`bandgeo.report.model`)."""
    result = state.result
    sp = result.get("specimen") or {}
    prov = result.get("provenance") or {}
    dpy = result.get("days_per_year") or {}
    sig = model.dpy_significant(result)
    headline = None
    if sig:
        unit = model.dpy_unit(result)
        headline = {"value": model.fmt(dpy["estimate"]), "unit": unit,
                    "daily_ok": model.daily_supported(result),
                    "daily_verdict": str((result.get("daily_test") or {}).get("verdict") or "not tested"),
                    "ci95": model.fmt_ci(dpy.get("ci95"), unit), "method": dpy.get("method") or "—",
                    "p_value": model.fmt(dpy.get("p_value")), "is_minimum": dpy.get("is_minimum", True)}
        lod = result.get("length_of_day_hours") or {}
        if lod.get("estimate") is not None:
            headline["lod"] = f"{model.fmt(lod['estimate'])} h"
            headline["lod_ci95"] = model.fmt_ci(lod.get("ci95"), "h")
    searched = dpy.get("searched_band_bands_per_cycle")
    blocks = []
    resolution = {k: v for k, v in ((result.get("bands") or {}).get("resolution") or {}).items()
                  if k != "flagged"}
    if resolution:
        blocks.append({"title": "Can the scan resolve the bands?", "rows": model.flatten(resolution)})
    for key, title in (("daily_test", "Are the bands daily?"), ("tidal", "Tidal cycles"),
                       ("hiatus", "Hiatus evidence")):
        if result.get(key):
            blocks.append({"title": title, "rows": model.flatten(result[key])})
    if sig:
        if dpy.get("consistency"):
            blocks.append({"title": "Agreement between methods", "rows": model.flatten(dpy["consistency"])})
        if result.get("synodic_months_per_year"):
            blocks.append({"title": "Synodic months per year",
                           "rows": model.flatten(result["synodic_months_per_year"])})
        if result.get("earth_moon_distance"):
            blocks.append({"title": "Earth–Moon distance", "rows": model.flatten(result["earth_moon_distance"])})
    age = sp.get("age_ma")
    return {
        "specimen_id": str(sp.get("id") or getattr(getattr(state, "specimen", None), "specimen_id", "") or "unnamed"),
        "formation": sp.get("formation"), "locality": sp.get("locality"), "horizon": sp.get("horizon"),
        "age": None if age is None else f"{model.fmt(age)} Ma" + (
            f" ± {model.fmt(sp['age_err_ma'])} Ma" if sp.get("age_err_ma") is not None else ""),
        "scan_name": Path(str((sp.get("scan") or {}).get("path") or "")).name,
        "warnings": model.collect_warnings(state),
        "significant": sig, "headline": headline,
        "p_value": model.fmt(dpy.get("p_value")),
        "searched": model.fmt_ci(searched, "bands per cycle") if searched else "not recorded",
        "key_results": model.key_results(result),
        "blocks": blocks,
        "figures": figures,
        "cautions": model.CAUTIONS,
        "assumptions": [str(a) for a in result.get("assumptions") or []],
        "specimen_rows": model.flatten({k: v for k, v in sp.items() if k != "transforms"}),
        "review": result.get("review") or {},
        "review_rows": model.flatten(result.get("review") or {}),
        "provenance": {"sha256": prov.get("input_sha256") or (sp.get("scan") or {}).get("sha256") or "—",
                       "seed": prov.get("seed"), "created": prov.get("created") or "—",
                       "versions": model.flatten(prov.get("versions") or {}),
                       "parameters": model.flatten(prov.get("parameters") or {}),
                       "stages": [(k, f"{model.fmt(v)} s") for k, v in (prov.get("stage_seconds") or {}).items()]},
        "references": reference_points(),
        "schema": result.get("schema", "—"),
        "bandgeo_version": result.get("bandgeo_version", __version__),
        "report_version": __version__,
        "built": _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
    }


def _pdf_sections(ctx: dict) -> tuple[list, list]:
    first = [("Warnings", ctx["warnings"] or ["No warnings were raised."])]
    if ctx["significant"]:
        h = ctx["headline"]
        head = [f"{h['value']} {h['unit']} (95 % interval {h['ci95']}; method: {h['method']}; "
                f"p = {h['p_value']}). A minimum: days may be missing from the record."]
        if not h["daily_ok"]:
            head.append(f"The daily test did not support one band per day ({h['daily_verdict']}), so bands "
                        f"per annual cycle need not be days per year.")
        if h.get("lod"):
            head.append(f"Length of day {h['lod']} (95 % interval {h['lod_ci95']}).")
    else:
        head = [f"No significant annual cycle was found (p = {ctx['p_value']}, searched band "
                f"{ctx['searched']}). No days-per-year estimate is given."]
    first.append(("Days per year", head))
    first.append(("Key results", [(r["name"], f"{r['value']}   95 %: {r['ci95']}   method: {r['method']}")
                                  for r in ctx["key_results"]]))
    for b in ctx["blocks"]:
        first.append((b["title"], b["rows"]))
    last = [("Cautions", [f"{t}. {body}" for t, body in ctx["cautions"]] + ctx["assumptions"]),
            ("Specimen", ctx["specimen_rows"]),
            ("Review", ctx["review_rows"] or ["The segmentation has not been reviewed."]),
            ("Provenance", [("input SHA-256", ctx["provenance"]["sha256"]), ("seed", str(ctx["provenance"]["seed"])),
                            ("created", ctx["provenance"]["created"])] + ctx["provenance"]["versions"]
             + [(f"stage {k}", v) for k, v in ctx["provenance"]["stages"]] + ctx["provenance"]["parameters"]),
            ("References", [f"[{i + 1}] {r['label'] + ': ' if r['label'] else ''}{model.fmt(r['days_per_year'])} {model.DPY_UNIT} at "
                            f"{model.fmt(r['age_ma'])} Ma. {r['citation']}. {r['note']}"
                            for i, r in enumerate(ctx["references"])])]
    return first, last


def build_report(state: Any, folder=None, formats: Iterable[str] = FORMATS, progress=None):
    """Write the requested outputs; return ``(paths, seconds)`` keyed by output name."""
    folder, formats = _check(state, folder, formats)
    paths: dict[str, Path] = {}
    seconds: dict[str, float] = {}
    steps = (2 if "csv" in formats else 0) + ("ply" in formats) + (("html" in formats or "pdf" in formats) * 3)
    done = 0

    def tick(what):
        nonlocal done
        done += 1
        _progress(progress, what, done, steps)

    if "csv" in formats:
        t0 = time.perf_counter()
        from .exports import write_bands_csv, write_spectra_csv
        if getattr(state, "band_table", None) is not None:
            paths["bands.csv"] = write_bands_csv(state.band_table, folder / "bands.csv")
        tick("report: bands.csv")
        if getattr(state, "periodicity", None) is not None:
            paths["spectra.csv"] = write_spectra_csv(state.periodicity, folder / "spectra.csv")
        tick("report: spectra.csv")
        seconds["csv"] = time.perf_counter() - t0
    if "ply" in formats:
        t0 = time.perf_counter()
        from .exports import write_labelled_ply
        paths["labelled_mesh.ply"] = write_labelled_ply(state.specimen, state.segmentation,
                                                       folder / "labelled_mesh.ply")
        seconds["ply"] = time.perf_counter() - t0
        tick("report: labelled_mesh.ply")
    if "html" in formats or "pdf" in formats:
        _text_reports(state, folder, formats, paths, seconds, tick)
    return paths, seconds


def _text_reports(state, folder, formats, paths, seconds, tick):
    import contextlib

    import matplotlib
    from matplotlib.backends.backend_pdf import PdfPages

    from .html import figure_data_uri, render_html
    from .pdf import text_pages

    specs = _figure_specs(state)
    html_figs: list[dict] = []
    t_out = {"html": 0.0, "pdf": 0.0, "figures": 0.0}
    ctx = report_context(state, html_figs)
    first, last = _pdf_sections(ctx)
    title = f"Growth-band periodicity report: specimen {ctx['specimen_id']}"
    with contextlib.ExitStack() as stack:
        stack.enter_context(matplotlib.rc_context({"font.size": 9, "pdf.fonttype": 3,
                                                   "svg.fonttype": "path"}))
        pdf = None
        if "pdf" in formats:
            tmp_pdf = stack.enter_context(atomic_path(folder / "report.pdf"))
            pdf = PdfPages(tmp_pdf, metadata={"Title": title, "Creator": f"bandgeo {__version__}"})
            stack.callback(pdf.close)          # closed before the rename (callbacks run last-in first)
            t0 = time.perf_counter()
            for page in text_pages(first, title=title):
                pdf.savefig(page)
            t_out["pdf"] += time.perf_counter() - t0
        tick("report: summary")
        for fid, ftitle, caption, builder, raster in specs:
            t0 = time.perf_counter()
            fig = builder()
            t_out["figures"] += time.perf_counter() - t0
            if "html" in formats:
                t0 = time.perf_counter()
                html_figs.append({"id": fid, "title": ftitle, "caption": caption,
                                  "src": figure_data_uri(fig, raster=raster)})
                t_out["html"] += time.perf_counter() - t0
            if pdf is not None:
                t0 = time.perf_counter()
                fig.suptitle(ftitle, fontsize=11, weight="bold")
                pdf.savefig(fig, dpi=150, **({"bbox_inches": "tight", "pad_inches": 0.2} if raster else {}))
                t_out["pdf"] += time.perf_counter() - t0
        tick("report: figures")
        if pdf is not None:
            t0 = time.perf_counter()
            for page in text_pages(last):
                pdf.savefig(page)
            t_out["pdf"] += time.perf_counter() - t0
    if pdf is not None:
        paths["report.pdf"] = folder / "report.pdf"
    seconds["figures"] = t_out["figures"]
    if pdf is not None:
        seconds["pdf"] = t_out["pdf"]
    if "html" in formats:
        t0 = time.perf_counter()
        paths["report.html"] = write_text(folder / "report.html", render_html(ctx))
        seconds["html"] = t_out["html"] + time.perf_counter() - t0
    tick("report: done")
