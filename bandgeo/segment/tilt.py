"""The laminae's own tilt, measured locally: band spacing, tilt field and flattening of the unrolled wall.

A boundary that is a plane tilted against the centreline meets the side wall along a sinusoid of the
azimuth: ``s(theta) = s0 + a cos(theta) + b sin(theta)`` (the lag ``a, b`` in mm is the radius times
the tangent of the tilt). Sway and meander make ``a, b`` change slowly with height, so the tilt is a
field ``a(s), b(s)``:

1. The wall's relief is binned into an image of azimuth columns by height bins (a fraction of a lamina).
2. Each column is band-passed around the band frequency and turned into its analytic signal (phase
   advances by 2 pi per lamina; Gabor 1946, "Theory of communication", J. IEE 93:429-457).
3. The phase difference between neighbouring columns, averaged over a few laminae of height
   (cross-spectrum), is the derivative of the lag around the column; it is summed around the
   circumference (closing the loop) and fitted by ``a cos + b sin`` at every height (least squares).
   Neighbouring columns are close enough that their lag differs by well under half a lamina, so no
   lamina is skipped.
4. Flattening moves every vertex to ``s' = s - lag(theta, s)``; a second pass measures what is left.

After flattening the grooves of a boundary sit at one ``s'`` all around the column, and averaging the
whole wall gives a groove profile whose noise falls with the square root of the vertices of a ring.
"""
from __future__ import annotations

import numpy as np
from scipy.ndimage import gaussian_filter1d


#: A whitened spectral peak must stand this many times above the floor (more when few columns).
PEAK_MIN = 1.1

#: A subharmonic of the strongest peak must stand this high to be taken as the fundamental.
SUBHARMONIC_MIN = 1.6

#: Largest residual tilt (deg) between laminae and the coarse centreline the first pass is built for.
MAX_RESIDUAL_TILT_DEG = 6.0

#: Largest number of azimuth columns, and largest image (columns x bins) before columns are reduced.
MAX_COLUMNS = 1024
MAX_CELLS = 40_000_000

#: Longest band spacing searched, in radii: the relief keeps periods up to about a quarter of the radius
#: (its trend is smoothed over a sixteenth of the radius); a long record would otherwise let a slow
#: modulation of the relief (the annual cycle of 400 laminae) outshine the laminae.
MAX_PERIOD_RADII = 0.25
#: ... but never below this (mm): thick laminae on a thin test column must stay searchable, and a slow
#: modulation (an annual cycle of hundreds of laminae) is longer than this on any column.
MAX_PERIOD_FLOOR_MM = 2.0

#: Least share of neighbouring column pairs with data, for the tilt at a height to count.
MIN_PAIRS = 0.3

#: Near an end of the stretch (heights where the columns hold less than this share of their usual data
#: on average), a pair of columns that end alike also counts: their occupancies within ``END_ALIKE`` of
#: each other (as shares of their usual occupancy) and both at least ``END_LEAST``.
END_ZONE = 0.9
END_ALIKE = 0.1
END_LEAST = 0.3

#: Laminae a record must hold before the band spacing is re-centred on the whole peak (see _strongest).
MIN_LAMINAE_RECENTRE = 400


def column_image(s, theta, values, s0, bin_mm, nb, n_az, weights=None):
    """Sum of ``values`` and counts in (azimuth column, height bin) cells, (n_az, nb) float each."""
    ib = np.floor((s - s0) / bin_mm).astype(np.int64)
    ok = (ib >= 0) & (ib < nb)
    ia = np.minimum(((theta + np.pi) / (2 * np.pi) * n_az).astype(np.int64), n_az - 1)
    key = ia[ok] * nb + ib[ok]
    w = None if weights is None else weights[ok]
    sums = np.bincount(key, values[ok] if w is None else values[ok] * w, minlength=n_az * nb)
    cnt = np.bincount(key, w, minlength=n_az * nb)
    return sums.reshape(n_az, nb), cnt.reshape(n_az, nb).astype(float)


