"""The stages of :meth:`bandgeo.segment.BandSegmenter.fit`, each a plain function.

``frame`` -> ``spacing`` -> ``flatten`` -> ``classify`` -> ``trace`` -> ``centreline`` -> ``honesty``.
Each appends its warnings, repair-log lines, resolution figures and details to the run record.
"""
from __future__ import annotations

from types import SimpleNamespace

import numpy as np
from scipy.signal import savgol_filter

from . import cluster, repair, resolution, tilt
from . import trace as tr
from .axis import Centreline, _base_height
from .model import Boundary, plane_height
from .rings import groove_profile as _binned_profile
from .rings import periodic_contrast
from .unroll import coarse_centreline, unroll, wall_mask


#: Vertices over which the sampling interval along the centreline is taken, at most (a median; on 10 M
#: faces and up only).
SAMPLING_VERTICES = 2_000_000

#: The planes move to the mean groove's deepest point counted in the lamina on its slow side.
SLOW_SIDE_LAMINA = True

#: R4 also looks between the wall's ends and the first and last rings.
END_GAPS = True

#: Partial rings (a cut at a slant) take the normal of the nearest full rings.
REFIT_PARTIAL = True

#: Repair rule R7: weak peaks whose own plane shows the groove are added (see repair).
CONFIRM_WEAK = True

#: Repair rule R6: least groove-class probability of a boundary's groove, relative to the wall mean.
MIN_CLASS_SUPPORT = 0.2


