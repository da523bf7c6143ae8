"""Two-dimensional report figures: series with their fits, spectra against red noise, spectra in
sliding windows, cycle-by-cycle counts and the plan view of the growth direction. Every axis carries its
unit; colours are colour-blind safe (Okabe & Ito 2008; cividis for images and sequences).

Each function takes plain arrays (or the normalised dicts of :mod:`bandgeo.report.spectra`) and returns a
``matplotlib.figure.Figure`` built without pyplot, so nothing needs a display.
"""
from __future__ import annotations

import numpy as np
from matplotlib import patheffects
from matplotlib.figure import Figure
from matplotlib.ticker import MaxNLocator

from .palette import IMAGE_CMAP, LINE

_OUTLINE = [patheffects.withStroke(linewidth=2.2, foreground="black")]


_SUPERSCRIPT = str.maketrans("-0123456789", "\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077\u2078\u2079")


def log_label(value, _pos=None, powers: bool = False) -> str:
    """Tick label on a log axis as plain text: ``0.01``, ``100``, or ``10⁻⁵`` beyond a thousandfold
    (every decade as a power of ten with ``powers=True``).

    Matplotlib's own log labels are mathtext (``$10^{-5}$``), whose parser costs about 30 ms per new
    label, most of the time spent drawing a spectrum figure; Unicode superscripts look the same and stay
    text in the SVG.
    """
    v = float(value)
    if not np.isfinite(v) or v <= 0:
        return ""
    exp = np.log10(v)
    if abs(exp - round(exp)) < 1e-9:
        k = int(round(exp))
        return f"{v:g}" if (-3 <= k <= 3 and not powers) else "10" + str(k).translate(_SUPERSCRIPT)
    if 1e-3 <= v < 1e4 and not powers:
        return f"{v:.2g}"
    k = int(np.floor(exp))
    return f"{v / 10.0 ** k:.2g}\u00d710" + str(k).translate(_SUPERSCRIPT)


class _PlainLogFormatter:
    """Matplotlib tick formatter for :func:`log_label`, one style per axis: decimals when the whole view
    lies within 0.001..1000, powers of ten otherwise (so one axis never mixes ``0.01`` and ``10⁻⁴``)."""

    def __new__(cls, minor=False):
        from matplotlib.ticker import Formatter

        class Fmt(Formatter):
            def __call__(self, x, pos=None):
                lo, hi = sorted(self.axis.get_view_interval()) if self.axis is not None else (x, x)
                powers = not (lo >= 0.99e-3 and hi <= 1.01e3)
                return log_label(x, pos, powers=powers)

        return Fmt()


def plain_log_axis(axis, minor_labels: bool = False) -> None:
    """Label a log-scaled ``axis`` (an ``Axis``) with :func:`log_label`; minor ticks unlabelled unless
    ``minor_labels`` (a span under one decade has no decade to label)."""
    from matplotlib.ticker import NullFormatter

    axis.set_major_formatter(_PlainLogFormatter())
    axis.set_minor_formatter(_PlainLogFormatter() if minor_labels else NullFormatter())


def _fixed(fig, height, left=0.1, right=0.98, top_in=0.3, bottom_in=0.5, **kw):
    """Fixed margins in inches (constrained layout measures every tick label several times: slow)."""
    fig.subplots_adjust(left=left, right=right, top=1 - top_in / height, bottom=bottom_in / height, **kw)


def _thin(x, y, n_max=1500):
    """At most about ``2 n_max`` points of a long curve, every extreme kept (see :func:`envelope`)."""
    if len(x) <= 2 * n_max:
        return x, y
    ok = np.isfinite(y)
    return envelope(np.asarray(x, float)[ok], np.asarray(y, float)[ok], n_bins=n_max, log=False)


def sinusoid_fit(x, y, period):
    """Least-squares fit ``a + b x + c cos(2 pi x / P) + d sin(2 pi x / P)``.

    Returns
    -------
    fitted : (N,) float
        Fitted values at ``x`` (NaN where ``y`` is NaN).
    amplitude : float
        ``sqrt(c² + d²)`` in the units of ``y``.
    """
    x, y = np.asarray(x, float), np.asarray(y, float)
    ok = np.isfinite(y) & np.isfinite(x)
    w = 2 * np.pi * x / period
    design = np.column_stack([np.ones_like(x), x - x.mean(), np.cos(w), np.sin(w)])
    coef, *_ = np.linalg.lstsq(design[ok], y[ok], rcond=None)
    fitted = design @ coef
    fitted[~ok] = np.nan
    return fitted, float(np.hypot(coef[2], coef[3]))


