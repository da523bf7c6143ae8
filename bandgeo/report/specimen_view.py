"""Figure 1 of the report: the specimen and its bands, at scales a reader can use.

The column is *straightened* along its centreline (height along the axis runs horizontally) and seen
from the side, with the viewer looking across the sway plane so that the sway shows as a left-right
swing. Three panels:

* the whole column, cut into a few strips read like lines of text (base at the top left), each vertex
  coloured by its band and shaded by how squarely it faces the viewer; a box marks the close view;
* a close view of about two dozen bands, drawn triangle by triangle, with band numbers;
* the same stretch unrolled: azimuth measured from the sway plane (vertical) against height
  (horizontal), relief as an image, and each boundary marked by ticks on both edges.

Everything is drawn from in-memory arrays; the whole view uses at most ``MAX_POINTS`` vertices and the
close view only the triangles of its stretch, so the cost barely grows with the mesh size.
"""
from __future__ import annotations

import numpy as np
from scipy import ndimage

from .palette import IMAGE_CMAP, UNASSIGNED_RGB, band_colors
from .unroll import relief_image, unroll_vertices

MAX_POINTS = 250_000
CLOSE_BANDS = 40
MAX_CLOSE_TRIANGLES = 8000


def _cached_unroll(vertices: np.ndarray, axis):
    """The unrolled coordinates of every vertex when an earlier stage already computed them for these
    very objects (the series stage does, through :func:`bandgeo.unroll.unroll`'s cache), else None.

    Looking is free; computing the whole mesh here would cost more than the subsample the figure needs.
    """
    from .. import unroll as _unroll_mod

    for entry in list(getattr(_unroll_mod, "_cache", ())):
        try:
            if entry[0] is vertices and entry[1] is axis:
                return entry[2]
        except (IndexError, TypeError):
            return None
    return None


def _straight_axis_s(vertices: np.ndarray, axis) -> np.ndarray:
    """Cheap height along the chord from the axis' first to last point (for choosing vertices)."""
    pts = np.asarray(axis.points_mm, float)
    d = pts[-1] - pts[0]
    length = float(np.linalg.norm(d)) or 1.0
    return (vertices - pts[0]) @ (d / length) + float(np.asarray(axis.heights_mm, float)[0])


def _side_coords(az_deg, r, view_az_deg):
    rel = np.radians(az_deg - view_az_deg)
    return r * np.sin(rel), r * np.cos(rel)          # lateral (to the viewer's right), depth (toward viewer)


