"""Figure: this specimen's days-per-year estimates with their 95 % intervals beside published points."""
from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from .palette import LINE

_MARKERS = ("o", "s", "D", "^", "v")


def days_per_year_figure(estimates, references, age_ma=None, age_err_ma=None, significant=True):
    """Solar days per year against age.

    Parameters
    ----------
    estimates : list of (label, estimate, ci_low, ci_high)
        This specimen's estimates (combined and per method), solar days per year.
    references : list of dict
        From :func:`bandgeo.report.references.reference_points`.
    age_ma, age_err_ma : float or None
        Age of the specimen and its uncertainty (Ma). Without an age, the estimates are drawn as
        horizontal bands across the plot.
    significant : bool
        When False no estimate is drawn and the figure says so.
    """
    fig = Figure(figsize=(7.2, 4.8))
    fig.subplots_adjust(left=0.1, right=0.98, top=1 - 0.5 / 4.8, bottom=0.95 / 4.8)   # fixed: quick
    ax = fig.add_subplot(1, 1, 1)
    for k, ref in enumerate(references):
        err = ref.get("err")
        xerr = ref.get("age_err_ma")
        ax.errorbar(ref["age_ma"], ref["days_per_year"], yerr=err, xerr=xerr, fmt="o", mfc="white",
                    color=LINE["reference"], ms=5, capsize=2, lw=1)
        ax.annotate(f"[{k + 1}]", (ref["age_ma"], ref["days_per_year"]), textcoords="offset points",
                    xytext=(5, 4 + 7 * (k % 2)), fontsize=7, color="#333333")
    ages = [r["age_ma"] for r in references]
    if significant and estimates:
        if age_ma is not None and np.isfinite(age_ma):
            span = max(ages + [age_ma]) - min(ages + [age_ma])
            for j, (label, est, lo, hi) in enumerate(estimates):
                x = age_ma + (j - (len(estimates) - 1) / 2) * 0.012 * span
                yerr = None if lo is None or hi is None else [[est - lo], [hi - est]]
                ax.errorbar(x, est, yerr=yerr, xerr=age_err_ma if j == 0 else None,
                            fmt=_MARKERS[j % len(_MARKERS)], color=LINE["estimate"] if j == 0 else LINE["data"],
                            ms=6, capsize=3, lw=1.4 if j == 0 else 1.0, label=label)
        else:
            for j, (label, est, lo, hi) in enumerate(estimates):
                color = LINE["estimate"] if j == 0 else LINE["data"]
                if lo is not None and hi is not None:
                    ax.axhspan(lo, hi, color=color, alpha=0.15 if j == 0 else 0.07, lw=0)
                ax.axhline(est, color=color, lw=1.3 if j == 0 else 0.8, ls="-" if j == 0 else "--",
                           label=f"{label} (specimen age not given)")
        fig.legend(fontsize=7, loc="lower center", ncol=2, frameon=False, bbox_to_anchor=(0.5, 0.0))
    else:
        ax.text(0.5, 0.92, "No significant annual cycle in this specimen: no estimate is shown.",
                transform=ax.transAxes, ha="center", fontsize=10, color=LINE["fit"])
    ax.set_xlabel("age, millions of years before present (Ma)")
    ax.set_ylabel("solar days per year")
    ax.grid(alpha=0.25)
    ax.set_title("this specimen (filled, 95 % intervals) and published values\n"
                 "(open circles, numbered as in the reference list)", fontsize=9)
    return fig
