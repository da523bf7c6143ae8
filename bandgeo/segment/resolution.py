"""Resolution honesty: can this scan resolve these bands? Sampling, noise and relief in each boundary's frame.

Rules (figures from the accuracy atlas, ``benchmarks/accuracy_atlas.py``, and docs/segmentation.md):

- A lamina spanning fewer than ``MIN_SAMPLES_COUNT`` (2) sampling intervals along the growth direction
  is not counted at all: the scan is too coarse, and the result says so with the scan that would
  resolve it. Between 2 and ``MIN_SAMPLES`` (3) intervals a count is given with a warning (a band needs
  a groove sample and a flank sample on each side; about three per band is the Nyquist-like limit,
  common practice).
- Relief and noise are measured in each boundary's own frame: the relief of the side wall against the
  distance to the boundary's fitted plane, groove (within a tenth of a lamina) against flanks (0.25-0.45
  of a lamina away); the noise is the scatter of single vertices about that mean profile.
- A boundary is resolved when its groove stands out of the profile noise (the per-vertex noise over
  the square root of the groove's vertex count) by ``MIN_GROOVE_Z``; when most do not, nothing is
  counted. A per-vertex relief below ``WARN_RELIEF_TO_NOISE`` (1) x the noise gives a warning.
Affected stretches are flagged ``[s0_mm, s1_mm, reason]``.
"""
from __future__ import annotations

import numpy as np

MIN_SAMPLES = 3.0
MIN_SAMPLES_COUNT = 2.0
WARN_RELIEF_TO_NOISE = 1.0
MIN_GROOVE_Z = 4.0
#: Below this groove z-score in its own frame a traced boundary is dropped (repair rule R5).
MIN_KEEP_Z = 2.0

#: Relief-to-noise ratio (per vertex) the resolvable-lamina rule asks for (the atlas refuses or warns
#: at 1, and counts right at 2.5; docs/segmentation.md).
RULE_RELIEF_TO_NOISE = 2.0

#: Typical groove relief as a fraction of the lamina (real columns: 0.1-0.4, common practice).
TYPICAL_RELIEF_FRACTION = 0.2


def resolvable_lamina_mm(edge_mm: float, noise_mm: float, relief_fraction: float = TYPICAL_RELIEF_FRACTION) -> dict:
    """Finest lamina thickness a scan can count, mm, and which rule sets it.

    Parameters
    ----------
    edge_mm : float
        Sampling interval along the growth direction (the median edge length of a near-isotropic mesh).
    noise_mm : float
        Scanner noise, rms, mm.
    relief_fraction : float
        Groove relief as a fraction of the lamina (default 0.2).

    Returns
    -------
    dict with ``lamina_mm`` (the larger of the two limits), ``sampling_limit_mm`` (``MIN_SAMPLES`` edge
    lengths), ``noise_limit_mm`` (relief of ``RULE_RELIEF_TO_NOISE`` x the noise), ``binding``
    ('sampling' or 'noise'), ``rule`` (one sentence).
    """
    edge = float(edge_mm)
    noise = float(noise_mm) if np.isfinite(noise_mm) and noise_mm > 0 else 0.0
    samp_lim = MIN_SAMPLES * edge
    noise_lim = RULE_RELIEF_TO_NOISE * noise / max(float(relief_fraction), 1e-9)
    lam = max(samp_lim, noise_lim)
    binding = "sampling" if samp_lim >= noise_lim else "noise"
    rule = (f"laminae down to {1000 * lam:.0f} um are counted (>= {MIN_SAMPLES:g} sampling intervals of "
            f"{1000 * edge:.1f} um, and grooves {100 * relief_fraction:.0f}% of a lamina deep at >= "
            f"{RULE_RELIEF_TO_NOISE:g} x the noise of {1000 * noise:.1f} um); limited by {binding}")
    return {"lamina_mm": float(lam), "sampling_limit_mm": float(samp_lim), "noise_limit_mm": float(noise_lim),
            "binding": binding, "relief_fraction": float(relief_fraction), "rule": rule}


