"""What the report says, in plain words: every row a reader sees gets a label and a unit here, and every
number is rounded to its uncertainty (:mod:`bandgeo.report.numbers`). Raw keys stay in result.json.

Nothing here estimates anything new except the heliotropic tilt summary (:mod:`bandgeo.report.tilt`)
when the result lacks it, and the routes' weights, recomputed exactly as ``bandgeo.spectral`` forms
them when the result does not list them.
"""
from __future__ import annotations

import re
from pathlib import Path
from typing import Any, Mapping

from .numbers import fmt_estimate, fmt_p, fmt_range, fmt_sig, weights_from_intervals

DPY_UNIT = "solar days per year"

ROUTES = (("thickness_spectrum", "thickness spectrum", "the yearly peak in the spectrum of band thickness"),
          ("cycle_count", "cycle count", "bands counted cycle by cycle through the yearly thickness cycle"),
          ("sway", "sway", "the yearly swing of the growth direction (heliotropism)"))

#: Plain labels (and units) of result.json keys shown in the detail tables.
LABELS = {
    # resolution
    "sampling_along_mm": ("vertex spacing along the axis", "mm"),
    "band_spacing_mm": ("band spacing seen in the curvature", "mm"),
    "spacing_to_sampling": ("band spacing over vertex spacing", "×"),
    "noise_mm": ("scanner noise", "mm"),
    "noise_method": ("how the noise was measured", ""),
    "relief_mm": ("groove relief between bands", "mm"),
    "relief_to_noise": ("relief over noise", "×"),
    "min_samples_per_band": ("fewest vertex rings in a band", ""),
    "axis_ring_offset_mm": ("offset of the vertex rings from the axis", "mm"),
    # daily test
    "verdict": ("verdict", ""),
    "spacing_cv": ("spread of band spacing (coefficient of variation)", ""),
    "spacing_cv_null_median": ("the same for randomly spaced boundaries (median)", ""),
    "peak_sharpness": ("sharpness of the spacing peak", ""),
    "peak_sharpness_null_95": ("the same, reached by random spacing 5 % of the time", ""),
    "n_bands": ("bands tested", ""),
    "mean_spacing_mm": ("mean band spacing", "mm"),
    "note": ("note", ""),
    "method": ("method", ""),
    # depth profile
    "peak_frequency_per_mm": ("relief profile: strongest frequency", "cycles per mm"),
    "peak_period_mm": ("relief profile: its period", "mm"),
    "quality_factor": ("relief profile: sharpness of that peak (frequency over width)", ""),
    "peak_over_mean_spacing": ("relief profile: its period over the mean band spacing", "×"),
    # hiatus
    "evidence": ("evidence of missing days", ""),
    "counts_are_minima": ("counts are minima", ""),
}

SPECIMEN_LABELS = (("id", "specimen", ""), ("formation", "formation", ""), ("locality", "locality", ""),
                   ("horizon", "horizon", ""), ("n_vertices", "vertices kept", ""), ("n_faces", "faces kept", ""))

CLEANING_LABELS = {"nonfinite_vertices_removed": "vertices with missing coordinates removed",
                   "duplicate_vertices_merged": "duplicate vertices merged",
                   "degenerate_faces_removed": "degenerate faces removed",
                   "duplicate_faces_removed": "duplicate faces removed",
                   "unreferenced_vertices_removed": "unused vertices removed",
                   "pieces_removed": "loose pieces removed",
                   "faces_in_removed_pieces": "faces in the removed pieces",
                   "vertices_in_removed_pieces": "vertices in the removed pieces",
                   "faces_flipped": "faces turned to face outward"}

STAGE_LABELS = {"load": "reading the scan", "orient": "orienting and cleaning", "features": "surface curvature",
                "segment": "finding the boundaries", "review": "applying review edits",
                "measure": "measuring bands", "series": "building the series",
                "periodicity": "periodicity tests", "astronomy": "length of day and Moon",
                "report": "this report"}