def series_figure(series, period_bands=None, sway_azimuth_deg=None):
    """Thickness and tilt against band number, with the fits that suit each series.

    Thickness and the tilt in the sway plane (a signed angle) get a least-squares sinusoid at the annual
    period with a linear trend. The inclination is the tilt's size, never negative: when the column swings
    through upright it cycles twice a year, so it gets no annual sinusoid, only a running mean over a
    tenth of a year (or 15 bands) to guide the eye.
    """
    panels = [("thickness_mm", "band thickness, mm", "sine")]
    if getattr(series, "sway_deg", None) is not None:
        where = "" if sway_azimuth_deg is None else f" (azimuth {sway_azimuth_deg:.0f}°)"
        panels.append(("sway_deg", f"tilt in the sway plane{where}, degrees", "sine"))
    if getattr(series, "inclination_deg", None) is not None:
        panels.append(("inclination_deg", "inclination from upright, degrees", "mean"))
    x = np.asarray(series.band_number, float)
    hiatus = np.asarray(getattr(series, "hiatus_flags", None) if getattr(series, "hiatus_flags", None)
                        is not None else np.zeros(len(x), bool), bool)
    height = 1.75 * len(panels) + 0.6
    fig = Figure(figsize=(7.2, height))
    _fixed(fig, height, left=0.11, top_in=0.15, bottom_in=0.45, hspace=0.12)
    axes = fig.subplots(len(panels), 1, sharex=True, squeeze=False)[:, 0]
    unit = {"thickness_mm": "mm", "sway_deg": "°", "inclination_deg": "°"}
    for ax, (attr, label, kind) in zip(axes, panels):
        y = np.asarray(getattr(series, attr), float)
        ax.plot(*_thin(x, y), color=LINE["data"], lw=0.5, label="measured, one point per band")
        if hiatus.any() and hiatus.size == y.size:
            ax.plot(x[hiatus], y[hiatus], "v", color=LINE["hiatus"], ms=4, label="possible hiatus after this band")
        if kind == "sine" and period_bands and np.isfinite(period_bands) and np.isfinite(y).sum() > 8:
            fitted, amp = sinusoid_fit(x, y, period_bands)
            amp_text = f"{amp:.3f} mm" if unit[attr] == "mm" else f"{amp:.2f}°"
            ax.plot(*_thin(x, fitted, 400), color=LINE["fit"], lw=1.4,
                    label=f"annual sinusoid + trend: period {period_bands:.0f} bands, amplitude {amp_text}")
        elif kind == "mean" and np.isfinite(y).sum() > 8:
            win = int(max(15, round(period_bands / 10))) if period_bands and np.isfinite(period_bands) else 15
            kernel = np.ones(win) / win
            ok = np.isfinite(y)
            num = np.convolve(np.where(ok, y, 0.0), kernel, mode="same")
            den = np.convolve(ok.astype(float), kernel, mode="same")
            with np.errstate(invalid="ignore", divide="ignore"):
                ax.plot(*_thin(x, num / den, 400), color=LINE["reference"], lw=1.3,
                        label=f"running mean over {win} bands")
        ax.set_ylabel(label, fontsize=7.5)
        ax.tick_params(labelsize=7)
        ax.legend(fontsize=6.5, loc="upper right", framealpha=0.85)
        ax.grid(alpha=0.25)
    axes[-1].set_xlabel("band number (0 = lowest band)", fontsize=8)
    return fig


def envelope(x, y, n_bins=1500, log=True):
    """Thin a dense curve for drawing: the minimum and the maximum of each bin, in order.

    Keeps every peak and trough visible (common practice for plotting long signals) while drawing at
    most ``2 n_bins`` points. Bins are even in ``log x`` when ``log`` is true.
    """
    x, y = np.asarray(x, float), np.asarray(y, float)
    if len(x) <= 2 * n_bins:
        return x, y
    key = np.log(x) if log else x
    edges = np.linspace(key[0], key[-1], n_bins + 1)
    b = np.clip(np.searchsorted(edges, key, side="right") - 1, 0, n_bins - 1)
    starts = np.flatnonzero(np.r_[True, b[1:] != b[:-1]])
    idx_min = np.array([s + np.argmin(y[s:e]) for s, e in zip(starts, np.r_[starts[1:], len(y)])])
    idx_max = np.array([s + np.argmax(y[s:e]) for s, e in zip(starts, np.r_[starts[1:], len(y)])])
    idx = np.sort(np.unique(np.concatenate([idx_min, idx_max])))
    return x[idx], y[idx]


