"""Resolution honesty: can this scan resolve these bands? Sampling along the axis, noise and relief.

- A band thinner than ``MIN_SAMPLES`` sampling intervals along the growth direction cannot be measured
  reliably (a band needs a groove sample and flank samples on each side; about three per band is the
  Nyquist-like limit, common practice). The sampling interval is measured along the axis, not as a
  median edge length, because ring-structured meshes have long edges around and short ones along.
- A groove shallower than the scanner noise cannot be told from noise vertex by vertex.
Affected stretches are flagged ``[s0_mm, s1_mm, reason]`` and a warning is added.
"""
from __future__ import annotations

import numpy as np

MIN_SAMPLES = 3.0


def _stretches(lo, hi, bad, reason):
    out = []
    i = 0
    while i < len(bad):
        if bad[i]:
            j = i
            while j + 1 < len(bad) and bad[j + 1]:
                j += 1
            out.append([float(lo[i]), float(hi[j]), reason])
            i = j + 1
        else:
            i += 1
    return out


def band_relief(sw, rw, angle, heights, n_sectors=24):
    """Per-band groove relief (mm) and mid-band noise (mm) from the radius of the side wall.

    Relief of band k: mean radius in the middle of the band (phase 0.3-0.7) minus mean radius next to
    its boundaries (phase < 0.1 or > 0.9), per angular sector, averaged. Noise: rms scatter of the
    mid-band radius about its sector mean.
    """
    r = np.linalg.norm(rw, axis=1)
    nb = len(heights) - 1
    if nb < 1:
        return np.zeros(0), float("nan")
    k = np.searchsorted(heights, sw, side="right") - 1
    inside = (k >= 0) & (k < nb)
    k, ss, rr, aa = k[inside], sw[inside], r[inside], angle[inside]
    phase = (ss - heights[k]) / (heights[k + 1] - heights[k])
    sec = np.minimum(((aa + np.pi) / (2 * np.pi) * n_sectors).astype(np.int64), n_sectors - 1)
    key = k * n_sectors + sec
    m = nb * n_sectors
    mid = (phase > 0.3) & (phase < 0.7)
    edge = (phase < 0.1) | (phase > 0.9)
    cm = np.bincount(key[mid], minlength=m)
    ce = np.bincount(key[edge], minlength=m)
    sm = np.bincount(key[mid], rr[mid], minlength=m) / np.maximum(cm, 1)
    se = np.bincount(key[edge], rr[edge], minlength=m) / np.maximum(ce, 1)
    both = (cm > 0) & (ce > 0)
    d = np.where(both, sm - se, np.nan).reshape(nb, n_sectors)
    fin = np.isfinite(d)
    cnt = fin.sum(axis=1)
    relief = np.where(cnt > 0, np.where(fin, d, 0.0).sum(axis=1) / np.maximum(cnt, 1), np.nan)
    # noise: scatter of the mid-band radius about its (band, sector) mean, minus one degree of freedom
    dev = rr[mid] - sm[key[mid]]
    dof = np.maximum(cm[key[mid]], 2)
    noise = float(np.sqrt(np.mean(dev * dev * dof / (dof - 1)))) if mid.any() else float("nan")
    return relief, noise


def assess(sw, rw, angle, boundaries, features, spacing, samp, gaps, warnings):
    """Resolution figures and flagged stretches (appends warnings). Returns the ``resolution`` dict."""
    heights = np.array([b.height_mm for b in boundaries], dtype=float)
    flagged = [list(g) for g in gaps]
    res = {"sampling_along_mm": float(samp), "band_spacing_mm": float(spacing),
           "spacing_to_sampling": float(spacing / samp) if samp > 0 else float("nan"),
           "noise_mm": float(features.noise_mm), "noise_method": "one-ring normal residual (features)",
           "relief_mm": float("nan"), "relief_to_noise": float("nan"), "flagged": flagged,
           "min_samples_per_band": MIN_SAMPLES}
    if np.isfinite(res["spacing_to_sampling"]) and res["spacing_to_sampling"] < MIN_SAMPLES:
        warnings.append(f"the band spacing {spacing:.4f} mm is below {MIN_SAMPLES:g} x the sampling interval "
                        f"along the growth axis ({samp:.4f} mm); bands are at the resolution limit of the scan")
    if len(heights) >= 2:
        relief, noise = band_relief(sw, rw, angle, heights)
        if np.isfinite(noise):
            res["noise_mm"], res["noise_method"] = noise, "mid-band radius scatter"
        if np.isfinite(relief).any():
            res["relief_mm"] = float(np.nanmedian(relief))
            res["relief_to_noise"] = float(res["relief_mm"] / res["noise_mm"]) if res["noise_mm"] > 0 else float("inf")
        thick = np.diff(heights)
        thin = thick < MIN_SAMPLES * samp
        flagged += _stretches(heights[:-1], heights[1:], thin,
                              f"bands thinner than {MIN_SAMPLES:g} x the sampling interval along the axis")
        if thin.any():
            warnings.append(f"{int(thin.sum())} of {len(thick)} bands are thinner than {MIN_SAMPLES:g} x the "
                            f"sampling interval along the axis ({samp:.4f} mm); their stretches are flagged")
        faint = np.isfinite(relief) & (relief < res["noise_mm"])
        flagged += _stretches(heights[:-1], heights[1:], faint, "groove relief below scanner noise")
        if faint.any() and faint.mean() < 1.0:
            warnings.append(f"{int(faint.sum())} of {len(thick)} bands have groove relief below the scanner "
                            f"noise ({res['noise_mm']:.4f} mm); their stretches are flagged")
    if gaps:
        warnings.append(f"{len(gaps)} gap(s) wider than the local spacing allows may hide missed boundaries; "
                        f"flagged for review")
    return res
