"""Build the report of one analysed specimen: figures once from the in-memory state, one HTML page,
the PDF typeset from that same page (WeasyPrint, print CSS), and the CSV and PLY exports."""
from __future__ import annotations

import datetime as _dt
import json
import time
from pathlib import Path
from typing import Any, Iterable, Mapping

import numpy as np

from .. import __version__
from ..atomic import write_text
from ..errors import InputError, ParameterError
from ..progress import report as _progress
from . import cautions, content
from .references import reference_points
from .spectra import normalise_evolutive, normalise_spectra

FORMATS = ("html", "pdf", "csv", "ply")
#: Seconds the report waits for the plots drawn in a helper process before drawing them itself.
PLOT_TIMEOUT_S = 120.0
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


def _period(result: Mapping) -> float | None:
    if not content.dpy_significant(result):
        return None
    est = float(result["days_per_year"]["estimate"])
    return est if est > 0 else None


def _seed(result: Mapping) -> int:
    return int((result.get("provenance") or {}).get("seed") or 0)


def tilt_summary(state: Any):
    """The heliotropic tilt summary of the state (None without band directions)."""
    from .tilt import tilt_from_state

    try:
        return tilt_from_state(state, period_bands=_period(state.result), seed=_seed(state.result))
    except (ValueError, np.linalg.LinAlgError):
        return None