def periodogram_figure(spectra, searched=None, estimate_frequency=None):
    """One panel per spectrum: power, red-noise background and its 95 % / 99 % levels.

    Parameters
    ----------
    spectra : dict
        From :func:`bandgeo.report.spectra.normalise_spectra`.
    searched : (2,) float or None
        Searched annual band in bands per cycle ``[shortest, longest]``; shaded and labelled.
    estimate_frequency : float or None
        Frequency of the accepted annual peak, cycles per band; marked when given.
    """
    # Fixed margins rather than constrained layout: with log axes and a second (period) axis on each
    # panel, the layout engine measures every tick label several times, which costs seconds.
    n = len(spectra)
    panel, gap, top_in, bottom_in = 1.7, 0.95, 0.5, 1.25
    height = n * panel + (n - 1) * gap + top_in + bottom_in
    fig = Figure(figsize=(7.2, height))
    fig.subplots_adjust(left=0.1, right=0.98, top=1 - top_in / height, bottom=bottom_in / height,
                        hspace=gap / panel)
    axes = fig.subplots(n, 1, squeeze=False)[:, 0]
    for ax, (name, spec) in zip(axes, spectra.items()):
        f, p = spec["frequency"], spec["power"]
        pos = f > 0
        if searched is not None and all(np.isfinite(searched)) and min(searched) > 0:
            f_lo, f_hi = 1.0 / max(searched), 1.0 / min(searched)
            ax.axvspan(f_lo, f_hi, color=LINE["search"], alpha=0.18, lw=0,
                       label=f"periods searched for a yearly cycle: {min(searched):.0f} to {max(searched):.0f} bands")
        ax.plot(*envelope(f[pos], p[pos], n_bins=700), color=LINE["data"], lw=0.8, label="power of the series")
        if spec.get("multitaper") is not None:
            ax.plot(*envelope(f[pos], spec["multitaper"][pos], n_bins=500), color=LINE["reference"], lw=0.8, alpha=0.8,
                    label="power, averaged over tapers")
        for key, style, text in (("background", ":", "expected from red noise alone"),
                                 ("level95", "--", "red noise exceeds this 5 % of the time"),
                                 ("level99", "-.", "red noise exceeds this 1 % of the time")):
            if spec.get(key) is not None:
                ax.plot(*envelope(f[pos], spec[key][pos], n_bins=150), ls=style, lw=1.1,
                        color=LINE[key if key != "background" else "background"], label=text)
        if estimate_frequency and np.isfinite(estimate_frequency):
            ax.axvline(estimate_frequency, color=LINE["estimate"], lw=1.0,
                       label=f"yearly cycle found: {1.0 / estimate_frequency:.0f} bands")
        if np.all(p[pos] > 0):
            ax.set_yscale("log")
        ax.set_xscale("log")
        ax.set_xlim(float(np.min(f[pos])), float(np.max(f)))
        from matplotlib.ticker import LogLocator, NullLocator
        ax.xaxis.set_minor_locator(NullLocator())          # fewer marks: quicker to typeset, easier to read
        ax.yaxis.set_minor_locator(NullLocator())
        ax.yaxis.set_major_locator(LogLocator(numticks=6))
        plain_log_axis(ax.xaxis)
        if ax.get_yscale() == "log":
            plain_log_axis(ax.yaxis)
        ax.text(0.01, 0.03, f"{name.replace('_', ' ')} series", transform=ax.transAxes, fontsize=8.5,
                weight="bold", va="bottom", bbox={"fc": "white", "ec": "none", "alpha": 0.8, "pad": 1.5})
        ax.set_ylabel(f"power, {spec['power_unit']}", fontsize=7.5)
        ax.set_xlabel("frequency, cycles per band", fontsize=8)
        ax.tick_params(labelsize=7)
        top = ax.secondary_xaxis("top", functions=(lambda v: 1.0 / np.maximum(v, 1e-9),
                                                  lambda v: 1.0 / np.maximum(v, 1e-9)))
        top.set_xlabel("period, bands per cycle", fontsize=8)
        from matplotlib.ticker import FixedLocator, NullLocator
        fmin, fmax = float(np.min(f[pos])), float(np.max(f))
        periods = [p_ for p_ in (2, 3, 5, 10, 20, 50, 100, 200, 500, 1000, 2000, 5000, 10000)
                   if fmin <= 1.0 / p_ <= fmax]
        top.xaxis.set_major_locator(FixedLocator(periods))
        top.xaxis.set_minor_locator(NullLocator())
        top.xaxis.set_major_formatter(lambda v, _pos: f"{v:g}")
        top.tick_params(labelsize=7)
        ax.grid(alpha=0.25)
    handles, labels = {}, []
    for ax in axes:
        for h, lab in zip(*ax.get_legend_handles_labels()):
            if lab not in handles:
                handles[lab] = h
    fig.legend(list(handles.values()), list(handles), loc="lower center", ncol=2, fontsize=7,
               frameon=False, bbox_to_anchor=(0.5, 0.0))
    return fig


