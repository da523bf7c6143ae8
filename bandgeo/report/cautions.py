"""Warnings, each once, and the cautions that apply to this result only."""
from __future__ import annotations

import re
from typing import Any, Mapping

from .content import daily_supported, dpy_significant
from .numbers import fmt_sig


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