def estimate_spacing(s, theta, relief, sampling_mm, radius_mm):
    """Band spacing (mm) from the averaged periodogram of narrow azimuth columns of the relief.

    Columns about eight sampling intervals wide keep a tilted boundary sharp inside each column; the
    tilt only shifts the phase of each column's periodogram, not its frequency (Bartlett's averaged
    periodogram; common practice). The spectrum is whitened by its running median; the strongest peak
    between four cycles per record and the sampling's Nyquist frequency counts when it stands
    ``PEAK_MIN`` times above the floor, or more when few columns are averaged (the whitened level of
    an average of ``m`` periodograms scatters by about ``1 / sqrt(m)``).

    Returns
    -------
    spacing_mm : float (NaN when no periodic relief stands out), info : dict
    """
    b = 0.5 * sampling_mm
    s0 = float(s.min())
    nb = int(np.ceil((s.max() - s0) / b)) + 1
    n_az = int(np.clip(2 * np.pi * radius_mm / (8.0 * sampling_mm), 8, 512))
    n_az = int(max(1, min(n_az, len(s) / (3.0 * nb))))
    sums, cnt = column_image(s, theta, relief, s0, b, nb, n_az)
    with np.errstate(invalid="ignore", divide="ignore"):
        prof = np.where(cnt > 0, sums / np.maximum(cnt, 1), np.nan)
    # the relief is high-passed at about a sixteenth of the radius (unroll.relief_highpass): longer
    # periods left in it are trend residue or a slow (e.g. annual) modulation, never the laminae
    spacing, ratio, n_rows = _strongest(prof, b, max_period_mm=max(MAX_PERIOD_RADII * radius_mm, MAX_PERIOD_FLOOR_MM))
    need = max(PEAK_MIN, 1.0 + 1.5 / np.sqrt(3.0 * max(n_rows, 1)))
    info = {"method": f"strongest peak of the whitened periodogram of the side-wall relief along the "
                      f"centreline, averaged over {n_az} azimuth columns",
            "columns": n_az, "peak_to_noise": float(ratio), "peak_to_noise_needed": float(need),
            "significant": bool(np.isfinite(spacing) and ratio >= need)}
    return (spacing if info["significant"] else float("nan")), info


def _strongest(prof, b, max_period_mm=np.inf):
    """Strongest peak of the averaged, whitened periodogram of the rows of ``prof`` (NaN = empty).

    Returns (spacing_mm, whitened peak height, rows averaged); the spacing is power-weighted within
    +-20 % of the peak frequency; frequencies from 4 cycles per record (and no longer than
    ``max_period_mm``) to 0.45 / b.
    """
    occ = np.isfinite(prof)
    keep = occ.sum(axis=1) >= 16
    prof, occ = prof[keep], occ[keep]
    if len(prof) == 0:
        return float("nan"), 0.0, 0
    rows = np.where(occ, prof, 0.0)
    rows = np.where(occ, rows - rows.sum(1, keepdims=True) / np.maximum(occ.sum(1, keepdims=True), 1), 0.0)
    nb = rows.shape[1]
    nfft = int(2 ** np.ceil(np.log2(max(nb, 16))))
    pw = np.mean(np.abs(np.fft.rfft(rows * np.hanning(nb)[None, :], nfft, axis=1)) ** 2, axis=0)
    f = np.fft.rfftfreq(nfft, d=b)
    band = (f >= 4.0 / (nb * b)) & (f >= 1.0 / max_period_mm) & (f <= 0.45 / b)
    if band.sum() < 8:
        return float("nan"), 0.0, len(rows)
    floor = _floor(f, pw, band)
    ratio = np.where(band, pw / np.maximum(floor, 1e-300), 0.0)
    ratio = np.convolve(ratio, np.ones(3) / 3.0, mode="same")
    rb = np.where(band, ratio, 0.0)
    k = int(np.argmax(rb))
    # the fundamental: a local maximum near a half, third or quarter of the strongest frequency, at
    # least half as strong, wins (narrow grooves put much power in the harmonics)
    is_max = np.r_[False, (rb[1:-1] >= rb[:-2]) & (rb[1:-1] >= rb[2:]), False]
    for div in (4, 3, 2):  # the lowest subharmonic that stands out is the fundamental
        near = (f > (1.0 - 0.16) / div * f[k]) & (f < (1.0 + 0.16) / div * f[k])
        cand = np.flatnonzero(is_max & (rb >= max(0.5 * rb[k], SUBHARMONIC_MIN)) & near)
        if len(cand):
            k = int(cand[np.argmax(rb[cand])])
            break
    f_pk = f[k]
    sel = band & (f >= 0.8 * f_pk) & (f <= 1.2 * f_pk)
    w = np.maximum(pw[sel] - floor[sel], 0.0)
    f0 = float(np.sum(f[sel] * w) / np.sum(w)) if w.sum() > 0 else float(f_pk)
    # Laminae of varying thickness (an annual cycle) spread the peak: the periodogram's maximum sits at
    # the thick end, since thick laminae fill most of the length, while the spacing wanted is the mean
    # (length over count = the power-weighted mean frequency over the whole peak). Re-centre a window of
    # 0.6-1.6 x the centroid on its centroid until it settles; a narrow peak is a fixed point, and the
    # second harmonic (2 x) stays outside. Excess power over the level of the band away from the peak.
    away = band & ((f < 0.5 * f_pk) | (f > 2.0 * f_pk))
    level = float(np.median(pw[away])) if away.sum() >= 8 else 0.0
    fc = f0
    # only on records long enough to resolve such a spread (a short stretch's peak is as wide as its
    # window's leakage, and its centroid would follow the noise)
    n_iter = 12 if nb * b * f0 >= MIN_LAMINAE_RECENTRE else 0
    for _ in range(n_iter):
        sel = band & (f >= 0.6 * fc) & (f <= 1.6 * fc)
        w = np.maximum(pw[sel] - level, 0.0)
        if w.sum() <= 0:
            break
        new = float(np.sum(f[sel] * w) / np.sum(w))
        if abs(new - fc) < 1e-4 * fc:
            fc = new
            break
        fc = new
    if np.isfinite(fc) and 0.5 * f0 < fc < 2.0 * f0:
        f0 = fc
    return (1.0 / f0 if f0 > 0 else float("nan")), float(ratio[k]), len(rows)


