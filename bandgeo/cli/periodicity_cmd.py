"""``bandgeo periodicity SERIES.csv``: test a band-thickness series for daily and annual cycles.

The figures come from :func:`bandgeo.spectral.periodicity_figures`, the same function the ``analyze``
pipeline calls, so the same bands with the same count uncertainty give the same figures.
"""
from __future__ import annotations

import json
from pathlib import Path

import click

from ._common import echo, existing_path, out_dir_option, seed_option


def _num(v, digits: int) -> str:
    return "n/a" if v is None else f"{float(v):.{digits}f}"


def _fmt(block, unit: str, digits: int = 1) -> str:
    if not block or block.get("estimate") is None:
        return "not estimated" + (f" ({block['refused']})" if block and block.get("refused") else "")
    text = f"{float(block['estimate']):.{digits}f} {unit}"
    if block.get("ci95") and block["ci95"][0] is not None:
        lo, hi = block["ci95"]
        text += f" (95% interval {float(lo):.{digits}f}-{float(hi):.{digits}f} {unit})"
    elif block.get("refused"):
        text += f" (no interval: {block['refused']})"
    return text


def summary_lines(result: dict, rotation: dict | None = None) -> list[str]:
    """Human-readable lines: the blocks ``analyze`` prints (daily test, days per year, length of day,
    tidal cycles, months per year, Earth-Moon distance, hiatus evidence, warnings), each with unit,
    interval and method, plus the routes behind days per year and their weights."""
    d, y, t, h = result["daily_test"], result["days_per_year"], result["tidal"], result["hiatus"]
    astro_b = result.get("astronomy") or {}
    lo, hi = y["searched_band_bands_per_cycle"]
    daily = f"Daily test: {d['verdict']} (spacing CV {_num(d.get('spacing_cv'), 3)}"
    if d.get("p_value") is not None:
        daily += f", peak sharpness {float(d['peak_sharpness']):.2f}, p = {float(d['p_value']):.3f} against random spacing"
    lines = [daily + ")"]
    for alt in d.get("alternatives", []) or []:
        lines.append(f"  against {alt['alternative']}: {alt['conclusion']}")
    lines.append(f"Annual cycle searched from {float(lo):g} to {float(hi):g} bands per cycle.")
    if y["significant"] and y.get("estimate") is not None:
        lines.append(f"Days per year: {_fmt(y, 'bands')} by {y['method']}; p = {float(y['p_value']):.3g}; "
                     f"a minimum (missing days leave no band)")
        if y.get("interval_method"):
            lines.append(f"  interval: {y['interval_method']}")
        for name, m in y["methods"].items():
            line = f"  {name.replace('_', ' ')}: {_fmt(m, 'bands')}"
            if m.get("p_value") is not None:
                line += f", p = {float(m['p_value']):.3g}"
            w = (y.get("weights") or {}).get(name)
            if w is not None:
                line += f", weight {float(w):.2f} in the combination"
            lines.append(line)
        cs = y.get("combination_with_sway")
        if cs:
            lines.append(f"  with the sway (indicative, heliotropism assumed): {_fmt(cs, 'bands')}; weights "
                         + ", ".join(f"{k.replace('_', ' ')} {float(v):.2f}" for k, v in cs["weights"].items()))
        route = y.get("thickness_route")
        if route:
            lines.append(f"  thickness route alone (no heliotropism assumed): {_fmt(route, 'bands')}")
        if y.get("consistency"):
            c = y["consistency"]
            lines.append(f"  agreement: chi-square {float(c['chi2']):.2f} on {c['dof']} dof, p = {float(c['p_value']):.3g}")
        lod = astro_b.get("length_of_day_hours") or (rotation or {}).get("length_of_day_hours")
        if lod:
            lines.append(f"Length of day: {_fmt(lod, 'h', 2)} by {lod.get('method') or 'LOD = Y / N'}")
            sid = astro_b.get("sidereal_day_hours") or (rotation or {}).get("sidereal_day_hours")
            if sid:
                lines.append(f"  sidereal day: {_fmt(sid, 'h', 2)}")
    elif y["significant"]:
        lines.append(f"Days per year: an annual cycle was found (p = {float(y['p_value']):.3g}) but "
                     f"{y.get('refused', 'no estimate was given')}")
    else:
        lines.append(f"Days per year: no annual cycle above red noise (p = {float(y['p_value']):.3g}); "
                     f"no estimate given.")
    month = t.get("days_per_synodic_month")
    if month:
        lines.append(f"Tidal: {_fmt(month, 'bands per synodic month', 2)}, p = {float(month['p_value']):.3g}; "
                     f"{month.get('method', '')}")
        mpy = astro_b.get("synodic_months_per_year")
        if mpy:
            lines.append(f"  synodic months per year: {_fmt(mpy, 'months', 2)} by {mpy.get('method', 'N / D')}")
        emd = astro_b.get("earth_moon_distance") or {}
        for key in ("kepler", "angular_momentum"):
            b = emd.get(key)
            if b and b.get("distance_km"):
                lines.append(f"  Earth-Moon distance ({key.replace('_', ' ')}): {_fmt(b['distance_km'], 'km', 0)}"
                             f" by {b.get('method', key)}")
    else:
        lines.append("Tidal: no fortnightly or monthly cycle read"
                     + (" (peaks rejected: " + "; ".join(f"{float(r['period_bands']):.1f} bands, {r['reason']}"
                                                         for r in t.get("rejected_peaks", [])) + ")"
                        if t.get("rejected_peaks") else "") + ".")
    fired = h.get("indicators_fired")
    lines.append(f"Hiatus evidence: {h['evidence']}"
                 + (f" ({', '.join(fired)})" if fired else "") + "; counts are minima.")
    lines += [f"warning: {w}" for w in result["warnings"]]
    return lines


