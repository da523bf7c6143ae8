"""Two-dimensional report figures: unrolled surface, series with the annual fit, periodograms,
evolutive spectra and cycle-by-cycle counts. Every axis carries its unit; colours are colour-blind safe.

Each function takes plain arrays (or the normalised dicts of :mod:`bandgeo.report.spectra`) and returns a
``matplotlib.figure.Figure`` built without pyplot, so nothing needs a display.
"""
from __future__ import annotations

import numpy as np
from matplotlib import patheffects
from matplotlib.figure import Figure
from matplotlib.ticker import MaxNLocator

from .palette import IMAGE_CMAP, LINE
from .unroll import boundary_trace

_OUTLINE = [patheffects.withStroke(linewidth=2.2, foreground="black")]


def _message_figure(text: str, figsize=(8.0, 1.6)) -> Figure:
    fig = Figure(figsize=figsize)
    fig.text(0.5, 0.5, text, ha="center", va="center", fontsize=11, wrap=True)
    return fig


def _ordinal(n: int) -> str:
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


def _relief_panel(ax, fig, image, s_edges, az_edges, label=True):
    # colour limits from the middle 90 % of the height, so end caps and domes do not set the scale
    rows = slice(int(0.05 * image.shape[0]), max(int(0.95 * image.shape[0]), 1))
    finite = image[rows][np.isfinite(image[rows])]
    lim = float(np.percentile(np.abs(finite), 98)) if finite.size else 1.0
    lim = lim if lim > 0 else 1.0
    mesh = ax.pcolormesh(az_edges, s_edges, np.ma.masked_invalid(image), cmap=IMAGE_CMAP,
                         vmin=-lim, vmax=lim, shading="flat", rasterized=True)
    cb = fig.colorbar(mesh, ax=ax, shrink=0.85, pad=0.01, location="bottom", aspect=30)
    cb.set_label("relief (radius minus its smooth trend), mm", fontsize=8)
    cb.ax.xaxis.set_major_locator(MaxNLocator(5))
    cb.ax.tick_params(labelsize=7)
    ax.set_xlim(0, 360)
    ax.set_ylim(s_edges[0], s_edges[-1])
    ax.set_xticks(np.arange(0, 361, 90))
    ax.set_xlabel("azimuth, degrees clockwise from north", fontsize=8)
    if label:
        ax.set_ylabel("height along the axis, mm")


def _draw_boundaries(ax, boundaries, axis, radius_mm):
    az = np.linspace(0.0, 360.0, 91)
    for b in boundaries:
        h = boundary_trace(b, axis, radius_mm, az)
        review = getattr(b, "origin", "auto") == "review"
        ax.plot(az, h, color="white", lw=0.9, ls="--" if review else "-", path_effects=_OUTLINE,
                alpha=0.6 + 0.4 * float(np.clip(getattr(b, "confidence", 1.0), 0, 1)))