def evolutive_figure(evolutive, searched=None):
    """Spectrum in sliding windows: window centre (band number) × period, power as an image (log scales)."""
    from matplotlib.colors import LogNorm

    usable = [ev for ev in evolutive if len(ev["centre"]) >= 3]
    height = 2.6 * len(usable) + 0.3
    fig = Figure(figsize=(7.2, height))
    _fixed(fig, height, right=0.9, top_in=0.3, bottom_in=0.45, hspace=0.45)
    axes = fig.subplots(len(usable), 1, squeeze=False)[:, 0]
    for ax, ev in zip(axes, usable):
        f = np.asarray(ev["frequency"], float)
        keep = f > 0
        power = np.asarray(ev["power"], float)[:, keep]
        finite = power[np.isfinite(power) & (power > 0)]
        lo = float(np.percentile(finite, 5)) if finite.size else 1e-3
        hi = float(finite.max()) if finite.size else 1.0
        img = ax.pcolormesh(ev["centre"], f[keep], power.T, cmap=IMAGE_CMAP, shading="nearest",
                            norm=LogNorm(vmin=lo, vmax=max(hi, lo * 10)), rasterized=True)
        cb = fig.colorbar(img, ax=ax, pad=0.01)
        cb.set_label(ev.get("label", "power"), fontsize=8)
        plain_log_axis(cb.ax.yaxis, minor_labels=max(hi, lo * 10) / lo < 10)
        if searched is not None and min(searched) > 0:
            for b in searched:
                ax.axhline(1.0 / b, color="white", lw=0.9, ls="--", path_effects=_OUTLINE)
        ax.set_yscale("log")
        from matplotlib.ticker import NullLocator
        ax.yaxis.set_minor_locator(NullLocator())
        plain_log_axis(ax.yaxis)
        ax.set_xlabel("centre of the window, band number", fontsize=8)
        ax.set_ylabel("frequency, cycles per band", fontsize=8)
        ax.tick_params(labelsize=7)
        ax.set_title(f"{ev['name']} series (dashed: limits of the periods searched)", fontsize=8.5)
    return fig


def counts_figure(counts, estimate=None):
    """Bands counted in each successive annual cycle (a dot per cycle), with the mean and the estimate.

    Dots rather than bars, because the value axis does not start at zero.
    """
    counts = np.asarray([c for c in counts if c is not None], float)
    fig = Figure(figsize=(7.2, 2.6))
    _fixed(fig, 2.6, top_in=0.3, bottom_in=0.45)
    ax = fig.add_subplot(1, 1, 1)
    idx = np.arange(1, len(counts) + 1)
    ax.plot(idx, counts, "o-", color=LINE["data"], lw=0.8, ms=5, label="bands in the cycle")
    ax.axhline(np.mean(counts), color=LINE["background"], ls="--", lw=1,
               label=f"mean {np.mean(counts):.0f} bands per cycle")
    if estimate is not None and np.isfinite(estimate):
        ax.axhline(estimate, color=LINE["estimate"], lw=1.3, label=f"this route's estimate {estimate:.0f}")
    ax.set_xlabel("annual cycle number, from the base")
    if len(counts) <= 25:
        ax.set_xticks(idx)
    else:
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    ax.set_xlim(0.5, len(counts) + 0.5)
    ax.set_ylabel("bands per cycle")
    ax.set_title("each count is a minimum: missing days leave no band", fontsize=8.5)
    ax.legend(fontsize=7, framealpha=0.85, loc="best")
    ax.grid(alpha=0.25)
    return fig


