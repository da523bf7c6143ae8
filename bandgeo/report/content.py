"""What the report says, in plain words: every row a reader sees gets a label and a unit (labels in
:mod:`bandgeo.report.labels`, warnings and cautions in :mod:`bandgeo.report.cautions`), and every
number is rounded to its uncertainty (:mod:`bandgeo.report.numbers`). Raw keys stay in result.json.

Nothing here estimates anything new except the heliotropic tilt summary (:mod:`bandgeo.report.tilt`)
when the result lacks it, and the routes' weights, recomputed exactly as ``bandgeo.spectral`` forms
them when the result does not list them.
"""
from __future__ import annotations

import re
from pathlib import Path
from typing import Any, Mapping

from .labels import (CLEANING_LABELS, LABELS, PARAM_LABELS, SPECIMEN_LABELS, STAGE_LABELS,  # noqa: F401
                     humanise, rows_of, value_text)
from .numbers import fmt_estimate, fmt_p, fmt_range, fmt_sig, weights_from_intervals

DPY_UNIT = "solar days per year"

ROUTES = (("thickness_spectrum", "thickness spectrum", "the yearly peak in the spectrum of band thickness"),
          ("cycle_count", "cycle count", "bands counted cycle by cycle through the yearly thickness cycle"),
          ("sway", "sway", "the yearly swing of the growth direction (heliotropism)"))

# ----------------------------------------------------------------------------- p-values and routes

def n_sim_of(result: Mapping) -> int | None:
    params = (result.get("provenance") or {}).get("parameters") or {}
    n = params.get("n_sim")
    return int(n) if isinstance(n, (int, float)) and n else None


def multiplicity_of(dpy: Mapping) -> int:
    m = re.search(r"Bonferroni over (\d+)", str(dpy.get("significance_note") or ""))
    return int(m.group(1)) if m else 1


def dpy_significant(result: Mapping) -> bool:
    dpy = result.get("days_per_year") or {}
    return bool(dpy.get("significant")) and dpy.get("estimate") is not None


def daily_supported(result: Mapping) -> bool:
    return str((result.get("daily_test") or {}).get("verdict") or "").startswith("consistent")


def dpy_unit(result: Mapping) -> str:
    return DPY_UNIT if daily_supported(result) else "bands per yearly cycle"


def route_rows(result: Mapping) -> list[dict]:
    """One row per route with its estimate, interval, p-value and weight in the combination."""
    dpy = result.get("days_per_year") or {}
    methods = dpy.get("methods") or {}
    used = list(dpy.get("combined_from") or [])
    weights = dpy.get("weights")
    if isinstance(weights, (list, tuple)) and len(weights) == len(used):
        weights = dict(zip(used, weights))
    if not isinstance(weights, Mapping):
        weights = weights_from_intervals(used, methods)
    unit = dpy_unit(result)
    n_sim = n_sim_of(result)
    rows = []
    for key, short, long in ROUTES:
        block = methods.get(key)
        if not isinstance(block, Mapping):
            continue
        value, interval = fmt_estimate(block.get("estimate"), block.get("ci95"))
        w = weights.get(key) if key in used else None
        refused = str(block.get("refused") or "")
        if block.get("estimate") is None and refused:
            value, why = "refused (see below)", "—"
        elif block.get("estimate") is None and block.get("significant") is False:
            value, why = "not significant", "—"
        elif block.get("estimate") is None:
            why = "no estimate"
        elif key not in used:
            why = "not combined"
        else:
            why = f"{100 * w:.0f} %" if w is not None else "combined"
        peak = block.get("period_bands_no_interval")
        if refused and peak is not None:
            refused += f" (the peak itself lies at {fmt_sig(peak)} bands)"
        rows.append({"key": key, "name": short, "long": long, "value": value, "ci95": interval, "refused": refused,
                     "p_value": fmt_p(block.get("p_value"), n_sim) if block.get("p_value") is not None else "—",
                     "weight": why, "method": str(block.get("method") or "—")})
    return rows


# ----------------------------------------------------------------------------- headline and tables

