"""The band segmenter: curvature clustering, groove tracing, ring fits, repairs and resolution checks."""
from __future__ import annotations

import numpy as np

from ..constants import DEFAULT_SEED
from ..errors import InputError, ParameterError
from ..progress import report
from . import cluster, repair, resolution
from .axis import fit_centreline
from .model import Boundary, Segmentation, assign_bands, plane_height
from .rings import (COVERAGE_BINS, SortedWall, fit_ring, groove_profile, periodic_contrast, profile_peaks,
                    relief_profile)

#: Side-wall vertices used to fit the centreline on large scans.
AXIS_SUBSAMPLE = 400_000

#: Side-wall vertices: normal within 60 degrees of perpendicular to the axis.
WALL_MAX_AXIAL_NORMAL = 0.5


class BandSegmenter:
    """Find the lamina boundaries of a specimen from its curvature features.

    Follows the scikit-learn estimator convention: ``__init__`` stores the options, :meth:`fit` does
    the work and sets attributes with a trailing underscore.

    Parameters
    ----------
    n_classes : int or 'bic', default='bic'
        Number of curvature classes, or 'bic' to pick it (1..max_classes) by the Bayesian information
        criterion (Schwarz 1978, Ann. Stat. 6:461-464).
    max_classes : int, default=6
    subsample : int, default=250_000
        Side-wall vertices used to fit the mixture; all vertices are then predicted.
    random_state : int, default=DEFAULT_SEED
    covariance_type : {'full', 'diag'}, default='full'
    bic_subsample : int, default=10_000
        Vertices used to compare the BIC of the candidate class numbers.
    use_luminance : bool, default=False
        Add the colour luminance to the clustering features.
    min_relief_to_noise : float, default=1.0
        When the groove relief is below this multiple of the scanner noise the bands are not resolved:
        no boundaries are reported and the whole column is flagged (0 keeps whatever was traced).

    Attributes
    ----------
    segmentation_ : Segmentation
    n_classes_ : int
    bic_ : dict
        BIC for each number of classes tried (empty when ``n_classes`` is given).
    class_names_ : list of str
    repair_log_ : list of str
        One line per repair rule applied (see :mod:`bandgeo.segment.repair`).
    mixture_ : sklearn.mixture.GaussianMixture

    Notes
    -----
    1. Cluster the side-wall vertices (normal within 60 deg of horizontal to the axis) on their
       robustly scaled curvature features with a Gaussian mixture: the number of classes by BIC on
       ``bic_subsample`` rows, the chosen mixture refined on ``subsample`` rows (warm start), then every
       wall vertex predicted. Classes are named by their mean curvature at the groove scale; the
       groove class is the set of most concave classes whose membership is most periodic along the axis.
    2. Fit the growth axis (:mod:`bandgeo.segment.axis`).
    3. Trace the rings: boundaries are the minima of the side-wall relief averaged around each ring of
       the axis (:func:`bandgeo.segment.rings.relief_profile`), each fitted by a plane and a circle
       from the groove-deficit weights of its vertices. The per-vertex groove class alone loses
       bands only two or three samples thick (its features blur there), so it enters each boundary's
       confidence as ``class_support`` rather than gating it.
    4. Repair (rules R1-R4 of :mod:`bandgeo.segment.repair`), confidence per boundary.
    5. Resolution honesty (:mod:`bandgeo.segment.resolution`): sampling along the axis, noise, relief;
       flagged stretches, and no boundaries at all when there is no periodic relief above the noise
       or the relief is below ``min_relief_to_noise`` x the noise.
    """

    def __init__(self, n_classes="bic", max_classes=6, subsample=250_000, random_state=DEFAULT_SEED,
                 covariance_type="full", bic_subsample=10_000, use_luminance=False, min_relief_to_noise=1.0):
        self.n_classes = n_classes
        self.max_classes = max_classes
        self.subsample = subsample
        self.random_state = random_state
        self.covariance_type = covariance_type
        self.bic_subsample = bic_subsample
        self.use_luminance = use_luminance
        self.min_relief_to_noise = min_relief_to_noise

    _PARAMS = ("n_classes", "max_classes", "subsample", "random_state", "covariance_type", "bic_subsample",
               "use_luminance", "min_relief_to_noise")

    def get_params(self, deep: bool = True) -> dict:
        return {k: getattr(self, k) for k in self._PARAMS}

    def set_params(self, **params) -> "BandSegmenter":
        for k, v in params.items():
            if k not in self._PARAMS:
                raise ParameterError(f"unknown BandSegmenter parameter {k!r}; expected one of {', '.join(self._PARAMS)}")
            setattr(self, k, v)
        return self

    # ------------------------------------------------------------------ validation
    def _validate(self):
        if self.n_classes != "bic" and not (isinstance(self.n_classes, (int, np.integer)) and 1 <= self.n_classes <= 20):
            raise ParameterError(f"n_classes must be 'bic' or a whole number 1..20 but got {self.n_classes!r}")
        if not (isinstance(self.max_classes, (int, np.integer)) and 1 <= self.max_classes <= 20):
            raise ParameterError(f"max_classes must be a whole number 1..20 but got {self.max_classes!r}")
        for name in ("subsample", "bic_subsample"):
            val = getattr(self, name)
            if not (isinstance(val, (int, np.integer)) and val >= 1000):
                raise ParameterError(f"{name} must be a whole number >= 1000 but got {val!r}")
        if self.covariance_type not in ("full", "diag"):
            raise ParameterError(f"covariance_type must be 'full' or 'diag' but got {self.covariance_type!r}")
        if not (np.isfinite(self.min_relief_to_noise) and self.min_relief_to_noise >= 0):
            raise ParameterError(f"min_relief_to_noise must be >= 0 but got {self.min_relief_to_noise!r}")

    # ------------------------------------------------------------------ fit
    def fit(self, specimen, features, progress=None) -> "BandSegmenter":
        """Segment ``specimen`` using its ``features`` (from :func:`bandgeo.features.compute_features`)."""
        from ..features import rough_axis, sampling_along

        self._validate()
        try:
            v = np.asarray(specimen.vertices_mm, dtype=float)
        except AttributeError:
            raise InputError("expected a Specimen with vertices_mm; prepare the scan first") from None
        n = len(v)
        if getattr(features, "mean", None) is None or features.mean.shape[0] != n:
            got = getattr(getattr(features, "mean", None), "shape", None)
            raise InputError(f"the features describe {got[0] if got else 0} vertices but the specimen has {n}; "
                             f"compute the features of this specimen")
        rng = np.random.default_rng(self.random_state)
        warnings: list[str] = []
        log: list[str] = []
        spacing = float(features.band_spacing_mm)
        samp = float(features.sampling_along_mm)
        axis0 = rough_axis(v)
        wall = np.abs(features.normals @ axis0) < WALL_MAX_AXIAL_NORMAL
        if wall.sum() < 100:
            raise InputError(f"only {int(wall.sum())} vertices lie on a side wall around the growth axis; "
                             f"expected a column-shaped specimen")

        # --- clustering
        report(progress, "segment: clustering", 0, 5)
        X = features.matrix(luminance=self.use_luminance)
        wall_idx = np.flatnonzero(wall)
        Z, _, _ = cluster.robust_scale(X, wall_idx)
        Zw = Z[wall_idx]
        with cluster.one_blas_thread():
            if self.n_classes == "bic":
                k, bic, init = cluster.choose_classes(Zw, range(1, self.max_classes + 1), rng, self.bic_subsample,
                                                      self.covariance_type, self.random_state)
            else:
                k, bic, init = int(self.n_classes), {}, None
            gm = cluster.fit_mixture(Zw, k, rng, self.subsample, self.covariance_type, self.random_state, init)
            proba = cluster.predict_proba(gm, Zw)
        mixture_info = {"n_iter": int(gm.n_iter_), "converged": bool(gm.converged_),
                        "fit_rows": int(min(self.subsample, len(Zw))), "bic_rows": int(min(self.bic_subsample, len(Zw)))}
        mid = features.groove_scale_index
        use = np.flatnonzero(features.scales_mm > 0)
        col = int(np.searchsorted(use, mid)) if mid in use else 0
        key = gm.means_[:, col]  # mean curvature at the groove scale, standardised
        order, names = cluster.name_classes(key)
        rank = np.empty(k, dtype=np.int64)
        rank[order] = np.arange(k)
        class_names = [names[c] for c in order]
        vertex_class = np.full(n, -1, dtype=np.int8)
        vertex_class[wall_idx] = rank[np.argmax(proba, axis=1)].astype(np.int8)
        # the groove set: the j most concave classes whose summed probability, binned along the rough
        # axis, is most periodic at the band spacing (BIC tends to split the groove tail into several
        # classes on non-Gaussian data; this picks the split back up without any threshold)
        groove_set, contrast = [], {}
        if k > 1:
            s_rough = v[wall_idx] @ axis0
            bin0 = min(samp / 2.0, spacing / 8.0)
            for j in range(1, k):
                pj = proba[:, order[:j]].sum(axis=1)
                _, prof_j, _ = groove_profile(s_rough, pj, bin0, sigma_mm=max(samp / 2.0, spacing / 16.0))
                contrast[j] = periodic_contrast(prof_j, bin0, spacing)
            best = max(contrast, key=contrast.get)
            groove_set = [int(c) for c in order[:best]]
        p_groove = proba[:, groove_set].sum(axis=1).astype(np.float64) if groove_set else np.zeros(len(wall_idx))
        del proba, Z

        # --- axis
        report(progress, "segment: growth axis", 1, 5)
        wall_axis = wall.copy()
        if wall.sum() > AXIS_SUBSAMPLE:  # the circle fits need far fewer points than a large scan has
            drop = rng.choice(wall_idx, size=int(wall.sum()) - AXIS_SUBSAMPLE, replace=False)
            wall_axis[drop] = False
        axis = fit_centreline(v, wall_axis, axis0, slab_mm=max(spacing, 2 * samp), smooth_mm=2.0 * spacing,
                              noise_mm=float(features.noise_mm), faces=getattr(specimen, "faces", None))
        s_all, radial = axis.project(v)
        faces = getattr(specimen, "faces", None)
        if faces is not None and len(faces):
            # the sampling interval along the fitted (leaning, swaying) axis, not the rough one
            samp = sampling_along(v, np.asarray(faces), axis.at(s_all)[1])
        e1, e2 = axis.frame(s_all[wall_idx])
        rw = radial[wall_idx]
        angle = np.arctan2(np.einsum("ij,ij->i", rw, e2), np.einsum("ij,ij->i", rw, e1))
        sw, vw = s_all[wall_idx], v[wall_idx]

        # --- tracing
        report(progress, "segment: tracing rings", 2, 5)
        per_ring = len(wall_idx) * samp / max(float(sw.max() - sw.min()), 1e-9)
        bins = int(np.clip(round(per_ring), 8, COVERAGE_BINS))
        rings: list[dict] = []
        weak = {"heights_mm": np.zeros(0), "prominence": np.zeros(0)}
        refuse = None
        if k == 1:
            refuse = "the curvature features form a single class (BIC): no groove class to trace"
        elif not np.isfinite(features.info.get("spacing_estimate_mm") or np.nan) and \
                features.band_spacing_method.startswith("fallback"):
            refuse = (f"no periodic relief stands out of the scanner noise ({features.noise_mm:.4f} mm rms) "
                      f"along the axis (spectral peak/noise {features.info.get('peak_to_noise', 0):.2f}); "
                      f"the groove relief is below what this scan resolves")
        if refuse is None:
            bin_mm = min(samp / 4.0, spacing / 8.0)
            centres, prof, counts, share = relief_profile(sw, np.linalg.norm(rw, axis=1), p_groove, bin_mm,
                                                          sigma_mm=samp / 2.0, detrend_mm=2.0 * spacing)
            heights, prom, weak = profile_peaks(centres, prof, counts, spacing)
            loc = repair.local_spacing(heights, spacing)
            r_wall = np.linalg.norm(rw, axis=1)
            p_mean = max(float(p_groove.mean()), 1e-12)
            sorted_wall = SortedWall(vw, sw, angle, r_wall, p_groove)
            radius = float(np.median(r_wall))
            for h0, pr, ls in zip(heights, prom, loc):
                ring = fit_ring(sorted_wall, axis, h0, 0.5 * ls, radius, bins)
                if ring is not None:
                    ring.update(prominence=float(pr), seed_mm=float(h0), flags=[],
                                class_support=min(1.0, ring["groove_share"] / p_mean))
                    ring["height"] = plane_height(ring["center"], ring["normal"], axis, s0=h0)
                    rings.append(ring)

            def trace_weak(lo, hi):
                inside = (weak["heights_mm"] > lo) & (weak["heights_mm"] < hi)
                if not inside.any():
                    return None
                j = np.flatnonzero(inside)[np.argmax(weak["prominence"][inside])]
                h0 = float(weak["heights_mm"][j])
                r = fit_ring(sorted_wall, axis, h0, 0.5 * (hi - lo), radius, bins)
                if r is None:
                    return None
                r.update(prominence=float(weak["prominence"][j]), seed_mm=h0, flags=[],
                         class_support=min(1.0, r["groove_share"] / p_mean))
                r["height"] = plane_height(r["center"], r["normal"], axis, s0=h0)
                return r

            rings, gaps = repair.repair(rings, spacing, trace_weak, log)
        else:
            gaps = []
        boundaries = [Boundary(id=i, height_mm=r["height"], center_mm=r["center"], normal=r["normal"],
                               rms_mm=r["rms_mm"], coverage=r["coverage"], confidence=r["confidence"],
                               origin="auto", flags=list(r["flags"]) + [f"normal: {r['normal_from']}"])
                      for i, r in enumerate(rings)]

        # --- resolution honesty
        report(progress, "segment: resolution checks", 3, 5)
        res = resolution.assess(sw, rw, angle, boundaries, features, spacing, samp, gaps, warnings)
        if boundaries:
            # check of the axis: distance of the full rings' circle-fit centres from the centreline
            full = [b for b in boundaries if b.coverage >= 0.75]
            if full:
                cs = np.array([b.center_mm for b in full])
                _, off = axis.project(cs)
                res["axis_ring_offset_mm"] = float(np.median(np.linalg.norm(off, axis=1)))
        if refuse is not None:
            warnings.insert(0, f"bands not resolved: {refuse}; no boundaries are reported")
            res["flagged"].append([float(sw.min()), float(sw.max()), "bands not resolved: " + refuse])
        elif boundaries and np.isfinite(res["relief_to_noise"]) and res["relief_to_noise"] < self.min_relief_to_noise:
            warnings.insert(0, f"bands not resolved: the groove relief {res['relief_mm']:.4f} mm is below "
                            f"{self.min_relief_to_noise:g} x the scanner noise {res['noise_mm']:.4f} mm; "
                            f"no boundaries are reported (a finer scan or a stronger etch is needed)")
            res["flagged"].append([float(sw.min()), float(sw.max()), "groove relief below scanner noise"])
            boundaries = []
        band = assign_bands(v, boundaries, axis, s=s_all)

        params = dict(self.get_params())
        params.update({"n_classes_chosen": int(k), "bic": bic, "mixture": mixture_info,
                       "groove_classes": [class_names[int(rank[c])] for c in groove_set],
                       "groove_set_periodic_contrast": {int(j): float(c) for j, c in contrast.items()},
                       "band_spacing_mm": spacing,
                       "band_spacing_method": features.band_spacing_method,
                       "scales_mm": np.asarray(features.scales_mm).tolist(), "repair_log": log})
        report(progress, "segment: done", 5, 5)
        self.segmentation_ = Segmentation(boundaries=boundaries, axis=axis, vertex_class=vertex_class,
                                          class_names=class_names, vertex_band=band, resolution=res,
                                          warnings=warnings, params=params)
        self.n_classes_ = int(k)
        self.bic_ = bic
        self.class_names_ = class_names
        self.repair_log_ = log
        self.mixture_ = gm
        return self