def _floor(f, pw, band, octaves=1.25, q=25.0):
    """Noise floor of an averaged periodogram: a running lower quartile over +-``octaves`` in log frequency.

    Irregular laminae (thickness CV 0.3-0.5, common practice for stromatolite laminae) spread the band
    peak over most of an octave; a running median a sixth of the band wide followed that hump and
    whitened it away, so a subharmonic wiggle could win. A lower quartile over two and a half octaves
    stays under such a hump and still follows a red or rolled-off noise floor.
    """
    from scipy.ndimage import percentile_filter

    inb = np.flatnonzero(band)
    if len(inb) < 8:
        return np.maximum(pw, 1e-300)
    lo, hi = float(f[inb[0]]), float(f[inb[-1]])
    per_oct = 24
    n = max(8, int(np.ceil(np.log2(hi / lo) * per_oct)) + 1)
    grid = lo * 2.0 ** (np.arange(n) / per_oct)
    lp = np.interp(np.log(grid), np.log(np.maximum(f[inb], 1e-300)), np.log(np.maximum(pw[inb], 1e-300)))
    size = int(2 * octaves * per_oct) | 1
    fl = percentile_filter(lp, q, size=size, mode="nearest")
    out = np.full_like(pw, np.inf)
    out[inb] = np.exp(np.interp(np.log(f[inb]), np.log(grid), fl))
    return out


def _analytic(sums, cnt, f0, bin_mm):
    """Band-passed analytic signal of each row (complex64), band 0.55-1.8 x f0 with cosine tapers."""
    n_az, nb = sums.shape
    with np.errstate(invalid="ignore", divide="ignore"):
        img = np.where(cnt > 0, sums / np.maximum(cnt, 1e-12), 0.0)
    # rows centred by their own mean where populated; empty cells stay 0 (no signal)
    occ = cnt > 0
    mean = (img * occ).sum(axis=1, keepdims=True) / np.maximum(occ.sum(axis=1, keepdims=True), 1)
    img = np.where(occ, img - mean, 0.0)
    nfft = int(2 ** np.ceil(np.log2(nb + 16)))
    f = np.fft.rfftfreq(nfft, d=bin_mm)
    x = f / f0
    h = np.zeros_like(f)
    h[(x >= 0.7) & (x <= 1.45)] = 1.0
    lo = (x > 0.5) & (x < 0.7)
    h[lo] = 0.5 - 0.5 * np.cos(np.pi * (x[lo] - 0.5) / 0.2)
    hi = (x > 1.45) & (x < 1.9)
    h[hi] = 0.5 + 0.5 * np.cos(np.pi * (x[hi] - 1.45) / 0.45)
    spec = np.fft.rfft(img.astype(np.float32), nfft, axis=1) * (2.0 * h)[None, :]
    full = np.zeros((n_az, nfft), dtype=np.complex64)
    full[:, : len(f)] = spec
    z = np.fft.ifft(full, axis=1)[:, :nb].astype(np.complex64)
    return z