def adopted_distance(result: Mapping) -> tuple[str, Mapping, str, Mapping] | None:
    """(adopted name, block, other name, block) of the Earth-Moon distance, angular momentum first."""
    emd = result.get("earth_moon_distance")
    if not isinstance(emd, Mapping):
        return None
    order = [("angular_momentum", "conservation of angular momentum"), ("kepler", "Kepler's third law")]
    adopted = str(emd.get("adopted") or "angular_momentum")
    order.sort(key=lambda kv: kv[0] != adopted)
    blocks = [(label, emd.get(key)) for key, label in order if isinstance(emd.get(key), Mapping)]
    if not blocks:
        return None
    other = blocks[1] if len(blocks) > 1 else (None, None)
    return blocks[0][0], blocks[0][1], other[0], other[1]


def _km(block: Mapping) -> tuple[str, str]:
    d = block.get("distance_km") or {}
    return fmt_estimate(d.get("estimate"), d.get("ci95"), "km")


def headline(result: Mapping) -> dict:
    """The front-page summary: days per year from each route and combined, length of day, tides."""
    dpy = result.get("days_per_year") or {}
    n_sim = n_sim_of(result)
    searched = fmt_range(dpy.get("searched_band_bands_per_cycle"), "bands per cycle")
    out = {"significant": dpy_significant(result), "searched": searched,
           "p_value": fmt_p(dpy.get("p_value"), n_sim, multiplicity_of(dpy)),
           "daily_ok": daily_supported(result),
           "daily_verdict": str((result.get("daily_test") or {}).get("verdict") or "not tested")}
    if not out["significant"]:
        return out
    unit = dpy_unit(result)
    out["unit"] = unit
    out["value"], out["ci95"] = fmt_estimate(dpy["estimate"], dpy.get("ci95"))
    out["method"] = str(dpy.get("method") or "—")
    out["unrounded"] = f"{float(dpy['estimate']):.4g}"
    out["routes"] = route_rows(result)
    lod = result.get("length_of_day_hours") or {}
    if isinstance(lod, Mapping) and lod.get("estimate") is not None:
        out["lod"], out["lod_ci95"] = fmt_estimate(lod["estimate"], lod.get("ci95"), "h")
    tidal = (result.get("tidal") or {}).get("days_per_synodic_month")
    if isinstance(tidal, Mapping) and tidal.get("significant") and tidal.get("estimate") is not None:
        t = {"dpm": fmt_estimate(tidal["estimate"], tidal.get("ci95"), "days")}
        months = result.get("synodic_months_per_year")
        if isinstance(months, Mapping) and months.get("estimate") is not None:
            t["months"] = fmt_estimate(months["estimate"], months.get("ci95"), "synodic months")
        dist = adopted_distance(result)
        if dist is not None:
            t["distance"] = _km(dist[1])
            t["distance_method"] = dist[0]
            if dist[2]:
                t["other"] = (dist[2],) + _km(dist[3])
        out["tidal"] = t
    return out


def short_method(text: Any, limit: int = 90) -> str:
    """The first clause of a long method description (the whole text is in the tests section)."""
    text = str(text or "—")
    if len(text) <= limit:
        return text
    for sep in ("; ", ": ", " (", ", "):
        i = text.find(sep)
        if 15 < i <= limit:
            return text[:i]
    return text[:limit].rsplit(" ", 1)[0] + " …"