def figure_specs(state: Any, tilt=None) -> tuple[list[dict], list[str]]:
    """The figures to draw, in order, as ``{id, title, caption, build, raster}``, and a sentence for each
    figure left out because it would have nothing to show."""
    from . import comparison, figures

    result = state.result
    spec = getattr(state, "specimen", None)
    seg = getattr(state, "segmentation", None)
    series = getattr(state, "series", None)
    per = getattr(state, "periodicity", None)
    dpy = result.get("days_per_year") or {}
    searched = dpy.get("searched_band_bands_per_cycle")
    searched = [float(x) for x in searched] if isinstance(searched, (list, tuple)) and len(searched) == 2 \
        and None not in searched else None
    period = _period(result)
    specs: list[dict] = []
    omitted: list[str] = []
    sway_az = None if tilt is None else tilt.sway_azimuth_deg

    if spec is not None and seg is not None and getattr(seg, "vertex_band", None) is not None \
            and getattr(seg, "axis", None) is not None:
        def views():
            from .specimen_view import specimen_figure
            view = (sway_az + 90.0) if sway_az is not None else 0.0
            return specimen_figure(spec.vertices_mm, spec.faces, seg.vertex_band, seg.axis, list(seg.boundaries),
                                   view_azimuth_deg=view, sway_azimuth_deg=sway_az,
                                   north_known=bool(getattr(spec, "north_known", True)), seed=_seed(result))
        specs.append({"id": "specimen", "title": "The specimen and its bands", "raster": True, "tight": False, "build": views,
                      "caption": "The column straightened along its axis and seen across its sway plane. Top: "
                                 "the whole column in strips, coloured by band number with alternate bands darker (grey: outside any band). "
                                 "Middle: a close view of forty bands with their numbers, each band in one of seven "
                                 "colours that repeat so that neighbours differ. "
                                 "Bottom: the same stretch unrolled, azimuth measured from the sway plane against "
                                 "height; the ticks outside both edges mark the boundaries."})
    else:
        omitted.append("The specimen figure is left out: the folder holds no oriented mesh or segmentation.")
    if series is not None:
        specs.append({"id": "series", "title": "Thickness and tilt, band by band", "raster": False,
                      "build": lambda: figures.series_figure(series, period, getattr(series, "sway_azimuth_deg", None) or sway_az),
                      "caption": ("Band thickness (mm) and the growth direction's tilt (degrees) against band number. "
                                  "The signed series carry a sinusoid at the yearly period found, with a linear trend. "
                                  "The inclination is the tilt's size, never negative, so it cycles twice a year when "
                                  "the column swings through upright: it carries a running mean, not a yearly sinusoid."
                                  if period else
                                  "Band thickness (mm) and the growth direction's tilt (degrees) against band number. "
                                  "No yearly cycle was found, so no sinusoid is drawn.")})
    spectra = normalise_spectra(getattr(per, "spectra", None)) if per is not None else {}
    if spectra:
        specs.append({"id": "spectra", "title": "Spectra against red noise", "raster": False,
                      "build": lambda: figures.periodogram_figure(spectra, searched, None if period is None else 1 / period),
                      "caption": "The whole spectrum of each series, not only its highest peak. The shaded span is "
                                 "the range of periods searched for a yearly cycle; the dotted curve is what a red-noise "
                                 "(first-order autoregressive) series of the same character would give on average, and "
                                 "the dashed curves the levels it exceeds 5 % and 1 % of the time anywhere in the "
                                 "searched span. Power is per unit frequency (cycles per band)."})
    else:
        omitted.append("The spectra are left out: the result holds no saved spectra.")
    evol = [e for e in normalise_evolutive(getattr(per, "spectra", None)) if len(e["centre"]) >= 3] \
        if per is not None else []
    if evol:
        specs.append({"id": "sliding", "title": "Spectrum in sliding windows", "raster": False,
                      "build": lambda: figures.evolutive_figure(evol, searched),
                      "caption": "Power over the red-noise background in windows that slide up the record: a true "
                                 "yearly cycle shows as a band of high power through every window."})
    elif per is not None:
        raw = normalise_evolutive(getattr(per, "spectra", None))
        n = len(raw[0]["centre"]) if raw else 0
        omitted.append(f"The spectrum in sliding windows is left out: each window must hold several yearly "
                       f"cycles, and this record gives {n} window{'s' if n != 1 else ''} of that length, too few "
                       f"to show whether the cycle persists.")
    counts = _counts(result) if period is not None else []
    cc = (dpy.get("methods") or {}).get("cycle_count") or {}
    if len(counts) >= 2:
        specs.append({"id": "counts", "title": "Bands counted cycle by cycle", "raster": False,
                      "build": lambda: figures.counts_figure(counts, cc.get("estimate") if isinstance(cc, Mapping) else None),
                      "caption": "Bands counted in each successive yearly cycle of the thickness series. Each count "
                                 "is a minimum."})
    elif period is not None and counts:
        omitted.append(f"The cycle-by-cycle counts are left out: the record holds {len(counts)} whole yearly "
                       f"cycle, too few to plot one count against another (the count is in the routes table).")
    elif period is not None and isinstance(cc, Mapping) and cc.get("refused"):
        omitted.append(f"The cycle-by-cycle counts are left out: {str(cc['refused']).rstrip('.')}.")
    elif period is not None:
        omitted.append("The cycle-by-cycle counts are left out: counting cycle by cycle gave no estimate for "
                       "this record.")
    else:
        omitted.append("The cycle-by-cycle counts are left out: no yearly cycle was found to count.")
    if tilt is not None:
        specs.append({"id": "tilt", "title": "The growth direction seen from above", "raster": False,
                      "build": lambda: figures.plan_view_figure(tilt.east_deg, tilt.north_deg, tilt.sway_azimuth_deg,
                                                                tilt.mean_lean_deg, tilt.north_known, tilt.period_bands),
                      "caption": "Left: each band's tilt from upright as seen from above (degrees), coloured from "
                                 "the lowest band (dark blue) to the top (yellow); the dashed line is the sway plane, the "
                                 "arrow the mean lean. Right: the tilt in the sway plane and across it, band by band."})
    else:
        omitted.append("The plan view of the growth direction is left out: the bands' directions were not measured.")
    if period is not None:
        sp = result.get("specimen") or {}
        refs = reference_points()
        unit_ok = content.daily_supported(result)
        est = _estimates(result, unit_ok)
        specs.append({"id": "published", "title": "Days per year beside published values", "raster": False,
                      "build": lambda: comparison.days_per_year_figure(est, refs, sp.get("age_ma"), sp.get("age_err_ma"), True),
                      "caption": "This specimen's estimates (filled, 95 % intervals) and published values (open, "
                                 "numbered as in the reference list) against age."})
    else:
        omitted.append("The comparison with published days per year is left out: this specimen gives no estimate.")
    for i, f in enumerate(specs, start=1):
        f["number"] = i
    return specs, omitted


def _counts(result: Mapping) -> list[float]:
    block = ((result.get("days_per_year") or {}).get("methods") or {}).get("cycle_count") or {}
    value = block.get("per_cycle_counts") if isinstance(block, Mapping) else None
    return [float(v) for v in value if v is not None] if isinstance(value, (list, tuple)) else []


def _estimates(result: Mapping, daily_ok: bool) -> list:
    dpy = result["days_per_year"]
    out = []
    tag = "" if daily_ok else " (bands per cycle; not shown to be daily)"
    for label, block in [("this specimen, combined", dpy)] + [
            (f"this specimen, {short}", (dpy.get("methods") or {}).get(key)) for key, short, _ in content.ROUTES]:
        if isinstance(block, Mapping) and block.get("estimate") is not None:
            ci = block.get("ci95") or [None, None]
            out.append((label + tag, float(block["estimate"]), ci[0], ci[1]))
    return out


def _figure_specs(state: Any) -> list[tuple]:
    """Older layout ``(id, title, caption, builder, raster)`` of :func:`figure_specs` (kept for callers)."""
    specs, _ = figure_specs(state, tilt_summary(state))
    return [(f["id"], f["title"], f["caption"], f["build"], f["raster"]) for f in specs]