def _count_uncertainty(path: Path, table, percent):
    """The band-count uncertainty: a stated percentage wins; else a confidence column; else None."""
    from .. import uncertainty

    if percent is not None:
        return uncertainty.count_uncertainty_stated(percent / 100.0, "given with --count-uncertainty")
    if table is not None:
        return uncertainty.count_uncertainty(table)
    import csv

    text = path.read_text(encoding="utf-8-sig")
    rows = [r for r in csv.reader(ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#"))]
    head = [c.strip().lower() for c in rows[0]] if rows else []
    for name in ("count_uncertainty_relative", "confidence"):
        if name in head:
            k = head.index(name)
            vals = []
            for row in rows[1:]:
                try:
                    vals.append(float(row[k]))
                except (ValueError, IndexError):
                    vals.append(float("nan"))
            if name == "confidence":
                return uncertainty.count_uncertainty_from_bands(vals)
            import math

            finite = [v for v in vals if math.isfinite(v)]
            if finite:
                return uncertainty.count_uncertainty_stated(finite[0], "from the column count_uncertainty_relative")
    return None


def _read(series_csv: Path):
    """A band table written by ``analyze``/``segment`` (bands.csv) is read as a band table, so that the
    series is built exactly as the pipeline builds it; any other CSV as a thickness series."""
    from ..series import build_series, read_series_csv

    head = series_csv.read_text(encoding="utf-8-sig").lstrip().split("\n", 1)[0].lower()
    if all(c in head for c in ("base_mm", "top_mm", "thickness_axis_mm", "flags")):
        from ..measure import BandTable

        table = BandTable.from_csv(series_csv)
        return build_series(table), table
    series = read_series_csv(series_csv)
    _check_values(series_csv, series)
    return series, None


def _check_values(path: Path, series) -> None:
    """Values too large to analyse, named by their line in the file (1-based, comments counted)."""
    import numpy as np

    from ..errors import InputError
    from ..spectral.core import MAX_ABS_VALUE

    text = path.read_text(encoding="utf-8-sig").splitlines()
    data_lines = [i + 1 for i, ln in enumerate(text) if ln.strip() and not ln.lstrip().startswith("#")]
    has_header = not series.warnings or not any("has no header" in w for w in series.warnings)
    rows = data_lines[1:] if has_header else data_lines
    for name, v in (("thickness", series.thickness_mm), ("sway", series.sway_deg),
                    ("inclination", series.inclination_deg)):
        if v is None:
            continue
        a = np.abs(np.asarray(v, dtype=float))
        bad = np.flatnonzero(~np.isfinite(a) | (a > MAX_ABS_VALUE))
        if bad.size and name == "thickness" or (bad.size and np.isfinite(a[bad[0]])):
            k = int(bad[0])
            line = rows[k] if k < len(rows) else k + 2
            raise InputError(f"{path.name} line {line}: {name} value {float(np.asarray(v)[k]):.3g} is "
                             f"{'not finite' if not np.isfinite(a[k]) else 'too large to analyse'}; fix or "
                             f"remove that line (limit {MAX_ABS_VALUE:.0e})")


@click.command("periodicity")
@click.argument("series_csv", callback=existing_path)
@out_dir_option(required=False)
@click.option("--min-period", type=float, default=None,
              help="Shortest period searched, bands per cycle  [default: 4]")
@click.option("--max-period", type=float, default=None,
              help="Longest period searched, bands per cycle  [default: a third of the record]")
@click.option("--simulations", "n_sim", type=click.IntRange(99, 100000), default=1000, show_default=True,
              help="Monte Carlo replicates for significance and intervals.")
@click.option("--n-sim", "n_sim_alias", type=click.IntRange(99, 100000), default=None, hidden=True)
@click.option("--count-uncertainty", "count_pct", type=click.FloatRange(0, 100, max_open=True), default=None,
              help="Relative standard deviation of the band count, in percent (default: from a 'confidence' "
                   "column when the CSV has one, else none).")
@seed_option()
@click.option("--json", "as_json", is_flag=True, help="Print the result blocks as JSON instead of text.")
@click.pass_context
def periodicity(ctx, series_csv: Path, out, min_period, max_period, n_sim, n_sim_alias, count_pct, seed, as_json):
    """Test a band-thickness series (CSV) for regular increments, an annual and tidal cycles.

    The CSV has a thickness column (thickness_mm, thickness_um or thickness) and optionally
    inclination_deg, azimuth_deg, sway_deg and confidence (per band, 0-1: the band-count uncertainty).
    A bands.csv written by 'bandgeo analyze' gives the same figures as analyze did. With --out,
    result.json and spectra.csv are written there.
    """
    series, table = _read(series_csv)           # bad input fails here, before the heavy imports
    counting = _count_uncertainty(series_csv, table, count_pct)
    from .. import progress
    from ..atomic import write_json
    from ..spectral import periodicity_figures

    if n_sim_alias is not None:
        n_sim = n_sim_alias
    with progress.bar("periodicity") as cb:
        fig = periodicity_figures(series, count_uncertainty=counting, min_period_bands=min_period,
                                  max_period_bands=max_period, n_sim=n_sim, seed=seed, progress=cb,
                                  band_flags=list(table.flags) if table is not None else None)
    blocks = dict(fig["blocks"])
    blocks["astronomy"] = fig["astronomy"]
    blocks["length_of_day_hours"] = fig["astronomy"].get("length_of_day_hours")
    blocks["sidereal_day_hours"] = fig["astronomy"].get("sidereal_day_hours")
    blocks["series"] = {"path": str(series_csv), "bands": len(series),
                        "mean_thickness_mm": float(series.thickness_mm.mean()),
                        "read_as": "band table (bands.csv)" if table is not None else "thickness series"}
    if out is not None:
        out.mkdir(parents=True, exist_ok=True)
        write_json(out / "result.json", blocks)
        fig["periodicity"].write_spectra_csv(out / "spectra.csv")
    if as_json:
        from ..atomic import to_jsonable

        click.echo(json.dumps(to_jsonable(blocks), indent=2))
        return
    for line in summary_lines(blocks):
        echo(ctx, line)
    if out is not None:
        echo(ctx, f"wrote {out / 'result.json'} and {out / 'spectra.csv'}")