def close_window(boundaries, n_bands: int = CLOSE_BANDS, s_range=None):
    """(s0, s1, first band, last band): a stretch of ``n_bands`` bands in the middle of the record."""
    heights = np.array(sorted(float(b.height_mm) for b in boundaries))
    if len(heights) < 3:
        if s_range is None:
            return None
        mid = 0.5 * (s_range[0] + s_range[1])
        half = 0.05 * (s_range[1] - s_range[0])
        return mid - half, mid + half, None, None
    k = min(n_bands, len(heights) - 1)
    i0 = max((len(heights) - k) // 2, 0)
    i1 = i0 + k
    pad = 0.5 * float(np.median(np.diff(heights)))
    return heights[i0] - pad, heights[i1] + pad, i0, i1


def _rasterise(s, lat, depth, colour, s0, s1, half_width, px_mm, radius_s):
    """Z-buffered point image of one strip, gaps filled from the nearest drawn pixel inside the outline."""
    w = max(int(np.ceil((s1 - s0) / px_mm)), 2)
    h = max(int(np.ceil(2 * half_width / px_mm)), 2)
    col = np.clip(((s - s0) / px_mm).astype(np.int64), 0, w - 1)
    row = np.clip(((half_width - lat) / px_mm).astype(np.int64), 0, h - 1)
    flat = row * w + col
    order = np.lexsort((-depth, flat))               # per pixel, the nearest point first
    first = np.r_[True, flat[order][1:] != flat[order][:-1]]
    pick = order[first]
    img = np.full((h * w, 3), np.nan)
    img[flat[pick]] = colour[pick]
    img = img.reshape(h, w, 3)
    have = np.isfinite(img[..., 0])
    # outline: at each height, within the largest radius seen there
    centres = s0 + (np.arange(w) + 0.5) * px_mm
    rad = np.interp(centres, radius_s[0], radius_s[1])
    ys = half_width - (np.arange(h) + 0.5) * px_mm
    inside = np.abs(ys)[:, None] <= rad[None, :]
    if have.any():
        _, (ri, ci) = ndimage.distance_transform_edt(~have, return_indices=True)
        filled = img[ri, ci]
        img = np.where(inside[..., None], filled, np.nan)
    out = np.ones((h, w, 4))
    ok = np.isfinite(img[..., 0])
    out[..., :3][ok] = img[ok]
    out[..., 3] = np.where(ok, 1.0, 0.0)
    return out


def specimen_figure(vertices_mm, faces, vertex_band, axis, boundaries, view_azimuth_deg=0.0,
                    sway_azimuth_deg=None, north_known=True, seed=0, width_in=7.2):
    """The specimen-and-bands figure (see the module docstring). Returns a matplotlib Figure."""
    from matplotlib.collections import PolyCollection
    from matplotlib.figure import Figure
    from matplotlib.patches import Rectangle

    v = np.asarray(vertices_mm, float)
    vb = np.asarray(vertex_band)
    rng = np.random.default_rng(seed)
    pick = np.sort(rng.choice(len(v), MAX_POINTS, replace=False)) if len(v) > MAX_POINTS else np.arange(len(v))
    whole = _cached_unroll(vertices_mm, axis)        # unrolled once per mesh and axis, by the series stage
    if whole is not None and len(whole.s_mm) == len(v):
        s, az, r = whole.s_mm[pick], whole.azimuth_deg[pick], whole.radius_mm[pick]
    else:
        whole = None
        s, az, r = unroll_vertices(v[pick], axis)
    radius = float(np.median(r))
    side = r > 0.5 * radius
    lat, depth = _side_coords(az, r, view_azimuth_deg)
    front = side & (depth > 0)
    shade = 0.45 + 0.55 * np.clip(depth / np.maximum(r, 1e-9), 0, 1)
    # Whole view: colour runs with band number (cividis, as in the plan-view figure), and alternate bands
    # are a little darker, so the banding shows as texture without a seven-colour speckle at this scale.
    from matplotlib import colormaps

    bands_p = vb[pick].astype(np.int64)
    top_band = max(int(bands_p.max()), 1)
    rgb = colormaps[IMAGE_CMAP](np.clip(bands_p, 0, None) / top_band)[:, :3]
    rgb = rgb * np.where(bands_p % 2 == 1, 0.82, 1.0)[:, None]
    rgb[bands_p < 0] = UNASSIGNED_RGB / 255.0
    rgb = rgb * shade[:, None]
    s_lo, s_hi = float(np.percentile(s, 0.01)), float(np.percentile(s, 99.99))
    length = max(s_hi - s_lo, 1e-6)
    half_width = float(np.percentile(r[side], 99.5)) * 1.05
    # strips of about 10 column widths each, at most 4
    n_strips = int(np.clip(np.ceil(length / (20 * half_width)), 1, 4))
    strip = length / n_strips
    px = strip / 900.0                      # about 1.5 image pixels per output pixel at 110 dpi
    # largest radius per height bin, for the outline
    nb = max(int(length / max(px * 4, 1e-6)), 10)
    bins = np.clip(((s[side] - s_lo) / length * nb).astype(int), 0, nb - 1)
    rmax = np.zeros(nb)
    np.maximum.at(rmax, bins, r[side])
    rmax = ndimage.maximum_filter1d(rmax, 3)
    radius_s = (s_lo + (np.arange(nb) + 0.5) * length / nb, rmax)

    window = close_window(boundaries, s_range=(s_lo, s_hi))
    left_in, right_in = 0.75, 0.75
    ax_w = width_in - left_in - right_in
    strip_h = 2 * half_width / strip * ax_w
    close_h = 1.6
    if window is not None and window[1] > window[0]:
        close_h = ax_w * 2 * min(half_width, (window[1] - window[0]) / 7.0) / (window[1] - window[0])
    # panels from the top, in inches: (height, space above it for a title and the previous x labels)
    plan = [(strip_h, 0.45 if k == 0 else 0.3) for k in range(n_strips)] + [(close_h, 0.95), (1.35, 0.65)]
    total = sum(h + g for h, g in plan) + 0.5
    fig = Figure(figsize=(width_in, total))
    rects, y = [], total
    for h, g in plan:
        y -= g + h
        rects.append((left_in / width_in, y / total, ax_w / width_in, h / total))
    side_word = "east" if north_known else "+x"
    for k in range(n_strips):
        a0, a1 = s_lo + k * strip, s_lo + (k + 1) * strip
        sel = front & (s >= a0) & (s < a1)
        img = _rasterise(s[sel], lat[sel], depth[sel], rgb[sel], a0, a1, half_width, px, radius_s)
        ax = fig.add_axes(rects[k])
        ax.imshow(img, extent=(a0, a1, -half_width, half_width), interpolation="nearest", aspect="auto",
                  rasterized=True)
        ax.set_xlim(a0, a1)
        ax.set_ylim(-half_width, half_width)
        ax.tick_params(labelsize=7)
        ax.set_yticks([])
        if window is not None and window[1] > a0 and window[0] < a1:
            ax.add_patch(Rectangle((window[0], -half_width * 0.98), window[1] - window[0], 1.96 * half_width,
                                   fill=False, ec="black", lw=1.2))
        if k == 0:
            ax.set_title(f"whole column straightened along its axis ({n_strips} strip{'s' if n_strips > 1 else ''}, "
                         f"base at top left), coloured from the lowest band (dark blue) to the top (yellow);\n"
                         f"alternate bands darker; the box marks the close view", fontsize=8)
        if k == n_strips - 1:
            ax.set_xlabel("height along the column axis, mm", fontsize=8)

    # close view, triangle by triangle
    axc = fig.add_axes(rects[n_strips])
    axu = fig.add_axes(rects[n_strips + 1])
    if window is None:                                # nothing to magnify: no empty panels either
        axc.set_visible(False)
        axu.set_visible(False)
        return fig
    w0, w1, b0, b1 = window
    f = np.asarray(faces)
    sv = _straight_axis_s(v, axis)
    margin = 0.3 * radius + 0.5 * (w1 - w0)          # chord height vs arc length on a curved axis
    near = np.flatnonzero((sv > w0 - margin) & (sv < w1 + margin))
    if whole is not None:
        vs, vaz, vr = whole.s_mm[near], whole.azimuth_deg[near], whole.radius_mm[near]
    else:
        vs, vaz, vr = unroll_vertices(v[near], axis)
    full_s = np.full(len(v), np.nan)
    full_s[near] = vs
    # faces with all three corners near the window: first those whose first corner is (one gather of
    # the first column instead of all three over every face), then the other two on those few
    is_near = np.zeros(len(v), bool)
    is_near[near] = True
    cand = f[is_near[f[:, 0]]]
    fsel = cand[is_near[cand[:, 1]] & is_near[cand[:, 2]]]
    fs = full_s[fsel]
    keep = (fs.max(1) > w0) & (fs.min(1) < w1)
    fsel, fs = fsel[keep], fs[keep]
    idx = np.searchsorted(near, fsel)
    vlat, vdep = _side_coords(vaz, vr, view_azimuth_deg)
    tri = np.stack([vs[idx], vlat[idx]], axis=-1)                     # (k, 3, 2)
    tri3 = np.stack([vs[idx], vlat[idx], vdep[idx]], axis=-1)
    nrm = np.cross(tri3[:, 1] - tri3[:, 0], tri3[:, 2] - tri3[:, 0])
    nn = np.linalg.norm(nrm, axis=1)
    facing = np.abs(nrm[:, 2]) / np.maximum(nn, 1e-12)
    fdepth = vdep[idx].mean(1)
    vis = (fdepth > 0) & (vr[idx].min(1) > 0.5 * radius)
    order = np.argsort(fdepth[vis])                                   # far first
    fb = vb[fsel[vis]]
    band = np.where((fb[:, 1] == fb[:, 2]), fb[:, 1], fb[:, 0])[order]
    col = band_colors(band).astype(float) / 255.0 * (0.35 + 0.65 * facing[vis][order])[:, None]
    across = min(half_width, (w1 - w0) / 7.0)
    if vis.sum() <= MAX_CLOSE_TRIANGLES:
        pc = PolyCollection(tri[vis][order], facecolors=np.clip(col, 0, 1), edgecolors="face", linewidths=0.15,
                            antialiased=False, rasterized=True)
        axc.add_collection(pc)
    else:
        # a dense mesh: its vertices alone cover the picture, so draw them as points (z-buffered)
        keep = (vs > w0) & (vs < w1) & (vdep > 0) & (np.abs(vlat) < across * 1.05) & (vr > 0.5 * radius)
        shade_c = 0.35 + 0.65 * np.clip(vdep[keep] / np.maximum(vr[keep], 1e-9), 0, 1)
        colour = band_colors(vb[near[keep]]).astype(float) / 255.0 * shade_c[:, None]
        img = _rasterise(vs[keep], vlat[keep], vdep[keep], colour, w0, w1, across, (w1 - w0) / 1000.0,
                         (np.array([w0, w1]), np.array([across, across]) * 2))
        axc.imshow(img, extent=(w0, w1, -across, across), interpolation="nearest", aspect="auto", rasterized=True)
    axc.set_xlim(w0, w1)
    axc.set_ylim(-across, across)
    axc.set_aspect("equal", adjustable="box")
    axc.set_xlabel("height along the column axis, mm", fontsize=8)
    axc.set_ylabel("across, mm", fontsize=8)
    axc.tick_params(labelsize=7)
    hb = sorted((float(b.height_mm), i) for i, b in enumerate(sorted(boundaries, key=lambda b: b.height_mm)))
    mids = [(hb[i][0] + hb[i + 1][0]) / 2 for i in range(len(hb) - 1)]
    top = axc.secondary_xaxis("top")
    ticks = [(m, i) for i, m in enumerate(mids) if w0 < m < w1]
    step = max(len(ticks) // 8, 1)
    top.set_xticks([m for m, _ in ticks][::step], labels=[str(i) for _, i in ticks][::step])
    top.tick_params(labelsize=7)
    top.set_xlabel("band number (0 = lowest band)", fontsize=8)
    what = "" if b0 is None else f" (bands {b0}-{b1 - 1})"
    axc.set_title(f"close view{what}: the middle of the face seen across the sway plane", fontsize=8.5)

    # the same stretch unrolled, azimuth from the sway plane
    ref = float(sway_azimuth_deg) if sway_azimuth_deg is not None else 0.0
    inwin = (vs > w0) & (vs < w1) & (vr > 0.5 * radius)
    if inwin.sum() > 50:
        rel = (vaz[inwin] - ref) % 360.0                 # 0..360 from the sway direction
        spacing = float(np.median(np.diff([h for h, _ in hb]))) if len(hb) > 2 else (w1 - w0) / 20
        n_s = int(np.clip((w1 - w0) / max(spacing / 6.0, 1e-6), 40, 600))
        n_az = int(np.clip(inwin.sum() / (4.0 * n_s), 12, 72))
        image, s_edges, az_edges = relief_image(vs[inwin], rel, vr[inwin], n_az=n_az, n_s=n_s,
                                                smooth_mm=(w1 - w0) / 4.0)
        az_edges = az_edges - 180.0
        image = np.roll(image, image.shape[1] // 2, axis=1)  # centre on the sway direction
        finite = image[np.isfinite(image)]
        lim = float(np.percentile(np.abs(finite), 98)) if finite.size else 1.0
        m = axu.pcolormesh(s_edges, az_edges, np.ma.masked_invalid(image.T), cmap=IMAGE_CMAP, vmin=-lim,
                           vmax=lim, shading="flat", rasterized=True)
        r = rects[n_strips + 1]
        cax = fig.add_axes((r[0] + r[2] + 0.01, r[1], 0.015, r[3]))
        cb = fig.colorbar(m, cax=cax)
        cb.set_label("relief, mm", fontsize=7)
        cb.ax.tick_params(labelsize=6)
        ticks_h = [h for h, _ in hb if w0 < h < w1]
        for y0, y1 in ((-200, -180), (180, 200)):          # one collection per edge, not a line per tick
            axu.vlines(ticks_h, y0, y1, color="black", lw=0.9, clip_on=False)
        axu.set_xlim(w0, w1)
        axu.set_ylim(-180, 180)
        axu.set_yticks([-180, -90, 0, 90, 180])
        axu.set_xlabel("height along the column axis, mm", fontsize=8)
        axu.set_ylabel("azimuth from the\nsway plane, degrees", fontsize=8)
        axu.tick_params(labelsize=7)
        axu.set_title("the same stretch unrolled: relief = radius minus its smooth trend; "
                      "ticks outside the edges: boundaries", fontsize=8.5, pad=9)
    else:
        axu.set_visible(False)
    return fig
