"""The compilation page: one self-contained HTML file (figure embedded as inline SVG, no network)."""
from __future__ import annotations

import datetime as _dt
from pathlib import Path

from .. import __version__
from ..atomic import write_text

_TEMPLATE = """<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>bandgeo compilation: {{ n }} specimens</title>
<style>
body { font-family: system-ui, sans-serif; margin: 2em auto; max-width: 1100px; color: #222; }
table { border-collapse: collapse; font-size: 0.85em; margin: 1em 0; }
th, td { border: 1px solid #bbb; padding: 0.25em 0.5em; text-align: left; vertical-align: top; }
th { background: #eee; } td.num { text-align: right; font-variant-numeric: tabular-nums; }
tr.flag td { background: #fde8d7; } tr.none td { color: #666; } tr.failed td { background: #f3f3f3; }
.note { font-size: 0.85em; color: #444; } figure { margin: 1em 0; } svg { max-width: 100%; height: auto; }
</style></head><body>
<h1>Compilation of {{ n }} specimens</h1>
<p class="note">Written {{ when }} by bandgeo {{ version }} from the result folders in
<code>{{ out_dir }}</code>. Intervals are 95%. Band counts are minima (missing days are not counted), so
days per year are minima too.</p>
{% if flagged %}<p><strong>Disagree with their horizon:</strong> {{ flagged|join(", ") }}.</p>{% endif %}
{% if no_age %}<p class="note">No age given, so not in the figure (listed in the table):
{{ no_age|join(", ") }}. Add <code>age_ma</code> to their sheets or to the manifest.</p>{% endif %}
<h2>Against age</h2>
<figure>{{ svg|safe }}<figcaption class="note">Coloured circles: this study, by horizon, with 95% intervals
(vertical) and age uncertainties as given in the sheets (horizontal). Grey: published points
({{ ref_source }}); open grey markers are values derived with LOD = Y / N. Crosses on the axis: specimens
with no significant annual cycle, which have no estimate.</figcaption></figure>
<h2>Specimens</h2>
<table><tr><th>specimen</th><th>horizon</th><th>age (Ma)</th><th>days per year [95% CI]</th>
<th>p</th><th>method</th><th>length of day (h) [95% CI]</th><th>flags</th></tr>
{% for r in rows %}<tr class="{{ r.cls }}"><td>{{ r.specimen_id }}</td><td>{{ r.horizon or "" }}</td>
<td class="num">{{ r.age }}</td><td class="num">{{ r.dpy }}</td><td class="num">{{ r.p }}</td>
<td>{{ r.method or "" }}</td><td class="num">{{ r.lod }}</td><td>{{ r.flags }}</td></tr>
{% endfor %}</table>
<h2>Horizons</h2>
<table><tr><th>horizon</th><th>specimens</th><th>with annual cycle</th>
<th>weighted mean (days/yr) ± s.e.</th><th>Cochran's Q (dof)</th><th>p (homogeneity)</th></tr>
{% for h in horizons %}<tr><td>{{ h.name }}</td><td class="num">{{ h.n }}</td><td class="num">{{ h.n_sig }}</td>
<td class="num">{{ h.mean }}</td><td class="num">{{ h.q }}</td><td class="num">{{ h.p }}</td></tr>
{% endfor %}</table>
<h2>How outliers are flagged</h2><p class="note">{{ rule }}</p>
<h2>Published points</h2><table><tr><th>constraint</th><th>age (Ma)</th><th>days per year</th>
<th>length of day (h)</th><th>source</th><th>note</th></tr>
{% for r in refs %}<tr><td>{{ r.label }}</td><td class="num">{{ r.age }}</td><td class="num">{{ r.dpy }}</td>
<td class="num">{{ r.lod }}</td><td>{{ r.citation }}</td><td>{{ r.note }}</td></tr>{% endfor %}</table>
</body></html>
"""


def _ci(value, low, high, digits):
    if value is None:
        return "no annual cycle"
    ci = "" if low is None or high is None else f" [{low:.{digits}f}, {high:.{digits}f}]"
    return f"{value:.{digits}f}{ci}"


def _num(value, fmt):
    return "" if value is None else format(value, fmt)


def write_html(comp, refs, svg: str, path: Path) -> Path:
    """Render the compilation page to ``path`` atomically."""
    import jinja2

    rows = []
    for r in comp.rows:
        cls = "failed" if r["status"] == "failed" else (
            "flag" if "horizon_outlier" in (r["flags"] or "") else ("none" if r["days_per_year"] is None else ""))
        age = "" if r["age_ma"] is None else (
            f"{r['age_ma']:g}" + ("" if r["age_err_ma"] is None else f" ± {r['age_err_ma']:g}"))
        dpy = "not analysed" if r["status"] == "failed" else _ci(
            r["days_per_year"], r["days_per_year_ci95_low"], r["days_per_year_ci95_high"], 1)
        lod = "" if r["status"] == "failed" else _ci(
            r["length_of_day_h"], r["length_of_day_ci95_low_h"], r["length_of_day_ci95_high_h"], 2)
        rows.append({**r, "cls": cls, "age": age, "dpy": dpy, "lod": lod, "p": _num(r["p_value"], ".3g")})
    horizons = []
    for name, h in sorted(comp.horizons.items()):
        mean = h.get("weighted_mean_days_per_year")
        horizons.append({
            "name": name, "n": h.get("n", 0), "n_sig": h.get("n_significant", 0),
            "mean": "" if mean is None else f"{mean:.1f} ± {h['se']:.1f}",
            "q": "" if h.get("cochran_q") is None else f"{h['cochran_q']:.2f} ({h['dof']})",
            "p": _num(h.get("p_value"), ".3g")})
    ref_rows = [{"label": r.label, "age": f"{r.age_ma:g}", "citation": r.citation, "note": r.note,
                 "dpy": _ci(r.days_per_year, *(r.dpy_ci or (None, None)), 1)
                 + (" (derived)" if "days_per_year" in r.derived else ""),
                 "lod": _ci(r.length_of_day_h, *(r.lod_ci or (None, None)), 2)
                 + (" (derived)" if "length_of_day_h" in r.derived else "")} for r in refs]
    env = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined)
    html = env.from_string(_TEMPLATE).render(
        n=len(comp.rows), when=_dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
        version=__version__, out_dir=str(comp.out_dir), flagged=comp.flagged, svg=svg, rows=rows,
        horizons=horizons, rule=comp.rule, refs=ref_rows, ref_source=comp.references_source,
        no_age=[r["specimen_id"] for r in comp.rows if r["status"] == "analysed" and r["age_ma"] is None])
    return write_text(path, html)