def tilt_pass(s, theta, relief, spacing_mm, bin_mm, n_az, smooth_mm):
    """One pass of the tilt field: lag ``a(s) cos(theta) + b(s) sin(theta)`` (mm) on a height grid.

    Returns
    -------
    grid_mm : (q,) float, a_mm : (q,) float, b_mm : (q,) float, amplitude : (q,) float
        Grid heights and the lag coefficients; ``amplitude`` is the coherent band signal (0 where no
        data), used to judge where the field is reliable.
    """
    s0 = float(s.min()) - 2 * bin_mm
    nb = int(np.ceil((s.max() - s0) / bin_mm)) + 3
    sums, cnt = column_image(s, theta, relief, s0, bin_mm, nb, n_az)
    z = _analytic(sums, cnt, 1.0 / spacing_mm, bin_mm)
    sig = max(smooth_mm / bin_mm, 1.0)
    # cross-spectrum of neighbouring columns (cyclic), averaged along the height
    c = np.roll(z, -1, axis=0) * np.conj(z)
    c = gaussian_filter1d(c.real, sig, axis=1) + 1j * gaussian_filter1d(c.imag, sig, axis=1)
    delta = np.angle(c)  # = -2 pi f (lag_{j+1} - lag_j)
    amp = gaussian_filter1d(np.abs(z), sig, axis=1)  # (n_az, nb)
    th = -np.pi + (np.arange(n_az) + 0.5) * 2 * np.pi / n_az
    # Least squares on the differences themselves: delta_j = alpha (cos th_{j+1} - cos th_j)
    # + beta (sin th_{j+1} - sin th_j), weighted by the coherent amplitude of the pair. Each pair's
    # phase error stays its own; summing the differences around the column first (then fitting) let
    # the errors add up as a random walk, which swung the tilt by a lamina on noisy, irregular walls.
    D = np.stack([np.roll(np.cos(th), -1) - np.cos(th), np.roll(np.sin(th), -1) - np.sin(th)], axis=1)
    # A column that ends (an oblique cut, a hole) rings on for about a lamina after its last data, at
    # a phase set by where it ends: an end cut across the laminae would read as a tilt. Only pairs
    # with data all through the band filter's reach (a lamina and a half either side) count.
    # (relative to the column's usual occupancy: a coarse mesh leaves many cells empty everywhere)
    occ = gaussian_filter1d((cnt > 0).astype(np.float32), 1.5 * spacing_mm / bin_mm, axis=1)
    typical = np.array([np.median(o[o > 0.05]) if np.any(o > 0.05) else 1.0 for o in occ])
    full = occ > 0.85 * typical[:, None]
    pair_ok = full & np.roll(full, -1, axis=0)
    # ... except near an end, where two neighbouring columns that end alike ring alike: their phase
    # difference still reads the tilt. (An end cut square to the laminae leaves every column partial
    # for a lamina and a half; with full pairs only, the tilt there was carried over from two laminae
    # in, and on a sharply bending column the boundary next to the cut smeared out of the profile:
    # synthetic atlas cells, stubby 2.4 mm stretches, lost it in 11 of 16 cells, 2 of 16 with this rule.)
    rel = occ / typical[:, None]
    rel_next = np.roll(rel, -1, axis=0)
    alike = (np.abs(rel - rel_next) <= END_ALIKE) & (np.minimum(rel, rel_next) >= END_LEAST)
    end_zone = np.minimum(rel, 1.0).mean(axis=0) < END_ZONE
    pair_ok |= alike & end_zone[None, :]
    w = (np.abs(c) + 1e-12) * pair_ok
    M = np.einsum("jn,ja,jb->nab", w, D, D)
    rhs = np.einsum("jn,ja,jn->na", w, D, delta)
    coef = np.linalg.solve(M + 1e-9 * np.eye(2)[None], rhs[..., None])[..., 0]  # (nb, 2)
    # local band frequency: phase advance per bin of the mean analytic signal, smoothed
    adv = gaussian_filter1d((z[:, 1:] * np.conj(z[:, :-1])).sum(axis=0).real, sig) + \
        1j * gaussian_filter1d((z[:, 1:] * np.conj(z[:, :-1])).sum(axis=0).imag, sig)
    f_loc = np.angle(np.r_[adv, adv[-1:]]) / (2 * np.pi * bin_mm)
    f0 = 1.0 / spacing_mm
    f_loc = np.clip(np.where(np.isfinite(f_loc), f_loc, f0), 0.5 * f0, 2.0 * f0)
    lag_a = -coef[:, 0] / (2 * np.pi * f_loc)
    lag_b = -coef[:, 1] / (2 * np.pi * f_loc)
    grid = s0 + (np.arange(nb) + 0.5) * bin_mm
    amplitude = amp.mean(axis=0)
    # heights where fewer than MIN_PAIRS of the neighbour pairs are usable (the ends, a big hole) have no
    # reliable tilt: a fit to a few pairs on one side of the column is ill-conditioned
    pairs = pair_ok.mean(axis=0)
    amplitude = np.where(pairs >= MIN_PAIRS, amplitude, 0.0)
    return grid, lag_a, lag_b, amplitude