def results_table(result: Mapping, tilt=None) -> list[dict]:
    """The table near the front: quantity, value, 95 % interval, method."""
    rows = []
    bands = result.get("bands") or {}
    rows.append({"name": "bands counted", "value": value_text(bands.get("count")), "ci95": "—",
                 "method": "boundaries found on the scan (after review, if any)"})
    if bands.get("mean_thickness_mm") is not None:
        v, ci = fmt_estimate(bands["mean_thickness_mm"], bands.get("mean_thickness_mm_ci95"), "mm")
        rows.append({"name": "mean band thickness", "value": v, "ci95": ci,
                     "method": str(bands.get("mean_thickness_method") or "—")})
    if dpy_significant(result):
        dpy = result["days_per_year"]
        unit = dpy_unit(result)
        v, ci = fmt_estimate(dpy["estimate"], dpy.get("ci95"), unit)
        rows.append({"name": "days per year, combined", "value": v, "ci95": ci, "method": str(dpy.get("method")),
                     "highlight": True})
        for key, label in (("length_of_day_hours", "length of day"), ("sidereal_day_hours", "sidereal day")):
            block = result.get(key)
            if isinstance(block, Mapping) and block.get("estimate") is not None:
                v, ci = fmt_estimate(block["estimate"], block.get("ci95"), "h")
                rows.append({"name": label, "value": v, "ci95": ci, "method": str(block.get("method") or "—")})
        tidal = (result.get("tidal") or {}).get("days_per_synodic_month")
        if isinstance(tidal, Mapping) and tidal.get("significant") and tidal.get("estimate") is not None:
            v, ci = fmt_estimate(tidal["estimate"], tidal.get("ci95"), "days")
            rows.append({"name": "days per synodic month", "value": v, "ci95": ci,
                         "method": str(tidal.get("method") or "—")})
            months = result.get("synodic_months_per_year")
            if isinstance(months, Mapping) and months.get("estimate") is not None:
                v, ci = fmt_estimate(months["estimate"], months.get("ci95"), "synodic months")
                rows.append({"name": "synodic months per year", "value": v, "ci95": ci,
                             "method": str(months.get("method") or "—")})
            dist = adopted_distance(result)
            if dist is not None:
                v, ci = _km(dist[1])
                rows.append({"name": "Earth–Moon distance (adopted)", "value": v, "ci95": ci,
                             "method": str(dist[1].get("method") or dist[0])})
    if tilt is not None:
        rows.extend(tilt_rows(tilt))
    for r in rows:
        r["method"] = short_method(r["method"])
    return rows


def tilt_rows(tilt) -> list[dict]:
    ref = "from north" if tilt.north_known else "from the specimen's arbitrary y axis"
    v, ci = fmt_estimate(tilt.sway_azimuth_deg, tilt.sway_azimuth_ci95, "°")
    rows = [{"name": "sway-plane azimuth", "value": f"{v} {ref}", "ci95": ci,
             "method": "principal axis of the tilt vectors; moving-block bootstrap"}]
    v, ci = fmt_estimate(tilt.sway_amplitude_deg, tilt.sway_amplitude_ci95, "°")
    rows.append({"name": "sway amplitude", "value": v, "ci95": ci, "method": tilt.sway_amplitude_method})
    v, ci = fmt_estimate(tilt.mean_lean_deg, tilt.mean_lean_ci95, "°")
    rows.append({"name": "mean lean from upright", "value": f"{v} toward azimuth {tilt.mean_lean_azimuth_deg:.0f}°",
                 "ci95": ci, "method": "length of the mean tilt vector; moving-block bootstrap"})
    return rows