# ---------------------------------------------------------------------------- 1. frame
def frame(v, faces, features, rng, max_wall, run):
    """Side wall, coarse centreline, unrolled wall (decimated around the rings on very large scans)."""
    from ..errors import InputError
    from ..features import rough_axis, sampling_along

    axis0 = rough_axis(v)
    wall = wall_mask(features.normals, axis0)
    if wall.sum() < 100:
        raise InputError(f"only {int(wall.sum())} vertices lie on a side wall around the growth axis; "
                         f"expected a column-shaped specimen")
    samp0 = float(features.sampling_along_mm) if np.isfinite(features.sampling_along_mm) else 0.05
    noise = float(features.noise_mm)
    axis_c, smoothing = coarse_centreline(v, wall, axis0, samp0, noise, faces, rng)
    if smoothing is not None:
        run.info["centreline_smoothing"] = smoothing
    wall_idx = np.flatnonzero(wall)
    if len(wall_idx) > max_wall:
        keep = np.sort(rng.choice(len(wall_idx), size=max_wall, replace=False))
        run.info["decimated"] = (f"traced a random {100 * max_wall / len(wall_idx):.0f}% of the "
                                 f"{len(wall_idx):,} side-wall vertices (fewer samples around each ring, "
                                 f"every height kept)")
        run.warnings.append(run.info["decimated"])
        trace_idx = wall_idx[keep]
    else:
        trace_idx = wall_idx
    W = unroll(v, trace_idx, axis_c)
    samp = samp0
    if faces is not None:
        # sampling interval along the coarse centreline's local tangent (not the rough straight axis)
        # (the tangent turns slowly: the chord position is close enough, no projection of every vertex)
        # (on a very large mesh, the median over every k-th vertex: the faces touching them and the tangents
        # at those faces' vertices only)
        step = max(1, -(-len(v) // SAMPLING_VERTICES))
        only, sub, near = None, faces, slice(None)
        if step > 1:
            only = np.zeros(len(v), dtype=bool)
            only[::step] = True
            sub = faces[only[faces[:, 0]] | only[faces[:, 1]] | only[faces[:, 2]]]
            near = np.zeros(len(v), dtype=bool)
            near[sub.ravel()] = True
            near = np.flatnonzero(near)
        tang = np.zeros_like(v)
        tang[near] = axis_c.at(axis_c.approx_s(v[near]))[1]
        samp = sampling_along(v, sub, tang, only=only)
        del tang
    run.info["radius_mm"] = W.radius_mm
    return SimpleNamespace(wall=wall, wall_idx=wall_idx, W=W, axis_c=axis_c, samp=float(samp), noise=noise,
                           axis0=axis0)


# ---------------------------------------------------------------------------- 2. spacing
def spacing(fr, features, run):
    """Band spacing (mm) and a refusal reason (None when the bands can be traced)."""
    W = fr.W
    given = str(features.band_spacing_method) == "given"
    est, info = tilt.estimate_spacing(W.s, W.theta, W.relief, fr.samp, W.radius_mm)
    run.info["spacing_estimate"] = {"spacing_mm": None if not np.isfinite(est) else float(est),
                                    "peak_to_noise": float(info.get("peak_to_noise", 0.0)),
                                    "method": info["method"]}
    if given:
        sp, run.info["spacing_method"] = float(features.band_spacing_mm), "given"
    elif np.isfinite(est):
        sp, run.info["spacing_method"] = float(est), info["method"]
    else:
        run.info["spacing_method"] = "none: no periodic relief found"
        noise = float(1.4826 * np.median(np.abs(W.relief - np.median(W.relief))))
        lim = resolution.resolvable_lamina_mm(fr.samp, fr.noise)
        return float("nan"), (f"no periodic relief stands out of the scanner noise along the side wall "
                              f"(spectral peak/noise {info.get('peak_to_noise', 0):.2f} < "
                              f"{info.get('peak_to_noise_needed', 0):.2f}; wall relief scatter {noise:.4f} mm rms, sampling "
                              f"{fr.samp:.4f} mm); with this scan {lim['rule']}")
    ratio = sp / fr.samp if fr.samp > 0 else np.inf
    if ratio < resolution.MIN_SAMPLES_COUNT:
        need = sp / resolution.MIN_SAMPLES
        return sp, (f"the scan is too coarse: laminae of about {sp:.4f} mm span {ratio:.1f} sampling "
                    f"intervals ({fr.samp:.4f} mm) along the growth direction, fewer than "
                    f"{resolution.MIN_SAMPLES_COUNT:g}; a scan with edges of {need:.4f} mm or finer would "
                    f"resolve them")
    return sp, None


# ---------------------------------------------------------------------------- 3. flatten
def flatten(fr, sp, run):
    s_flat, info = tilt.flatten(fr.W, sp, fr.samp)
    run.info["tilt_field"] = info
    return s_flat


# ---------------------------------------------------------------------------- 4. classify
def classify(est, features, fr, s_flat, sp, rng):
    """Gaussian-mixture curvature classes of the wall; groove set most periodic along ``s'``."""
    n = features.mean.shape[0]
    X = features.matrix(luminance=est.use_luminance)
    wall_idx = fr.wall_idx
    Zw, _, _ = cluster.robust_scale(X[wall_idx])  # the wall rows only: the same numbers
    del X
    with cluster.one_blas_thread():
        if est.n_classes == "bic":
            k, bic, init = cluster.choose_classes(Zw, range(1, est.max_classes + 1), rng, est.bic_subsample,
                                                  est.covariance_type, est.random_state)
        else:
            k, bic, init = int(est.n_classes), {}, None
        gm = cluster.fit_mixture(Zw, k, rng, est.subsample, est.covariance_type, est.random_state, init)
        proba = cluster.predict_proba(gm, Zw)
    mixture_info = {"n_iter": int(gm.n_iter_), "converged": bool(gm.converged_),
                    "fit_rows": int(min(est.subsample, len(Zw))), "bic_rows": int(min(est.bic_subsample, len(Zw)))}
    mid = features.groove_scale_index
    use = np.flatnonzero(features.scales_mm > 0)
    col = int(np.searchsorted(use, mid)) if mid in use else 0
    order, names = cluster.name_classes(gm.means_[:, col])
    rank = np.empty(k, dtype=np.int64)
    rank[order] = np.arange(k)
    class_names = [names[c] for c in order]
    vertex_class = np.full(n, -1, dtype=np.int8)
    vertex_class[wall_idx] = rank[np.argmax(proba, axis=1)].astype(np.int8)
    # rows of the traced wall vertices in the full wall
    rows = np.searchsorted(wall_idx, fr.W.idx)
    groove_set, contrast = [], {}
    if k > 1 and s_flat is not None and np.isfinite(sp):
        b = sp / 8.0
        for j in range(1, k):
            pj = proba[rows][:, order[:j]].sum(axis=1)
            _, prof, _ = _binned_profile(s_flat, pj, b, sigma_mm=sp / 16.0)
            contrast[int(j)] = float(periodic_contrast(prof, b, sp))
        best = max(contrast, key=contrast.get)
        groove_set = [int(c) for c in order[:best]]
    elif k > 1:
        groove_set = [int(order[0])]
    p_groove = proba[rows][:, groove_set].sum(axis=1).astype(np.float64) if groove_set else np.zeros(len(rows))
    return {"k": k, "bic": bic, "mixture": gm, "mixture_info": mixture_info, "class_names": class_names,
            "vertex_class": vertex_class, "p_groove_wall": p_groove, "contrast": contrast,
            "groove_classes": [class_names[int(rank[c])] for c in groove_set]}


# ---------------------------------------------------------------------------- 5. trace
def trace_all(fr, s_flat, sp, p_groove, run):
    """Candidates of the flattened groove profile, all fitted; returns (candidate table, strong mask)."""
    W = fr.W
    centres, deficit, counts = tr.groove_profile(s_flat, W.relief, sp)
    # per-vertex noise: robust scatter of the relief about the flattened profile
    prof_v = np.interp(s_flat, centres, -deficit)
    noise_v = float(1.4826 * np.median(np.abs(W.relief - prof_v)))
    h, prom, se = tr.candidates(centres, deficit, counts, sp, noise_v)
    z = prom / np.maximum(se, 1e-300)
    strong = z >= 5.0
    if strong.any():
        strong &= prom >= 0.3 * float(np.median(prom[strong]))
    keep = z >= 2.0
    h, prom, se, z, strong = h[keep], prom[keep], se[keep], z[keep], strong[keep]
    loc = tr.local_spacing_at(h[strong], sp) if strong.sum() >= 3 else np.full(int(strong.sum()), sp)
    loc_all = np.interp(h, h[strong], loc) if strong.sum() >= 1 else np.full(len(h), sp)
    laminae = _strong_neighbours(h, strong, loc_all) if SLOW_SIDE_LAMINA else None
    fit = tr.fit_boundaries(W, s_flat, h, loc_all, fr.axis_c, score=p_groove, laminae=laminae)
    _refit_partial(fit, W, s_flat, h, loc_all, fr.axis_c, p_groove, strong, run, laminae)
    run.info["profile_noise_mm"] = noise_v
    run.info["candidates"] = {"strong": int(strong.sum()), "weak": int((~strong).sum())}
    return {"h": h, "prom": prom, "z": z, "loc": loc_all, "fit": fit}, strong


def _strong_neighbours(h, strong, loc):
    """Distances (mm) from each candidate to the nearest strong candidate below and above it (the
    local spacing where there is none)."""
    hs = h[strong]
    if len(hs) < 2:
        return loc.copy(), loc.copy()
    i = np.searchsorted(hs, h, side="left")  # first strong at or above h
    j = np.searchsorted(hs, h, side="right")  # first strong strictly above h
    below = np.where(i > 0, h - hs[np.maximum(i - 1, 0)], loc)
    above = np.where(j < len(hs), hs[np.minimum(j, len(hs) - 1)] - h, loc)
    return below, above


def _refit_partial(fit, W, s_flat, h, loc, axis, p_groove, strong, run, laminae=None):
    """Rings where the wall is partial (a cut at a slant): refit with the normal of the nearest full
    rings, in place. A plane through part of a ring is poorly held about the chord of its arc (1 degree
    off on an arc of 6 mm radius puts one end of its window a tenth of a millimetre off the groove, into
    the next one on thin laminae); the tilt changes little over a few laminae."""
    cov, avail = fit["coverage"], fit["available"]
    finite = np.all(np.isfinite(fit["normal"]), axis=1)
    part = finite & (cov < repair.MIN_COVERAGE) & (cov >= 0.8 * repair.PARTIAL_MIN) & (avail < repair.PARTIAL_WALL)
    full = np.flatnonzero(finite & strong & (cov >= 0.75))
    if not part.any() or len(full) < 3 or not REFIT_PARTIAL:
        return
    fixed = np.full((len(h), 3), np.nan)
    for i in np.flatnonzero(part):
        near = full[np.argsort(np.abs(h[full] - h[i]), kind="stable")[:3]]
        n = fit["normal"][near].mean(axis=0)
        fixed[i] = n / np.linalg.norm(n)
    again = tr.fit_boundaries(W, s_flat, h, loc, axis, score=p_groove, fixed_normal=fixed, only=part,
                              deepest_fraction=fit["deepest_fraction"], laminae=laminae)
    # the free fit decides whether the ring is there (its coverage, rms); the refit places it
    part &= (again["n_points"] >= 3) & np.all(np.isfinite(again["center"]), axis=1)
    for key in ("center", "normal"):
        fit[key][part] = again[key][part]
    k0, d0, r0 = fit["samples"]
    k1, d1, r1 = again["samples"]
    keep0, keep1 = ~part[k0], part[k1]
    fit["samples"] = (np.r_[k0[keep0], k1[keep1]], np.r_[d0[keep0], d1[keep1]], np.r_[r0[keep0], r1[keep1]])
    fit["normal_fixed"] = part
    run.info["partial_rings_refitted"] = int(part.sum())


def trace(fr, s_flat, sp, p_groove, est, run):
    """Rings (dicts) after the repair rules, flagged gaps, and a refusal reason or None."""
    cand, strong = trace_all(fr, s_flat, sp, p_groove, run)
    fit = cand["fit"]
    p_mean = max(float(np.mean(p_groove)), 1e-12) if len(p_groove) else 1.0
    rings_all = []
    fixed = fit.get("normal_fixed", np.zeros(len(cand["h"]), bool))
    # each candidate's groove z-score in its own frame (the R5 statistic), for R7
    _, groove_z, _ = resolution.boundary_relief(fit["samples"], np.asarray(cand["loc"], float), len(cand["h"]))
    for i in range(len(cand["h"])):
        if not np.all(np.isfinite(fit["normal"][i])) or fit["n_points"][i] < 3:
            rings_all.append(None)
            continue
        height = plane_height(fit["center"][i], fit["normal"][i], fr.axis_c, s0=float(cand["h"][i]))
        support = min(1.0, float(fit["score"][i]) / p_mean) if "score" in fit else 1.0
        rings_all.append({"height": float(cand["h"][i]), "axis_height": height, "center": fit["center"][i],
                          "normal": fit["normal"][i], "rms_mm": float(fit["rms_mm"][i]),
                          "coverage": float(fit["coverage"][i]), "prominence": float(cand["prom"][i]),
                          "available": float(fit["available"][i]),
                          "z": float(cand["z"][i]), "class_support": support, "flags": [], "index": i,
                          "groove_z": float(groove_z[i]) if np.isfinite(groove_z[i]) else 0.0,
                          "normal_from": "the nearest full rings" if fixed[i] else "plane fit"})
    rings = [r for r, s in zip(rings_all, strong) if s and r is not None]
    weak = [r for r, s in zip(rings_all, strong) if (not s) and r is not None]
    # R6: where the curvature classes are informative (most boundaries well inside the groove class),
    # a relief dip the groove class does not support at all is not a boundary
    # (not within two laminae of the wall's ends, where the curvature features see the mesh's rim)
    support = np.array([r["class_support"] for r in rings])
    lo_end, hi_end = float(s_flat.min()) + 2.0 * sp, float(s_flat.max()) - 2.0 * sp

    def unsupported(r):
        return r["class_support"] < MIN_CLASS_SUPPORT and lo_end < r["height"] < hi_end

    if len(support) >= 5 and np.median(support) >= 0.5:
        for r in rings:
            if unsupported(r):
                run.log.append(f"R6 dropped boundary at {r['height']:.3f} mm: groove-class support "
                               f"{r['class_support']:.2f} < {MIN_CLASS_SUPPORT}")
        rings = [r for r in rings if not unsupported(r)]
        weak = [r for r in weak if not unsupported(r)]

    def trace_weak(lo, hi):
        inside = [r for r in weak if lo < r["height"] < hi]
        return max(inside, key=lambda r: r["prominence"]) if inside else None

    ends = (float(s_flat.min()), float(s_flat.max())) if END_GAPS else None
    def crest(a, b):
        return tr.crest_z(fr.W.v, fr.W.relief, s_flat, a, b)

    rings, gaps = repair.repair(rings, sp, trace_weak, run.log, ends=ends, weak=weak if CONFIRM_WEAK else None,
                                crest=crest)
    refuse = None
    expected = fr.W.length_mm / sp
    rule = resolution.resolvable_lamina_mm(fr.samp, fr.noise)["rule"]
    if len(rings) < 0.5 * expected:
        refuse = (f"only {len(rings)} boundaries stand out of the noise along the flattened side wall where "
                  f"about {expected:.0f} are expected at the band spacing of the relief spectrum ({sp:.4f} mm; "
                  f"profile noise {run.info.get('profile_noise_mm', float('nan')):.4f} mm per vertex; sampling "
                  f"{fr.samp:.4f} mm); with this scan {rule}")
    if len(rings) < 3:
        refuse = (f"only {len(rings)} boundaries stand out of the noise along the flattened side wall "
                  f"(profile noise {run.info.get('profile_noise_mm', float('nan')):.4f} mm per vertex; sampling "
                  f"{fr.samp:.4f} mm); with this scan {rule}")
    run.info["_trace_samples"] = (fit["samples"], [r["index"] for r in rings], cand["loc"])
    return rings, gaps, refuse


# ---------------------------------------------------------------------------- 6. centreline
def centreline(rings, fr, v, faces, features):
    """Boundaries (heights along the final centreline) and the centreline from the boundary centres."""
    axis = fr.axis_c
    full = [r for r in rings if r["coverage"] >= 0.75]
    if len(full) >= 7:
        pts = np.array([r["center"] for r in full])
        s_c, _ = axis.project(pts)
        order = np.argsort(s_c)
        pts, s_c = pts[order], s_c[order]
        step = float(np.median(np.diff(s_c))) if len(s_c) > 1 else 1.0
        win = int(max(7, round(0.5 * fr.W.radius_mm / max(step, 1e-9))) // 2 * 2 + 1)
        win = min(win, len(pts) if len(pts) % 2 else len(pts) - 1)
        if win >= 5:
            pts = savgol_filter(pts, win, 2, axis=0, mode="interp")
        seg = np.linalg.norm(np.diff(pts, axis=0), axis=1)
        keepp = np.r_[True, seg > 1e-9]
        pts = pts[keepp]
        arc = np.r_[0.0, np.cumsum(np.linalg.norm(np.diff(pts, axis=0), axis=1))]
        if len(pts) >= 3:
            tan = np.gradient(pts, arc, axis=0)
            tan /= np.linalg.norm(tan, axis=1, keepdims=True)
            if np.dot(tan.mean(axis=0), axis.tangents.mean(axis=0)) < 0:
                pts, tan, arc = pts[::-1], -tan[::-1], arc[-1] - arc[::-1]
            line = Centreline(arc, pts, tan)
            shift = _base_height(line, v, fr.wall, float(features.noise_mm), faces)
            axis = Centreline(line.heights_mm - shift, line.points_mm, line.tangents)
    boundaries = []
    for i, r in enumerate(sorted(rings, key=lambda r: r["height"])):
        s0 = float(axis.project(r["center"][None, :])[0][0])
        h = plane_height(r["center"], r["normal"], axis, s0=s0)
        boundaries.append(Boundary(id=i, height_mm=h, center_mm=r["center"], normal=r["normal"],
                                   rms_mm=r["rms_mm"], coverage=r["coverage"], confidence=r["confidence"],
                                   origin="auto", flags=list(r["flags"]) + [f"normal: {r['normal_from']}",
                                                                            f"class support {r['class_support']:.2f}"]))
    boundaries.sort(key=lambda b: b.height_mm)
    for i, b in enumerate(boundaries):
        b.id = i
    return boundaries, axis


# ---------------------------------------------------------------------------- 7. honesty
def honesty(est, boundaries, rings, gaps, refuse, fr, sp, features, run):
    """Resolution figures in each boundary's own frame; warnings; no boundaries when not resolved."""
    res = run.res
    W = fr.W
    lim = resolution.resolvable_lamina_mm(fr.samp, fr.noise)
    res.update({"sampling_along_mm": fr.samp, "band_spacing_mm": float(sp) if np.isfinite(sp) else None,
                "spacing_to_sampling": float(sp / fr.samp) if np.isfinite(sp) and fr.samp > 0 else None,
                "noise_mm": fr.noise, "noise_method": "one-ring normal residual (features)",
                "relief_mm": float("nan"), "relief_to_noise": float("nan"), "flagged": [list(g) for g in gaps],
                "min_samples_per_band": resolution.MIN_SAMPLES, "min_samples_to_count": resolution.MIN_SAMPLES_COUNT,
                "resolvable_lamina_mm": lim["lamina_mm"], "resolvable_rule": lim["rule"],
                "radius_mm": W.radius_mm})
    samples = run.info.pop("_trace_samples", None)
    if refuse is None and samples is not None and boundaries:
        (k, d, rel), kept_idx, loc = samples
        # samples are indexed by candidate; keep the boundaries' own (order of rings == boundaries)
        order = sorted(range(len(rings)), key=lambda i: rings[i]["height"])
        cand_of = np.array([kept_idx[i] for i in order])
        remap = np.full(len(loc), -1)
        remap[cand_of] = np.arange(len(cand_of))
        m = remap[k] >= 0
        relief, z, noise = resolution.boundary_relief((remap[k][m], d[m], rel[m]), loc[cand_of], len(cand_of))
        if np.isfinite(noise):
            res["noise_mm"], res["noise_method"] = noise, "scatter of single vertices about each boundary's relief profile, in its own frame"
        if np.isfinite(relief).any():
            res["relief_mm"] = float(np.nanmedian(relief))
            res["relief_to_noise"] = float(res["relief_mm"] / res["noise_mm"]) if res["noise_mm"] > 0 else float("inf")
        zf = z[np.isfinite(z)]
        z = np.where(np.isfinite(z), z, np.inf)  # no flank samples: not judged here
        res["groove_z_median"] = float(np.median(zf)) if len(zf) else None
        res["relief_method"] = ("flank (0.25-0.45 lamina) minus groove (< 0.1 lamina) relief against the distance "
                                "to each boundary's fitted plane")
        # R5: a boundary whose groove does not show in its own frame is a noise bump seen in the profile
        drop = z < resolution.MIN_KEEP_Z
        for b, zz in zip(boundaries, z):
            if zz < resolution.MIN_KEEP_Z:
                run.log.append(f"R5 dropped boundary at {b.height_mm:.3f} mm: groove z-score {zz:.1f} in its "
                               f"own frame < {resolution.MIN_KEEP_Z:g}")
        if drop.any() and (~drop).sum() >= 3:
            boundaries = [b for b, d_ in zip(boundaries, drop) if not d_]
            z = z[~drop]
            for i, b in enumerate(boundaries):
                b.id = i
        for b, zz in zip(boundaries, z):
            b.confidence = float(b.confidence * min(1.0, zz / (2 * est.min_groove_z)))
            b.flags.append(f"groove z-score {zz:.1f}")
        heights = np.array([b.height_mm for b in boundaries])
        faint = z < est.min_groove_z
        if len(zf) and np.median(zf) < est.min_groove_z:
            refuse = (f"the grooves do not stand out of the noise: median groove z-score {np.median(zf):.1f} "
                      f"< {est.min_groove_z:g} (relief {res['relief_mm']:.4f} mm, noise {res['noise_mm']:.4f} mm "
                      f"per vertex)")
        elif est.min_relief_to_noise > 0 and res["relief_to_noise"] < est.min_relief_to_noise:
            refuse = (f"the groove relief {res['relief_mm']:.4f} mm is below {est.min_relief_to_noise:g} x the "
                      f"scanner noise {res['noise_mm']:.4f} mm")
        elif faint.any():
            lo = np.r_[heights[0], 0.5 * (heights[1:] + heights[:-1])]
            hi = np.r_[0.5 * (heights[1:] + heights[:-1]), heights[-1]]
            res["flagged"] += resolution.stretches(lo, hi, faint, "groove barely above the noise")
            run.warnings.append(f"{int(faint.sum())} of {len(z)} boundaries stand less than "
                                f"{est.min_groove_z:g} standard errors out of the noise; flagged for review")
        if refuse is None and np.isfinite(res["relief_to_noise"]) and res["relief_to_noise"] < resolution.WARN_RELIEF_TO_NOISE:
            run.warnings.append(f"the groove relief ({res['relief_mm']:.4f} mm) is below "
                                f"{resolution.WARN_RELIEF_TO_NOISE:g} x the noise of single vertices "
                                f"({res['noise_mm']:.4f} mm); boundaries were found by averaging around the "
                                f"column, so check the count in review")
        if refuse is None and len(heights) > 2:
            thick = np.diff(heights)
            med = float(np.median(thick))
            if abs(med / sp - 1.0) > 0.25:
                run.warnings.append(f"the median band thickness {med:.4f} mm differs from the band spacing of "
                                    f"the relief spectrum ({sp:.4f} mm) by more than 25%; check the count")
            thin = thick < resolution.MIN_SAMPLES * fr.samp
            res["flagged"] += resolution.stretches(heights[:-1], heights[1:], thin,
                                                   f"bands thinner than {resolution.MIN_SAMPLES:g} x the sampling "
                                                   f"interval along the axis")
            if thin.any():
                run.warnings.append(f"{int(thin.sum())} of {len(thick)} bands are thinner than "
                                    f"{resolution.MIN_SAMPLES:g} x the sampling interval along the axis "
                                    f"({fr.samp:.4f} mm); their stretches are flagged, and laminae thinner "
                                    f"still may be missed there, so the count may be low")
    if refuse is None and res["spacing_to_sampling"] is not None and res["spacing_to_sampling"] < resolution.MIN_SAMPLES:
        run.warnings.insert(0, f"the scan is at its resolution limit: the band spacing {sp:.4f} mm is below "
                               f"{resolution.MIN_SAMPLES:g} x the sampling interval along the growth axis "
                               f"({fr.samp:.4f} mm), and laminae thinner than 2 sampling intervals cannot show at "
                               f"all, so the count may miss laminae; a scan with edges of {sp / 4:.4f} mm or finer "
                               f"would settle it")
    if gaps:
        run.warnings.append(f"{len(gaps)} gap(s) wider than the local spacing allows may hide missed "
                            f"boundaries; flagged for review")
    if refuse is not None:
        run.warnings.insert(0, f"bands not resolved: {refuse}; no boundaries are reported")
        res["flagged"].append([float(W.s.min()), float(W.s.max()), "bands not resolved: " + refuse])
        res["refused"] = refuse
        return []
    return boundaries
