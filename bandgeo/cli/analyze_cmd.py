"""``bandgeo analyze SCAN --out DIR``: the whole job on one scan, with a report."""
from __future__ import annotations

from pathlib import Path

import click

from ._common import analysis_options, echo, out_dir_option, seed_option
from ._scan_options import prepare_kwargs, scan_options


def _fmt_interval(block, unit, digits=1):
    if not block or block.get("estimate") is None:
        return "none"
    lo, hi = block.get("ci95") or (None, None)
    text = f"{block['estimate']:.{digits}f} {unit}"
    if lo is not None:
        text += f" (95% interval {lo:.{digits}f} to {hi:.{digits}f} {unit})"
    return text


def summary_lines(result: dict, folder: Path, report: bool = True) -> list[str]:
    """The lines ``analyze`` and ``report`` print: what was found, with units and intervals."""
    bands = result.get("bands", {})
    dpy = result.get("days_per_year") or {}
    daily = result.get("daily_test") or {}
    lines = [f"specimen {result['specimen']['id']}: {bands.get('count', 0)} bands, mean thickness "
             f"{(bands.get('mean_thickness_mm') or float('nan')):.3f} mm"]
    if daily:
        lines.append(f"daily test: {daily.get('verdict', 'n/a')}")
    if dpy.get("significant"):
        lines.append(f"days per year: {_fmt_interval(dpy, 'days/yr')} by {dpy.get('method', '?')}; "
                     f"p = {dpy.get('p_value', float('nan')):.3g}; a minimum (days go missing)")
        lines.append(f"length of day: {_fmt_interval(result.get('length_of_day_hours'), 'h', 2)}")
    else:
        p = dpy.get("p_value")
        lines.append("days per year: no annual cycle above red noise"
                     + (f" (p = {p:.3g})" if p is not None else "") + "; no estimate given")
    for warning in result.get("warnings", []):
        lines.append(f"warning: {warning}")
    tidal = ((result.get("tidal") or {}).get("days_per_synodic_month") or {})
    if tidal.get("significant"):
        lines.append(f"days per synodic month: {_fmt_interval(tidal, 'days', 2)}")
        distance = ((result.get("earth_moon_distance") or {}).get("angular_momentum") or {})
        if distance.get("distance_km"):
            lines.append("Earth-Moon distance (angular momentum): "
                         f"{_fmt_interval(distance['distance_km'], 'km', 0)}")
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
    with progress.bar("analysing") as cb:
        state = pipeline.analyze(scan, out, seed=seed, keep_review=not discard_review,
                                 report=not no_report, min_period_bands=min_period,
                                 max_period_bands=max_period, n_sim=n_sim, progress=cb, **kwargs)
    for line in summary_lines(state.result, out, report=not no_report):
        echo(ctx, line)