def detail_sections(result: Mapping) -> list[dict]:
    """The tests and further results, each as a titled table of labelled rows."""
    out = []
    res = (result.get("bands") or {}).get("resolution") or {}
    if res:
        out.append({"title": "Can the scan resolve the bands?", "rows": rows_of(res)})
    daily = result.get("daily_test") or {}
    if daily:
        n = daily.get("n_sim")
        rows = []
        order = ("verdict", "spacing_cv", "spacing_cv_null_median", "peak_sharpness", "peak_sharpness_null_95",
                 "n_bands", "mean_spacing_mm")
        items = [(k, daily[k]) for k in order if k in daily] + [(k, v) for k, v in daily.items() if k not in order]
        for key, value in items:
            if key in ("p_value", "cv_p_value", "n_sim"):
                continue
            if key == "depth_profile" and isinstance(value, Mapping):
                rows.extend(rows_of(value, skip=("method",)))
                if value.get("method"):
                    rows.append(("relief profile: method", str(value["method"])))
                continue
            label, unit = humanise(key)
            rows.append((label, value_text(value, unit)))
        rows.insert(1, ("p-value of the spacing peak against random spacing", fmt_p(daily.get("p_value"), n)))
        if daily.get("cv_p_value") is not None:
            rows.insert(2, ("p-value of the spacing spread against random spacing", fmt_p(daily.get("cv_p_value"), n)))
        out.append({"title": "Are the bands daily?", "rows": rows})
    dpy = result.get("days_per_year") or {}
    if dpy:
        n_sim = n_sim_of(result)
        rows = [("periods searched for a yearly cycle", fmt_range(dpy.get("searched_band_bands_per_cycle"),
                                                                  "bands per cycle")),
                ("p-value against red noise", fmt_p(dpy.get("p_value"), n_sim, multiplicity_of(dpy)))]
        if dpy.get("significance_note"):
            rows.append(("how significance was judged", str(dpy["significance_note"])))
        if dpy.get("selection"):
            rows.append(("which peak is taken", str(dpy["selection"])))
        if dpy.get("interval_method"):
            rows.append(("how the interval was formed", str(dpy["interval_method"])))
        pers = dpy.get("persistence") or {}
        if pers.get("fraction_of_windows") is not None:
            rows.append(("share of sliding windows where the yearly peak stands out",
                         f"{100 * float(pers['fraction_of_windows']):.0f} %"))
        cons = dpy.get("consistency") or {}
        if cons.get("p_value") is not None:
            rows.append(("do the routes agree? (chi-square p-value)",
                         f"{fmt_p(cons['p_value'])} with {cons.get('dof', '—')} degrees of freedom"
                         + (" — they agree" if float(cons["p_value"]) >= 0.05 else " — they disagree")))
        for r in route_rows(result):
            rows.append((f"{r['name']}: method", r["method"]))
        cc = (dpy.get("methods") or {}).get("cycle_count") or {}
        if isinstance(cc, Mapping) and cc.get("n_cycles") is not None:
            rows.append(("whole yearly cycles counted", str(cc["n_cycles"])))
        out.append({"title": "The yearly cycle", "rows": rows})
    tidal = result.get("tidal") or {}
    if tidal:
        rows = [("periods searched for tidal cycles", fmt_range(tidal.get("searched_band_bands_per_cycle"), "bands"))]
        dpm = tidal.get("days_per_synodic_month")
        if isinstance(dpm, Mapping) and dpm.get("estimate") is not None:
            v, ci = fmt_estimate(dpm["estimate"], dpm.get("ci95"), "days")
            rows.append(("days per synodic month", f"{v} (95 % interval {ci}); p {fmt_p(dpm.get('p_value'), n_sim_of(result))}"))
        else:
            rows.append(("days per synodic month", "no tidal cycle above red noise"))
        for peak in tidal.get("peaks") or []:
            v, ci = fmt_estimate(peak.get("period_bands"), peak.get("ci95"), "bands")
            rows.append((f"{peak.get('reading', 'tidal')} peak", f"{v} (95 % interval {ci}); "
                         f"p {fmt_p(peak.get('p_value'), n_sim_of(result))}"))
        if tidal.get("note"):
            rows.append(("how peaks are read", str(tidal["note"])))
        dist = adopted_distance(result)
        if dist is not None:
            for name, block, tag in ((dist[0], dist[1], "adopted"), (dist[2], dist[3], "for comparison")):
                if not name:
                    continue
                v, ci = _km(block)
                rows.append((f"Earth–Moon distance by {name} ({tag})", f"{v} (95 % interval {ci})"))
                rows.append((f"  method", str(block.get("method") or "—")))
        out.append({"title": "Tidal cycles and the Moon", "rows": rows})
    hiatus = result.get("hiatus") or {}
    if hiatus:
        rows = []
        for key in ("evidence", "positions_band", "thin_bands", "thick_bands", "phase_jumps_band", "method", "note"):
            if key in hiatus:
                label = {"positions_band": "bands followed by a possible hiatus", "thin_bands": "unusually thin bands",
                         "thick_bands": "unusually thick bands", "phase_jumps_band": "jumps in the yearly phase, at band"
                         }.get(key, humanise(key)[0])
                rows.append((label, value_text(hiatus[key])))
        out.append({"title": "Missing days (hiatuses)", "rows": rows})
    return out