def plan_view_figure(east_deg, north_deg, sway_azimuth_deg=None, mean_lean=None, north_known=True,
                     period_bands=None):
    """Plan view of the growth direction through the sequence, coloured by band number.

    Each point is one band's tilt vector (inclination x (sin azimuth, cos azimuth), degrees), as seen
    from above; the line through the mean is the sway plane and the arrow from upright the mean lean.
    Colours run along cividis (readable with colour-vision deficiency) from the lowest band to the top.
    """
    from matplotlib.colors import Normalize

    e, n = np.asarray(east_deg, float), np.asarray(north_deg, float)
    k = np.arange(len(e))
    fig = Figure(figsize=(7.2, 3.9))
    _fixed(fig, 3.9, left=0.08, right=0.98, top_in=0.3, bottom_in=0.5, wspace=0.35)
    ax, bx = fig.subplots(1, 2, gridspec_kw={"width_ratios": [1.0, 1.15]})
    norm = Normalize(0, max(len(e) - 1, 1))
    sc = ax.scatter(e, n, c=k, cmap=IMAGE_CMAP, norm=norm, s=4, lw=0, rasterized=True)
    win = int(max(5, round(period_bands / 12))) if period_bands else 9
    if len(e) > 3 * win:
        kern = np.ones(win) / win
        es, ns = np.convolve(e, kern, "valid"), np.convolve(n, kern, "valid")
        ax.plot(es, ns, color="black", lw=0.6, alpha=0.6, label=f"running mean over {win} bands")
    lim = float(np.nanpercentile(np.hypot(e, n), 99.5)) * 1.1 or 1.0
    if sway_azimuth_deg is not None:
        a = np.radians(sway_azimuth_deg)
        me, mn = float(np.mean(e)), float(np.mean(n))
        t = np.array([-2 * lim, 2 * lim])
        ax.plot(me + t * np.sin(a), mn + t * np.cos(a), color=LINE["fit"], lw=1.2, ls="--",
                label=f"sway plane, azimuth {sway_azimuth_deg:.0f}°")
    if mean_lean is not None:
        ax.annotate("", xy=(float(np.mean(e)), float(np.mean(n))), xytext=(0, 0),
                    arrowprops={"arrowstyle": "->", "color": LINE["reference"], "lw": 1.6})
        ax.plot([], [], color=LINE["reference"], lw=1.6, label=f"mean lean {mean_lean:.1f}° from upright")
    ax.plot(0, 0, "+", color="black", ms=8)
    ax.set_xlim(-lim, lim)
    ax.set_ylim(-lim, lim)
    ax.set_aspect("equal")
    east, north = ("toward east", "toward north") if north_known else ("toward +x", "toward +y (arbitrary)")
    ax.set_xlabel(f"tilt {east}, degrees", fontsize=8)
    ax.set_ylabel(f"tilt {north}, degrees", fontsize=8)
    ax.tick_params(labelsize=7)
    ax.grid(alpha=0.25)
    ax.legend(fontsize=6.5, loc="lower left", framealpha=0.85)
    ax.set_title("seen from above (+: upright)", fontsize=8.5)
    cb = fig.colorbar(sc, ax=ax, shrink=0.8, pad=0.03, fraction=0.06)
    cb.set_label("band number (0 = lowest)", fontsize=7)
    cb.ax.tick_params(labelsize=6)
    # the same vectors against band number, in the sway plane and across it
    if sway_azimuth_deg is not None:
        a = np.radians(sway_azimuth_deg)
        along = e * np.sin(a) + n * np.cos(a)
        across = e * np.cos(a) - n * np.sin(a)
        bx.plot(k, along, color=LINE["data"], lw=0.5, label="in the sway plane")
        bx.plot(k, across, color=LINE["level95"], lw=0.5, label="across the sway plane")
        bx.legend(fontsize=6.5, loc="upper right", framealpha=0.85)
        bx.set_ylabel("tilt, degrees", fontsize=8)
        bx.set_xlabel("band number (0 = lowest band)", fontsize=8)
        bx.tick_params(labelsize=7)
        bx.grid(alpha=0.25)
        bx.set_title("tilt components through the sequence", fontsize=8.5)
    else:
        bx.set_visible(False)
    return fig
