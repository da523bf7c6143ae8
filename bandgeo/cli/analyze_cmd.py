"""``bandgeo analyze SCAN --out DIR``: the whole job on one scan, with a report."""
from __future__ import annotations

from pathlib import Path

import click

from ._common import analysis_options, echo, out_dir_option, seed_option
from ._scan_options import prepare_kwargs, scan_options


def summary_lines(result, folder: Path, report: bool = True) -> list[str]:
    """The lines ``analyze`` and ``report`` print: what was found, with units, intervals and methods.

    ``result`` is a ``result.json`` dict or a :class:`bandgeo.results.ResultSummary`."""
    from ..results import ResultSummary

    s = result if isinstance(result, ResultSummary) else ResultSummary.from_json(result)
    mean = "n/a" if s.mean_thickness_mm is None else f"{s.mean_thickness_mm:.3f} mm"
    lines = [f"specimen {s.specimen_id}: {s.band_count} bands, mean thickness {mean} (along the axis)"]
    if s.daily_verdict:
        lines.append(f"daily test: {s.daily_verdict}")
    p = "n/a" if s.annual_p_value is None else f"{s.annual_p_value:.3g}"
    if s.days_per_year is not None:
        lines.append(f"days per year: {s.days_per_year.text(1)} by {s.days_per_year.method or '?'}; "
                     f"p = {p}; a minimum (days go missing)")
        lod = s.length_of_day_hours
        lines.append(f"length of day: {lod.text(2)} by {lod.method or 'LOD = Y / N'}")
    else:
        lines.append("days per year: no annual cycle above red noise"
                     + (f" (p = {p})" if s.annual_p_value is not None else "") + "; no estimate given")
    for warning in s.warnings:
        lines.append(f"warning: {warning}")
    if s.days_per_synodic_month is not None:
        lines.append(f"days per synodic month: {s.days_per_synodic_month.text(2)}")
        distance = s.earth_moon_distance_km
        if distance is not None and distance.estimate is not None:
            lines.append(f"Earth-Moon distance: {distance.text(0)} by {distance.method or 'angular momentum'}")
    lines.append(f"wrote {folder}/result.json" + (f" and the report {folder}/report.html" if report else ""))
    return lines


@click.command("analyze")
@click.argument("scan", type=click.Path(path_type=Path))
@out_dir_option()
@scan_options
@seed_option()
@analysis_options
@click.option("--no-report", is_flag=True, help="Write result.json and bands.csv only.")
@click.pass_context
def analyze(ctx, scan, out, seed, min_period, max_period, n_sim, discard_review, no_report, **opts):
    """Analyse SCAN and write result.json, the report and the segmentation into --out.

    Steps: load and clean the scan, orient it, compute curvature features, segment the growth bands
    (keeping any review.json already in --out), measure the bands, test for daily and annual cycles,
    and convert days per year into length of day.
    """
    from .. import pipeline, progress

    kwargs = prepare_kwargs(**opts)
    # The bar's time left comes from the stage cost model (bandgeo.progress.STAGE_COST).
    stages = [s for s in progress.PIPELINE_STAGES if not (no_report and s == "report")]
    with progress.bar("analysing", stages=stages) as cb:
        state = pipeline.analyze(scan, out, seed=seed, keep_review=not discard_review,
                                 report=not no_report, min_period_bands=min_period,
                                 max_period_bands=max_period, n_sim=n_sim, progress=cb, **kwargs)
    for line in state.recovered:  # what was left of an earlier run cut short, and what was done with it
        echo(ctx, f"note: {line}")
    for line in summary_lines(state.result, out, report=not no_report):
        echo(ctx, line)