def report_context(state: Any, figures: list[dict], omitted: list[str] | None = None, tilt=None,
                   report_seconds: float | None = None) -> dict:
    """Everything the template shows, already worded and formatted (see :mod:`bandgeo.report.content`)."""
    result = state.result
    sp = result.get("specimen") or {}
    prov = result.get("provenance") or {}
    versions = [(k, str(v)) for k, v in (prov.get("versions") or {}).items()]
    try:
        from importlib import metadata
        versions.append(("weasyprint (typesetting)", metadata.version("weasyprint")))
    except Exception:  # noqa: BLE001 - the version line is informative only
        pass
    age = sp.get("age_ma")
    return {
        "specimen_id": str(sp.get("id") or getattr(getattr(state, "specimen", None), "specimen_id", "") or "unnamed"),
        "formation": sp.get("formation"), "locality": sp.get("locality"), "horizon": sp.get("horizon"),
        "age": None if age is None else f"{content.fmt_sig(age, 4)} Ma" + (
            f" ± {content.fmt_sig(sp['age_err_ma'], 2)} Ma" if sp.get("age_err_ma") is not None else ""),
        "scan_name": Path(str((sp.get("scan") or {}).get("path") or "")).name,
        "warnings": cautions.warnings_list(result, state),
        "headline": content.headline(result),
        "results": content.results_table(result, tilt),
        "tilt": None if tilt is None else {"rows": content.tilt_rows(tilt), "n_bands": tilt.n_bands,
                                           "source": tilt.source, "notes": tilt.notes, "n_boot": tilt.n_boot,
                                           "figure": next((f["number"] for f in figures if f["id"] == "tilt"), None)},
        "blocks": content.detail_sections(result),
        "figures": figures,
        "omitted": omitted or [],
        "cautions": cautions.cautions(result, tilt),
        "specimen_rows": content.specimen_rows(result),
        "review_rows": _review_rows(result.get("review") or {}),
        "provenance": {"sha256": prov.get("input_sha256") or (sp.get("scan") or {}).get("sha256") or "—",
                       "seed": prov.get("seed"), "created": prov.get("created") or "—",
                       "platform": prov.get("platform") or "—", "versions": versions,
                       "parameters": content.parameter_rows(result),
                       "stages": content.stage_rows(result, report_seconds)},
        "references": reference_points(),
        "schema": result.get("schema", "—"),
        "bandgeo_version": result.get("bandgeo_version", __version__),
        "report_version": __version__,
        "built": _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
    }


def _review_rows(review: Mapping) -> list[tuple[str, str]]:
    if not review or not review.get("edited"):
        return []
    rows = [("edits", str(review.get("n_edits", 0)))]
    if review.get("saved"):
        rows.append(("saved", str(review["saved"])))
    if review.get("notes"):
        rows.append(("notes", str(review["notes"])))
    if review.get("marked_stretches"):
        rows.append(("stretches marked", str(len(review["marked_stretches"]))))
    return rows


def build_report(state: Any, folder=None, formats: Iterable[str] = FORMATS, progress=None):
    """Write the requested outputs; return ``(paths, seconds)``.

    ``seconds`` splits the time: ``figures`` (drawing and encoding them), ``html`` (the page), ``pdf``
    (typesetting, wherever it ran), ``pdf_wait`` (what this process waited for the PDF after its own
    work), ``csv``, ``ply`` and ``total``. With a PDF, a helper process (:mod:`bandgeo.report.typeset`)
    loads WeasyPrint while the figures are drawn and typesets the page while the CSV and PLY files are
    written; ``pdf_parallel`` is 1.0 when it did, 0.0 when this process typeset the page itself.
    """
    folder, formats = _check(state, folder, formats)
    paths: dict[str, Path] = {}
    seconds: dict[str, float] = {}
    docs = "html" in formats or "pdf" in formats
    steps = (2 if "csv" in formats else 0) + ("ply" in formats) + (docs * 4) + ("pdf" in formats)
    done = 0

    def tick(what):
        nonlocal done
        done += 1
        _progress(progress, what, done, steps)

    t_start, c_start = time.perf_counter(), time.process_time()
    typesetter = None
    if "pdf" in formats:
        from .typeset import Typesetter, take_started

        typesetter = take_started() or Typesetter.start()
    try:
        pending = None
        if docs:
            pending = _documents(state, formats, seconds, tick, t_start, typesetter, c_start)
        _exports(state, folder, formats, paths, seconds, tick)
        if pending is not None:
            _finish_documents(state, folder, formats, paths, seconds, tick, t_start, typesetter, pending)
    finally:
        if typesetter is not None:
            typesetter.close()
    seconds["total"], seconds["cpu"] = time.perf_counter() - t_start, time.process_time() - c_start
    return paths, seconds