def n_columns(radius_mm, spacing_mm, n_vertices, length_mm):
    """Azimuth columns for the tilt field and the smoothing along the height (mm).

    Neighbouring columns must differ by well under half a lamina at the largest expected residual tilt
    (``MAX_RESIDUAL_TILT_DEG``), and each column must hold at least about one vertex per ring; the
    smoothing along the height then spans enough laminae (2 to 10) that each column averages about 60
    vertices per smoothing sigma.

    Returns
    -------
    n_az : int, needed : int, smooth_mm : float
    """
    need = 2 * np.pi * radius_mm * np.tan(np.radians(MAX_RESIDUAL_TILT_DEG)) / (0.3 * spacing_mm)
    per_lamina = n_vertices * spacing_mm / max(length_mm, 1e-9)  # vertices in one lamina's height
    per_ring = per_lamina / 4.0  # about four rows of samples per lamina at the finest useful sampling
    n_az = int(np.clip(min(need, max(per_ring, 16)), 16, MAX_COLUMNS))
    per_col = per_lamina / n_az
    smooth = spacing_mm * float(np.clip(60.0 / max(per_col, 1e-9), 2.0, 10.0))
    return n_az, int(np.ceil(need)), smooth


def flatten(wall, spacing_mm, sampling_mm, passes=3):
    """Flattened heights ``s'`` of the wall vertices (boundaries level all around) and the tilt field.

    Passes stop once the lag a pass removes is below 5 % of a lamina (rms).

    Returns
    -------
    s_flat : (m,) float
    info : dict
        Per pass: columns, columns needed, smoothing (mm), rms lag removed (mm); the bin size; the
        median and largest residual tilt against the coarse centreline (deg).
    """
    bin_mm = min(spacing_mm / 8.0, 0.5 * sampling_mm)
    s_flat = wall.s.copy()
    info = {"bin_mm": float(bin_mm), "passes": []}
    cos_t, sin_t = np.cos(wall.theta), np.sin(wall.theta)
    for k in range(passes):
        n_az, need, smooth_mm = n_columns(wall.radius_mm, spacing_mm, len(s_flat), wall.length_mm)
        nb = wall.length_mm / bin_mm
        if n_az * nb > MAX_CELLS:
            n_az = max(16, int(MAX_CELLS / nb))
        grid, a, b, amp = tilt_pass(s_flat, wall.theta, wall.relief, spacing_mm, bin_mm, n_az, smooth_mm)
        good = amp > 0.2 * np.median(amp[amp > 0]) if np.any(amp > 0) else amp > 0
        if good.sum() < 2:
            break
        a_v = np.interp(s_flat, grid[good], a[good])
        b_v = np.interp(s_flat, grid[good], b[good])
        lag = a_v * cos_t + b_v * sin_t
        s_flat = s_flat - lag
        rms = float(np.sqrt(np.mean(lag * lag)))
        info["passes"].append({"columns": int(n_az), "columns_needed": int(need), "smooth_mm": float(smooth_mm),
                               "rms_lag_mm": rms})
        if rms < 0.05 * spacing_mm:
            break
    # total tilt field relative to the coarse centreline, on a coarse grid (for the record)
    lag_tot = wall.s - s_flat
    A = np.stack([cos_t, sin_t], axis=1)
    step = max(wall.length_mm / 200.0, spacing_mm)
    gi = np.floor((wall.s - wall.s.min()) / step).astype(np.int64)
    ng = int(gi.max()) + 1
    M = np.zeros((ng, 2, 2))
    rhs = np.zeros((ng, 2))
    for p in range(2):
        rhs[:, p] = np.bincount(gi, A[:, p] * lag_tot, minlength=ng)
        for q in range(2):
            M[:, p, q] = np.bincount(gi, A[:, p] * A[:, q], minlength=ng)
    coef = np.linalg.solve(M + 1e-9 * np.eye(2)[None], rhs[..., None])[..., 0]
    tilt = np.degrees(np.arctan(np.hypot(coef[:, 0], coef[:, 1]) / max(wall.radius_mm, 1e-9)))
    info["residual_tilt_deg_median"] = float(np.median(tilt))
    info["residual_tilt_deg_max"] = float(np.max(tilt))
    return s_flat, info
