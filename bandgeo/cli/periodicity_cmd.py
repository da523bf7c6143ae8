"""``bandgeo periodicity SERIES.csv``: test a band-thickness series for daily and annual cycles."""
from __future__ import annotations

import json
from pathlib import Path

import click

from ._common import echo, existing_path, out_dir_option, seed_option


def _fmt(block, unit: str, digits: int = 1) -> str:
    if not block or block.get("estimate") is None:
        return "not estimated"
    text = f"{block['estimate']:.{digits}f} {unit}"
    if block.get("ci95"):
        lo, hi = block["ci95"]
        text += f" (95% interval {lo:.{digits}f}-{hi:.{digits}f} {unit})"
    return text


def summary_lines(result: dict, rotation: dict | None) -> list[str]:
    """Human-readable lines: verdicts, estimates with units, intervals and methods, warnings."""
    d, y, t, h = result["daily_test"], result["days_per_year"], result["tidal"], result["hiatus"]
    lo, hi = y["searched_band_bands_per_cycle"]
    lines = [f"Daily test: {d['verdict']} (spacing CV {d['spacing_cv']:.3f}"
             + (f", peak sharpness {d['peak_sharpness']:.2f}, p = {d['p_value']:.3f})" if d.get("p_value") else ")"),
             f"Annual cycle searched from {lo:g} to {hi:g} bands per cycle."]
    if y["significant"]:
        lines.append(f"Annual cycle: significant (p = {y['p_value']:.3g}); bands per year "
                     f"{_fmt(y, 'bands')} [minimum: missing days are not counted]")
        lines.append(f"  method: {y['method']}")
        for name, m in y["methods"].items():
            lines.append(f"  {name.replace('_', ' ')}: {_fmt(m, 'bands')}"
                         + (f", p = {m['p_value']:.3g}" if m.get("p_value") is not None else ""))
        if y.get("consistency"):
            c = y["consistency"]
            lines.append(f"  agreement: chi-square {c['chi2']:.2f} on {c['dof']} dof, p = {c['p_value']:.3g}")
        if rotation:
            lines.append(f"Length of day: {_fmt(rotation['length_of_day_hours'], 'h', 2)}; sidereal day "
                         f"{_fmt(rotation['sidereal_day_hours'], 'h', 2)}")
    else:
        lines.append(f"Annual cycle: not significant (p = {y['p_value']:.3g}); days per year not estimated.")
    month = t.get("days_per_synodic_month")
    if month:
        lines.append(f"Tidal: {_fmt(month, 'bands per synodic month', 2)}, p = {month['p_value']:.3g}")
    else:
        lines.append("Tidal: no significant fortnightly or monthly cycle.")
    lines.append(f"Hiatus evidence: {h['evidence']}; counts are minima.")
    lines += [f"warning: {w}" for w in result["warnings"]]
    return lines


@click.command("periodicity")
@click.argument("series_csv", callback=existing_path)
@out_dir_option(required=False)
@click.option("--min-period", type=float, default=None,
              help="Shortest period searched, bands per cycle  [default: 4]")
@click.option("--max-period", type=float, default=None,
              help="Longest period searched, bands per cycle  [default: a third of the record]")
@click.option("--n-sim", type=int, default=1000, show_default=True,
              help="Monte Carlo replicates for significance and intervals.")
@seed_option()
@click.option("--json", "as_json", is_flag=True, help="Print the result blocks as JSON instead of text.")
@click.pass_context
def periodicity(ctx, series_csv: Path, out, min_period, max_period, n_sim, seed, as_json):
    """Test a band-thickness series (CSV) for regular increments, an annual and tidal cycles.

    The CSV has a thickness column (thickness_mm, thickness_um or thickness) and optionally
    inclination_deg and azimuth_deg. With --out, result.json and spectra.csv are written there.
    """
    from ..series import read_series_csv

    series = read_series_csv(series_csv)          # bad input fails here, before the heavy imports
    from .. import astro, progress
    from ..atomic import write_json
    from ..spectral import test_periodicity

    with progress.bar("periodicity") as cb:
        res = test_periodicity(series, min_period_bands=min_period, max_period_bands=max_period,
                               n_sim=n_sim, seed=seed, progress=cb)
    blocks = res.to_dict()
    y = blocks["days_per_year"]
    rotation = astro.rotation_from_days_per_year(y["estimate"], y["ci95"]) if y["significant"] else None
    if rotation:
        blocks["length_of_day_hours"] = rotation["length_of_day_hours"]
        blocks["sidereal_day_hours"] = rotation["sidereal_day_hours"]
    else:
        blocks["length_of_day_hours"] = None
    blocks["series"] = {"path": str(series_csv), "bands": len(series),
                        "mean_thickness_mm": float(series.thickness_mm.mean())}
    if out is not None:
        out.mkdir(parents=True, exist_ok=True)
        write_json(out / "result.json", blocks)
        res.write_spectra_csv(out / "spectra.csv")
    if as_json:
        click.echo(json.dumps(blocks, indent=2))
        return
    for line in summary_lines(blocks, rotation):
        echo(ctx, line)
    if out is not None:
        echo(ctx, f"wrote {out / 'result.json'} and {out / 'spectra.csv'}")