def unrolled_figure(s_mm, azimuth_deg, radius_mm, boundaries, axis, flagged=(), smooth_mm=None,
                    max_drawn=60, zoom_bands=30):
    """Relief of the side surface (azimuth × height along the axis) with the detected boundaries.

    The left panel shows the whole column with at most ``max_drawn`` boundaries (every k-th when
    there are more, as its title says); the right panel zooms on ``zoom_bands`` bands in the middle
    of the record and draws every boundary there.

    Parameters
    ----------
    s_mm, azimuth_deg, radius_mm : (n,) float
        From :func:`bandgeo.report.unroll.unroll_vertices`.
    boundaries : list of Boundary
        Drawn as the curve where each boundary plane meets the mean cylinder; dashed when added or
        moved in review, fainter when less confident.
    flagged : list of (s0_mm, s1_mm, reason)
        Stretches the segmentation flagged, marked at the right margin.
    """
    from .unroll import relief_image

    radius = float(np.median(radius_mm))
    side = radius_mm > 0.6 * radius             # drop the end caps (discs across the axis)
    s_mm, azimuth_deg, radius_mm = s_mm[side], azimuth_deg[side], radius_mm[side]
    fig = Figure(figsize=(8.0, 7.8), layout="constrained")
    ax, zx = fig.subplots(1, 2, gridspec_kw={"width_ratios": [1.6, 1.0]})
    image, se, ae = relief_image(s_mm, azimuth_deg, radius_mm, smooth_mm=smooth_mm)
    _relief_panel(ax, fig, image, se, ae)
    step = max(1, int(np.ceil(len(boundaries) / max_drawn)))
    _draw_boundaries(ax, boundaries[::step], axis, radius)
    reasons = list(dict.fromkeys(str(f[2]) for f in flagged))
    colours = [LINE["fit"], LINE["level99"], LINE["level95"], LINE["background"]]
    for s0, s1, reason in flagged:
        k = reasons.index(str(reason))
        ax.axhspan(float(s0), float(s1), xmin=0.97, xmax=1.0, color=colours[k % len(colours)], lw=0)
    if reasons:
        from matplotlib.patches import Patch

        ax.legend(handles=[Patch(color=colours[k % len(colours)], label=r) for k, r in enumerate(reasons)],
                  title="flagged stretches (right margin)", title_fontsize=7, fontsize=7,
                  loc="upper center", bbox_to_anchor=(0.5, -0.2), frameon=False)
    drawn = "all" if step == 1 else f"every {_ordinal(step)} of {len(boundaries)}"
    ax.set_title(f"whole column: {drawn} boundaries drawn\n(solid: automatic, dashed: reviewed)",
                 fontsize=8)
    if len(boundaries) >= 2:
        heights = np.array([b.height_mm for b in boundaries], float)
        span = float(np.ptp(s_mm))
        # mean vertex spacing for isotropic sampling: the zoom never goes finer than ~20 samples
        spacing = np.sqrt(span * 2 * np.pi * radius / max(len(s_mm), 1))
        mid = 0.5 * (heights[len(heights) // 2] + heights[(len(heights) - 1) // 2])
        typical = float(np.median(np.diff(heights))) if len(heights) > 2 else span / 10
        half = max(0.5 * zoom_bands * typical, 10.0 * spacing)
        z0, z1 = mid - half, mid + half
        inside = [b for b in boundaries if z0 <= b.height_mm <= z1]
        keep = (s_mm >= z0) & (s_mm <= z1)
        if keep.sum() > 100 and inside:
            zimg, zse, zae = relief_image(s_mm[keep], azimuth_deg[keep], radius_mm[keep], smooth_mm=smooth_mm)
            _relief_panel(zx, fig, zimg, zse, zae, label=False)
            zstep = max(1, int(np.ceil(len(inside) / max_drawn)))
            _draw_boundaries(zx, inside[::zstep], axis, radius)
            what = "all drawn" if zstep == 1 else f"every {_ordinal(zstep)} drawn"
            zx.set_title(f"zoom: boundaries {inside[0].id}-{inside[-1].id}, {what}\n"
                         f"({z0:.1f}-{z1:.1f} mm along the axis)", fontsize=8)
            zx.set_ylim(z0, z1)
            ax.axhspan(z0, z1, xmin=0.0, xmax=0.03, color=LINE["search"], alpha=0.9)
            return fig
    zx.set_axis_off()
    return fig


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


def series_figure(series, period_bands=None):
    """Thickness and tilt against band number, with the annual fit when one was found.

    ``period_bands`` is the estimated annual period in bands; ``None`` (no significant cycle) draws
    the data alone.
    """
    panels = [("thickness_mm", "band thickness, mm")]
    for attr, label in (("inclination_deg", "inclination of growth direction, degrees"),
                        ("sway_deg", "tilt in the sway plane, degrees")):
        if getattr(series, attr, None) is not None:
            panels.append((attr, label))
    x = np.asarray(series.band_number, float)
    hiatus = np.asarray(getattr(series, "hiatus_flags", None) if getattr(series, "hiatus_flags", None)
                        is not None else np.zeros(len(x), bool), bool)
    fig = Figure(figsize=(8.0, 2.3 * len(panels) + 0.6), layout="constrained")
    axes = fig.subplots(len(panels), 1, sharex=True, squeeze=False)[:, 0]
    for ax, (attr, label) in zip(axes, panels):
        y = np.asarray(getattr(series, attr), float)
        ax.plot(x, y, color=LINE["data"], lw=0.7, label="measured")
        if hiatus.any():
            ax.plot(x[hiatus], y[hiatus], "v", color=LINE["hiatus"], ms=4, label="possible hiatus")
        if period_bands and np.isfinite(period_bands) and np.isfinite(y).sum() > 8:
            fitted, amp = sinusoid_fit(x, y, period_bands)
            ax.plot(x, fitted, color=LINE["fit"], lw=1.4,
                    label=f"annual fit, period {period_bands:.1f} bands, amplitude {amp:.3g}")
        ax.set_ylabel(label, fontsize=8)
        ax.legend(fontsize=7, loc="best", framealpha=0.85)
        ax.grid(alpha=0.25)
    axes[-1].set_xlabel("band number (counted from the base)")
    axes[0].set_title("annual fit drawn at the estimated period" if period_bands else
                      "no significant annual cycle: no fit drawn", fontsize=9)
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
    if not spectra:
        return _message_figure("No spectra were saved with this result.")
    fig = Figure(figsize=(8.0, 2.8 * len(spectra) + 0.4), layout="constrained")
    axes = fig.subplots(len(spectra), 1, squeeze=False)[:, 0]
    for ax, (name, spec) in zip(axes, spectra.items()):
        f, p = spec["frequency"], spec["power"]
        pos = f > 0
        if searched is not None and all(np.isfinite(searched)) and min(searched) > 0:
            f_lo, f_hi = 1.0 / max(searched), 1.0 / min(searched)
            ax.axvspan(f_lo, f_hi, color=LINE["search"], alpha=0.18, lw=0,
                       label=f"searched band: {min(searched):.0f}-{max(searched):.0f} bands per cycle")
        ax.plot(*envelope(f[pos], p[pos]), color=LINE["data"], lw=0.8, label="periodogram")
        if spec.get("multitaper") is not None:
            ax.plot(*envelope(f[pos], spec["multitaper"][pos]), color=LINE["reference"], lw=0.8, alpha=0.8,
                    label="multitaper estimate")
        for key, style, text in (("background", ":", "red-noise background"),
                                 ("level95", "--", "95 % red-noise level"),
                                 ("level99", "-.", "99 % red-noise level")):
            if spec.get(key) is not None:
                ax.plot(*envelope(f[pos], spec[key][pos], n_bins=400), ls=style, lw=1.1,
                        color=LINE[key if key != "background" else "background"], label=text)
        if estimate_frequency and np.isfinite(estimate_frequency):
            ax.axvline(estimate_frequency, color=LINE["estimate"], lw=1.0,
                       label=f"annual peak: {1.0 / estimate_frequency:.1f} bands per cycle")
        if np.all(p[pos] > 0):
            ax.set_yscale("log")
        ax.set_xscale("log")
        ax.set_xlim(float(np.min(f[pos])), float(np.max(f)))
        method = f" ({spec['method']})" if spec.get("method") else ""
        ax.set_title(f"{name} series{method}", fontsize=9)
        ax.set_ylabel(f"power, {spec['power_unit']}", fontsize=8)
        ax.set_xlabel("frequency, cycles per band")
        top = ax.secondary_xaxis("top", functions=(lambda v: 1.0 / np.maximum(v, 1e-9),
                                                  lambda v: 1.0 / np.maximum(v, 1e-9)))
        top.set_xlabel("period, bands per cycle", fontsize=8)
        top.tick_params(labelsize=7)
        ax.grid(alpha=0.25)
    handles, labels = {}, []
    for ax in axes:
        for h, lab in zip(*ax.get_legend_handles_labels()):
            if lab not in handles:
                handles[lab] = h
    fig.legend(list(handles.values()), list(handles), loc="outside lower center", ncol=3, fontsize=7,
               frameon=False)
    return fig


def evolutive_figure(evolutive, searched=None):
    """Sliding-window spectra: window centre (band number) × frequency, power as an image (log scales)."""
    from matplotlib.colors import LogNorm

    usable = [ev for ev in evolutive if len(ev["centre"]) >= 3]
    if not usable:
        return _message_figure("Evolutive spectrum: the record holds fewer than three windows of the "
                               "needed length, so persistence through the record is not shown.")
    fig = Figure(figsize=(8.0, 3.4 * len(usable) + 0.4), layout="constrained")
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
        fig.colorbar(img, ax=ax, pad=0.01).set_label(ev.get("label", "power"), fontsize=8)
        if searched is not None and min(searched) > 0:
            for b in searched:
                ax.axhline(1.0 / b, color="white", lw=0.9, ls="--", path_effects=_OUTLINE)
        ax.set_yscale("log")
        ax.set_xlabel("window centre, band number")
        ax.set_ylabel("frequency, cycles per band")
        ax.set_title(f"{ev['name']} series (dashed: limits of the searched band)", fontsize=9)
    return fig


def counts_figure(counts, estimate=None, empty_message="No cycle-by-cycle counts: no significant annual cycle."):
    """Bands counted in each successive annual cycle (a dot per cycle), with the mean and the estimate.

    Dots rather than bars, because the value axis does not start at zero.
    """
    counts = np.asarray([c for c in counts if c is not None], float)
    if counts.size == 0:
        return _message_figure(empty_message)
    fig = Figure(figsize=(8.0, 3.2), layout="constrained")
    ax = fig.add_subplot(1, 1, 1)
    idx = np.arange(1, len(counts) + 1)
    ax.plot(idx, counts, "o-", color=LINE["data"], lw=0.8, ms=5, label="bands in the cycle")
    ax.axhline(np.mean(counts), color=LINE["background"], ls="--", lw=1,
               label=f"mean {np.mean(counts):.1f} bands per cycle")
    if estimate is not None and np.isfinite(estimate):
        ax.axhline(estimate, color=LINE["estimate"], lw=1.3, label=f"estimate {estimate:.1f}")
    ax.set_xlabel("annual cycle number, from the base")
    if len(counts) <= 25:
        ax.set_xticks(idx)
    else:
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    ax.set_xlim(0.5, len(counts) + 0.5)
    ax.set_ylabel("bands per cycle")
    ax.set_title("each count is a minimum: missing days leave no band", fontsize=9)
    ax.legend(fontsize=7, framealpha=0.85, loc="best")
    ax.grid(alpha=0.25)
    return fig