_UNIT_SUFFIX = (("_per_mm", "per mm"), ("_mm", "mm"), ("_um", "µm"), ("_deg", "degrees"), ("_hours", "h"),
                ("_ma", "Ma"), ("_km", "km"), ("_seconds", "s"), ("_bands", "bands"))


def humanise(key: str) -> tuple[str, str]:
    """A label and unit for a key not in :data:`LABELS` (``max_period_bands`` -> ``max period``, ``bands``)."""
    if key in LABELS:
        return LABELS[key]
    k, unit = str(key), ""
    for suffix, u in _UNIT_SUFFIX:
        if k.lower().endswith(suffix):
            k, unit = k[: -len(suffix)], u
            break
    return k.replace("_", " ").replace(".", ": ").strip(), unit


def value_text(value: Any, unit: str = "") -> str:
    if value is None:
        return "not given"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (int,)) and not isinstance(value, bool):
        return f"{value}" + (f" {unit}" if unit else "")
    if isinstance(value, float):
        if value != value or value in (float("inf"), float("-inf")):
            return "—"
        text = f"{value:,.0f}" if abs(value) >= 1000 else (f"{value:.3g}" if abs(value) >= 1e-4 or value == 0
                                                          else f"{value:.2e}")
        return text + (f" {unit}" if unit and unit != "×" else ("×" if unit == "×" else ""))
    if isinstance(value, (list, tuple)):
        if len(value) > 6:
            return f"{len(value)} values (listed in result.json)"
        return ", ".join(value_text(v) for v in value) + (f" {unit}" if unit else "") if value else "none"
    return str(value)


def rows_of(block: Mapping | None, skip=()) -> list[tuple[str, str]]:
    """(label, value with unit) for the scalar entries of ``block`` (nested blocks become their own rows)."""
    rows = []
    for key, value in (block or {}).items():
        if key in skip or key == "flagged":
            continue
        if isinstance(value, Mapping):
            for k2, v2 in value.items():
                if isinstance(v2, Mapping):
                    continue
                label, unit = humanise(k2)
                rows.append((label, value_text(v2, unit)))
            continue
        if str(key).startswith("ci95") or str(key).endswith("_ci95"):
            continue
        label, unit = humanise(str(key))
        rows.append((label, value_text(value, unit)))
    return rows


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

def _words(text: str) -> set[str]:
    return {w[:6] for w in re.findall(r"[a-z]+", text.lower()) if len(w) > 3}


def warnings_list(result: Mapping, state: Any) -> list[str]:
    """Every warning once: exact repeats dropped, and the flagged-stretch summary folded into the warning
    that already says the same thing (where the stretches are, and how long in all)."""
    out: list[str] = []
    sources = [result.get("warnings") or [], getattr(getattr(state, "specimen", None), "warnings", None) or [],
               getattr(getattr(state, "segmentation", None), "warnings", None) or []]
    for src in sources:
        for w in src:
            text = " ".join(str(w).split())
            if text and text.lower() not in (o.lower() for o in out):
                out.append(text)
    seg = getattr(state, "segmentation", None)
    flagged = (getattr(seg, "resolution", None) or {}).get("flagged") if seg is not None else None
    flagged = flagged or ((result.get("bands") or {}).get("resolution") or {}).get("flagged") or []
    groups: dict[str, list] = {}
    for item in flagged:
        try:
            s0, s1, reason = item
            groups.setdefault(str(reason), []).append((float(s0), float(s1)))
        except (TypeError, ValueError):
            continue
    for reason, spans in groups.items():
        total = sum(abs(b - a) for a, b in spans)
        where = ", ".join(f"{a:.1f}–{b:.1f}" for a, b in spans[:4]) + (", …" if len(spans) > 4 else "")
        n = len(spans)
        note = (f"{n} stretch{'es' if n > 1 else ''} flagged, {total:.1f} mm in all, at {where} mm along the "
                f"axis (the review page lists them)")
        key = _words(reason)
        match = None
        for i, w in enumerate(out):
            if key and len(key & _words(w)) >= max(2, int(0.6 * len(key))):
                match = i
                break
        if match is None:
            out.append(f"{reason}: {note}")
        else:
            out[match] = out[match].rstrip(".") + f" ({note})"
    if not dpy_significant(result) and not any("annual" in w.lower() and "signific" in w.lower() for w in out):
        out.insert(0, "no significant annual cycle was found: this report gives no days-per-year estimate")
    return out


