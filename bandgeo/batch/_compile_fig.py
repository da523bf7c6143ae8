"""The compilation figure: days per year and length of day against age, with published points."""
from __future__ import annotations

import io
from pathlib import Path
from typing import Optional

import numpy as np

from ..atomic import atomic_path

#: Okabe & Ito (2008) colour-blind-safe palette, one colour per horizon.
OKABE_ITO = ["#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#F0E442", "#000000"]
_REF_MARKERS = ["s", "D", "^", "v", "P", "X", "h", "*"]


def _yerr(values, low, high):
    v = np.asarray(values, float)
    lo = np.where(np.isfinite(low), v - low, 0.0)
    hi = np.where(np.isfinite(high), high - v, 0.0)
    return np.vstack([lo, hi])


def _arr(rows, key):
    return np.array([np.nan if r.get(key) is None else float(r[key]) for r in rows], float)


def figure_vs_age(rows: list[dict], refs: list, path: Optional[Path]) -> tuple[Optional[Path], str]:
    """Draw the two-panel figure; write it to ``path`` (format from its suffix) if given.

    Returns the path and the SVG text (for embedding in the HTML page).
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.transforms import blended_transform_factory

    aged = [r for r in rows if r["status"] == "analysed" and r.get("age_ma") is not None]
    est = [r for r in aged if r["days_per_year"] is not None]
    none = [r for r in aged if r["days_per_year"] is None]
    horizons = sorted({r["horizon"] or "(no horizon)" for r in est})
    colour = {h: OKABE_ITO[i % len(OKABE_ITO)] for i, h in enumerate(horizons)}

    fig, axes = plt.subplots(2, 1, figsize=(8.0, 9.0), sharex=True, constrained_layout=True)
    panels = [("days_per_year", "days_per_year_ci95_low", "days_per_year_ci95_high",
               "solar days per year", "days_per_year", "dpy_ci"),
              ("length_of_day_h", "length_of_day_ci95_low_h", "length_of_day_ci95_high_h",
               "length of day (h)", "length_of_day_h", "lod_ci")]
    for ax, (key, lo_key, hi_key, ylabel, ref_key, ref_ci) in zip(axes, panels):
        for i, ref in enumerate(refs):
            ci = getattr(ref, ref_ci)
            value = getattr(ref, ref_key)
            yerr = None if ci is None else [[value - ci[0]], [ci[1] - value]]
            xerr = None if ref.age_err_ma is None else [[ref.age_err_ma], [ref.age_err_ma]]
            derived = ref_key in ref.derived
            ax.errorbar([ref.age_ma], [value], yerr=yerr, xerr=xerr, fmt=_REF_MARKERS[i % len(_REF_MARKERS)],
                        color="0.35", mfc="white" if derived else "0.35", ms=6, capsize=3, lw=1,
                        label=f"{ref.citation}" + (" (derived)" if derived else ""), zorder=2)
        for h in horizons:
            members = [r for r in est if (r["horizon"] or "(no horizon)") == h]
            v = _arr(members, key)
            xerr = np.nan_to_num(_arr(members, "age_err_ma"), nan=0.0)
            ax.errorbar(_arr(members, "age_ma"), v, xerr=xerr,
                        yerr=_yerr(v, _arr(members, lo_key), _arr(members, hi_key)), fmt="o",
                        color=colour[h], ms=6, capsize=3, lw=1.2, label=f"this study: {h} (95% CI)",
                        zorder=3)
        flagged = [r for r in est if "horizon_outlier" in "; ".join(r["flags"]
                   if isinstance(r["flags"], list) else [r["flags"] or ""])]
        if flagged:
            ax.scatter(_arr(flagged, "age_ma"), _arr(flagged, key), s=180, facecolors="none",
                       edgecolors="#D55E00", linewidths=2, label="disagrees with its horizon", zorder=4)
            for r in flagged:
                ax.annotate(r["specimen_id"], (r["age_ma"], r[key]), xytext=(6, 6),
                            textcoords="offset points", fontsize=8, color="#D55E00")
        if none:
            trans = blended_transform_factory(ax.transData, ax.transAxes)
            ax.scatter(_arr(none, "age_ma"), np.full(len(none), 0.04), marker="x", color="0.2",
                       transform=trans, label="no annual cycle (no estimate; age only)", zorder=3)
        ax.set_ylabel(ylabel)
        ax.grid(True, lw=0.3, alpha=0.6)
    axes[1].set_xlabel("age (Ma)")
    axes[0].set_title("Days per year and length of day against age (intervals: 95%; age bars as given)",
                      fontsize=10)
    handles, labels = axes[0].get_legend_handles_labels()
    fig.legend(handles, labels, fontsize=7, loc="outside lower center", ncol=2, frameon=False)
    buf = io.StringIO()
    fig.savefig(buf, format="svg")
    svg = buf.getvalue()
    if path is not None:
        path = Path(path)
        with atomic_path(path) as tmp:
            fig.savefig(tmp, format=path.suffix.lstrip(".").lower())
    plt.close(fig)
    start = svg.find("<svg")
    return path, svg[start:] if start >= 0 else svg