def inspect_summary(info: dict, scan=None, prepare_kwargs=None) -> dict:
    """The resolvable-lamina figure for ``bandgeo inspect``; JSON-safe, ``line`` is the sentence shown.

    With ``scan`` (a path) the scan is prepared again to measure what the rule needs: the sampling
    interval along the paleo-up axis (ring-structured meshes have long edges around and short ones
    along) and the scanner noise (one-ring normal residual, :func:`bandgeo.features.noise_estimate`).
    Without it the median edge of ``info`` stands in for the sampling and the noise is not judged.
    """
    edge = float(info.get("median_edge_mm") or float("nan"))
    noise = float("nan")
    how = "median edge"
    if scan is not None:
        from ..features import noise_estimate, rough_axis, sampling_along
        from ..features.curvature import one_ring_curvature, orient_outward
        from ..scan import load_scan, prepare

        spec = prepare(load_scan(scan), **(prepare_kwargs or {}))
        v, f = spec.vertices_mm, spec.faces
        edge, how = sampling_along(v, f, np.array([0.0, 0.0, 1.0])), "sampling along the up axis"
        _, _, _, normals, boundary = one_ring_curvature(v, f)
        normals *= orient_outward(v, normals, rough_axis(v))
        noise = noise_estimate(v, f, normals, ~boundary)
    if not np.isfinite(edge) or edge <= 0:
        return {"lamina_mm": None, "line": "resolvable   unknown (no edge length)"}
    r = resolvable_lamina_mm(edge, noise if np.isfinite(noise) else 0.0)
    if np.isfinite(noise):
        line = (f"resolvable   {r['rule']} ({how} {1000 * edge:.1f} um, noise {1000 * noise:.1f} um rms; "
                f"rule of the accuracy atlas, docs/segmentation.md)")
    else:
        line = (f"resolvable   laminae down to {1000 * r['sampling_limit_mm']:.0f} um are counted when their "
                f"grooves stand above the scanner noise ({MIN_SAMPLES:g} x the {how} of {1000 * edge:.1f} um; "
                f"rule of the accuracy atlas, docs/segmentation.md)")
    return {"lamina_mm": r["lamina_mm"], "sampling_mm": float(edge), "sampling_method": how,
            "noise_mm": float(noise) if np.isfinite(noise) else None, "binding": r["binding"],
            "method": f"max({MIN_SAMPLES:g} x sampling, {RULE_RELIEF_TO_NOISE:g} x noise / relief fraction "
                      f"{TYPICAL_RELIEF_FRACTION:g})", "line": line}


def boundary_relief(samples, spacing_local: np.ndarray, n: int):
    """Relief (mm), groove z-score and per-vertex noise (mm) of each boundary in its own frame.

    Parameters
    ----------
    samples : (k, dist, relief)
        Boundary index, signed distance to its plane (mm) and relief (mm) of the vertices near it.
    spacing_local : (n,) float
    n : int
        Number of boundaries.

    Returns
    -------
    relief_mm : (n,) float (NaN where a boundary has no flank or groove vertices), z : (n,) float,
    noise_mm : float
    """
    k, d, rel = samples
    if n == 0 or len(k) == 0:
        return np.full(n, np.nan), np.zeros(n), float("nan")
    u = np.abs(d) / spacing_local[k]
    groove = u < 0.12
    flank = (u > 0.22) & (u <= 0.5)
    cg = np.bincount(k[groove], minlength=n)
    cf = np.bincount(k[flank], minlength=n)
    mg = np.bincount(k[groove], rel[groove], minlength=n) / np.maximum(cg, 1)
    mf = np.bincount(k[flank], rel[flank], minlength=n) / np.maximum(cf, 1)
    relief = np.where((cg > 0) & (cf > 0), mf - mg, np.nan)
    # noise: scatter about the mean of narrow distance bins (a twentieth of a lamina) per boundary
    nbin = 20
    key = k * nbin + np.minimum((u / 0.5 * nbin).astype(np.int64), nbin - 1)
    m = n * nbin
    cb = np.bincount(key, minlength=m)
    mb = np.bincount(key, rel, minlength=m) / np.maximum(cb, 1)
    dev = rel - mb[key]
    dof = np.maximum(cb[key], 2)
    noise = float(np.sqrt(np.mean(dev * dev * dof / (dof - 1))))
    se = noise * np.sqrt(1.0 / np.maximum(cg, 1) + 1.0 / np.maximum(cf, 1))
    z = np.where(np.isfinite(relief), relief / np.maximum(se, 1e-300), np.nan)
    return relief, z, noise


def stretches(lo, hi, bad, reason):
    """[[s0, s1, reason], ...] for the runs of ``bad``."""
    return _stretches(lo, hi, bad, reason)




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