def _exports(state, folder, formats, paths, seconds, tick):
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


def _pdf_title(ctx) -> str:
    return f"Specimen {ctx['specimen_id']}: growth-band periodicity report"


def _documents(state, formats, seconds, tick, t_start, typesetter, c_start=0.0):
    """Figures, context and page; the page goes to the PDF helper when there is one."""
    import matplotlib

    from .html import figure_data_uri, render_html

    t0, c0 = time.perf_counter(), time.process_time()
    tilt = tilt_summary(state)
    specs, omitted = figure_specs(state, tilt)
    tick("report: content")

    def encode(f) -> str:
        with matplotlib.rc_context({"font.size": 8}):
            fig = f["build"]()
            src = figure_data_uri(fig, raster=f["raster"], dpi=110 if f["raster"] else 150,
                                  tight=f.get("tight", True))
            fig.clear()                               # figures hold their artists until collected
        return src

    # The vector plots are drawn in a forked helper while this process draws the specimen figure (both
    # are mostly single-threaded); without the helper, or if it fails, they are drawn here.
    srcs: dict[str, str] = {}
    plots = [f for f in specs if not f["raster"]]
    helper = None
    if 2 <= len(plots) < len(specs):
        from .typeset import Forked

        def draw_plots() -> bytes:
            c = time.process_time()
            out = {f["id"]: encode(f) for f in plots}
            return json.dumps({"srcs": out, "cpu": time.process_time() - c}).encode("ascii")

        helper = Forked.start(draw_plots)
    try:
        for f in specs:
            if helper is None or f["raster"]:
                srcs[f["id"]] = encode(f)
        if helper is not None:
            answer = helper.result(timeout=PLOT_TIMEOUT_S)
            if answer is not None:
                got = json.loads(answer.decode("ascii"))
                srcs.update(got["srcs"])
                seconds["figures_helper_cpu"] = float(got["cpu"])
            seconds["figures_parallel"] = float(answer is not None)
    finally:
        if helper is not None:
            helper.close()
    for f in specs:                                   # anything the helper did not give
        if f["id"] not in srcs:
            srcs[f["id"]] = encode(f)
    figs = [{"id": f["id"], "number": f["number"], "title": f["title"], "caption": f["caption"],
             "raster": f["raster"], "src": srcs[f["id"]]} for f in specs]
    seconds["figures"], seconds["figures_cpu"] = time.perf_counter() - t0, time.process_time() - c0
    tick("report: figures")
    t0 = time.perf_counter()
    ctx = report_context(state, figs, omitted, tilt, report_seconds=time.perf_counter() - t_start)
    page = render_html(ctx)
    seconds["html"] = time.perf_counter() - t0
    sent = False
    if "pdf" in formats and typesetter is not None:
        sent = typesetter.submit(page, title=_pdf_title(ctx))
    seconds["cpu_before_pdf"] = time.process_time() - c_start
    tick("report: page")
    return {"ctx": ctx, "page": page, "sent": sent}


def _finish_documents(state, folder, formats, paths, seconds, tick, t_start, typesetter, pending):
    from .html import render_html

    ctx, page = pending["ctx"], pending["page"]
    if "pdf" in formats:
        from ..atomic import atomic_path
        from .pdf import pdf_bytes

        t0 = time.perf_counter()
        answer = typesetter.result() if pending["sent"] else None
        seconds["pdf_wait"] = time.perf_counter() - t0
        if answer is not None:
            data = answer[0]
            seconds.update(answer[1])
            seconds["pdf_parallel"] = 1.0
        else:                                         # no helper, or it failed: typeset here
            t0, c0 = time.perf_counter(), time.process_time()
            data = pdf_bytes(page, title=_pdf_title(ctx))
            seconds["pdf"], seconds["pdf_cpu"] = time.perf_counter() - t0, time.process_time() - c0
            seconds["pdf_parallel"] = 0.0
        with atomic_path(folder / "report.pdf") as tmp:
            with open(tmp, "wb") as fh:
                fh.write(data)
        paths["report.pdf"] = folder / "report.pdf"
        tick("report: report.pdf")
        # the page written last knows the whole report time, the PDF's typesetting included
        ctx["provenance"]["stages"] = content.stage_rows(state.result, time.perf_counter() - t_start,
                                                         note="figures, page and PDF")
        page = render_html(ctx)
    if "html" in formats:
        t0 = time.perf_counter()
        paths["report.html"] = write_text(folder / "report.html", page)
        seconds["html"] += time.perf_counter() - t0
    tick("report: done")