def cautions(result: Mapping, tilt=None) -> list[tuple[str, str]]:
    """Cautions that apply to this result only."""
    out = []
    dpy = result.get("days_per_year") or {}
    sig = dpy_significant(result)
    if sig:
        if daily_supported(result):
            out.append(("One band, one day?", "The spacing of the bands is regular, as daily growth would make "
                        "it, but regular spacing does not prove that each band is a day; storm layers or tidal "
                        "couplets can be regular too."))
        else:
            out.append(("The bands may not be days", "The daily test did not find regular spacing "
                        f"({(result.get('daily_test') or {}).get('verdict', 'not tested')}), so the estimate is "
                        "bands per yearly cycle, not necessarily days per year."))
        out.append(("A minimum", "Days without growth, or growth later eroded, leave no band (Pannella 1972), "
                    "so bands per year can only undercount days per year."
                    + (" This record shows some evidence of missing days." if (result.get("hiatus") or {}).get(
                        "evidence") not in (None, "none") else "")))
        if "sway" in (dpy.get("combined_from") or []):
            out.append(("Heliotropism", "The sway route assumes the column leaned toward the seasonal sun, "
                        "so that its sway has a period of one year; not every author accepts this for fossil "
                        "columns (Williams, Jenkins & Walter 2007, against Vanyo & Awramik 1985)."))
        cons = dpy.get("consistency") or {}
        if cons.get("p_value") is not None and float(cons["p_value"]) < 0.05:
            out.append(("The routes disagree", "The estimates of the routes differ by more than their "
                        "intervals allow; the combination uses only the routes named in its method."))
        cc = (dpy.get("methods") or {}).get("cycle_count") or {}
        if isinstance(cc, Mapping) and cc.get("n_cycles") is not None and int(cc["n_cycles"]) == 1:
            out.append(("Few cycles", f"The cycle count rests on {cc['n_cycles']} whole yearly cycle; "
                        "its interval says little about year-to-year change."))
    if any("long-period end" in str(w) for w in result.get("warnings") or []):
        out.append(("Longer cycles untested", "The spectrum still rises at the longest periods searched; a "
                    "cycle longer than a third of the record cannot be tested with this specimen."))
    sp = result.get("specimen") or {}
    if sp and not sp.get("north_known", True):
        out.append(("No north", "North was not given, so every azimuth (sway plane, mean lean) is measured "
                    "from an arbitrary horizontal axis of the specimen."))
    up = sp.get("up") or {}
    if up.get("source") == "estimated" and float(up.get("confidence") or 0) < 0.9:
        out.append(("Way up estimated", f"The way up was estimated from the shape with confidence "
                    f"{fmt_sig(up.get('confidence'), 2)}; a wrong way up reverses the band order and tilts."))
    if tilt is not None and sig and tilt.sway_amplitude_ci95[0] <= 0.2 * max(tilt.sway_amplitude_deg, 1e-9):
        out.append(("Weak sway", "The sway amplitude's interval reaches near zero; the sway-plane azimuth "
                    "is then poorly defined."))
    return out


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


PARAM_LABELS = {
    "features": "curvature", "segmenter": "boundary finding", "spectral": "periodicity",
    "scales_mm": ("scales", "mm"), "band_spacing_mm": ("band spacing found first", "mm"),
    "band_spacing_method": ("how that spacing was found", ""), "n_classes": ("surface classes", ""),
    "max_classes": ("most surface classes tried", ""), "subsample": ("vertices used to fit the classes", ""),
    "random_state": ("random seed", ""), "covariance_type": ("shape of each class (covariance)", ""),
    "bic_subsample": ("vertices used to choose the number of classes", ""),
    "use_luminance": ("surface brightness used", ""), "min_relief_to_noise": ("least relief over noise", ""),
    "n_bootstrap": ("bootstrap resamples", ""),
}


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