def specimen_rows(result: Mapping) -> list[tuple[str, str]]:
    sp = result.get("specimen") or {}
    rows = []
    for key, label, unit in SPECIMEN_LABELS:
        if sp.get(key) is not None:
            rows.append((label, value_text(sp[key], unit)))
    if sp.get("age_ma") is not None:
        age = f"{fmt_sig(sp['age_ma'], 4)} Ma" + (f" ± {fmt_sig(sp['age_err_ma'], 2)} Ma" if sp.get("age_err_ma") else "")
        rows.append(("age", age))
    sheet = sp.get("sheet") or {}
    if sheet.get("collector"):
        rows.append(("collector", str(sheet["collector"])))
    scan = sp.get("scan") or {}
    if scan:
        rows.append(("scan file", Path(str(scan.get("path") or "")).name or "—"))
        if scan.get("units"):
            rows.append(("scan units", f"{scan['units']} ({fmt_sig(scan.get('mm_per_unit'))} mm per unit)"))
    up = sp.get("up") or {}
    if up:
        rows.append(("way up taken from", f"{up.get('source', '—')} (confidence {fmt_sig(up.get('confidence'), 2)} on 0 to 1)"))
    if "north_known" in sp:
        rows.append(("north known", "yes" if sp["north_known"] else "no: azimuths are from an arbitrary horizontal axis"))
    if sheet.get("strike_deg") is not None and sheet.get("dip_deg") is not None:
        rows.append(("bedding corrected", f"strike {float(sheet['strike_deg']):.3g}°, dip {float(sheet['dip_deg']):.3g}° "
                     "(right-hand rule)"))
    cleaning = sp.get("cleaning") or {}
    changed = [f"{CLEANING_LABELS.get(k, humanise(k)[0])}: {v}" for k, v in cleaning.items() if v]
    rows.append(("mesh cleaning", "; ".join(changed) if changed else "nothing needed changing"))
    return rows


# ----------------------------------------------------------------------------- warnings and cautions


def stage_rows(result: Mapping, report_seconds: float | None,
               note: str = "figures and page; PDF typesetting after") -> list[tuple[str, str]]:
    stages = dict((result.get("provenance") or {}).get("stage_seconds") or {})
    stages.pop("report", None)
    rows = [(STAGE_LABELS.get(k, humanise(k)[0]), f"{float(v):.2f} s") for k, v in stages.items()]
    if report_seconds is not None:
        rows.append((STAGE_LABELS["report"], f"{report_seconds:.2f} s ({note})"))
    total = sum(float(v) for v in stages.values()) + (report_seconds or 0.0)
    rows.append(("total", f"{total:.1f} s"))
    return rows


def parameter_rows(result: Mapping) -> list[tuple[str, str]]:
    params = (result.get("provenance") or {}).get("parameters") or {}
    labels = {"scan": "scan given", "sheet": "specimen sheet", "units": "units given", "up": "way up given",
              "north": "north given", "strike_dip": "bedding given", "scale": "scale given",
              "seed": "random seed", "keep_review": "keep earlier review", "min_period_bands": ("shortest period searched", "bands"),
              "max_period_bands": ("longest period searched", "bands"), "n_sim": "simulations per test"}
    rows = []
    for key, value in params.items():
        if isinstance(value, Mapping):
            group = PARAM_LABELS.get(key, humanise(key)[0])
            for k2, v2 in value.items():
                label, unit = PARAM_LABELS.get(k2) or humanise(k2)
                if isinstance(v2, list) and v2 and all(isinstance(x, float) for x in v2):
                    v2 = ", ".join(f"{x:.3g}" for x in v2) + (f" {unit}" if unit else "")
                    unit = ""
                rows.append((f"{group}: {label}", value_text(v2, unit) if v2 is not None else "default"))
            continue
        lab = labels.get(key, humanise(key))
        label, unit = lab if isinstance(lab, tuple) else (lab, "")
        if key in ("scan", "sheet") and value:
            value = Path(str(value)).name
        rows.append((label, value_text(value, unit) if value is not None else "not given (default)"))
    return rows
