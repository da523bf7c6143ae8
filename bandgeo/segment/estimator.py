"""The band segmenter: the estimator and its public contract; the stages are in :mod:`.stages`."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..constants import DEFAULT_SEED
from ..errors import InputError, ParameterError
from ..progress import report
from . import resolution, stages
from .model import Segmentation, assign_bands

#: Relative mismatch between the traced boundaries' median spacing and the spectral band spacing above
#: which the wall is flattened and traced again at the traced spacing.
RETRACE_MISMATCH = 0.1

#: Side-wall vertices traced at most; larger scans are decimated around the rings (recorded).
MAX_WALL_VERTICES = 6_000_000


@dataclass
class _Run:
    """What the stages of one fit append to: warnings, the repair log, the resolution dict, details."""

    warnings: list
    log: list
    res: dict
    info: dict


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
    subsample : int, default=150_000
        Side-wall vertices used to fit the mixture; all vertices are then predicted.
    random_state : int, default=DEFAULT_SEED
    covariance_type : {'full', 'diag'}, default='full'
    bic_subsample : int, default=10_000
        Vertices used to compare the BIC of the candidate class numbers.
    use_luminance : bool, default=False
        Add the colour luminance to the clustering features.
    min_relief_to_noise : float, default=0.0
        When the per-vertex groove relief (measured in each boundary's own frame) is below this multiple
        of the scanner noise, no boundaries are reported. 0: only the groove z-score decides (averaging
        around the circumference resolves grooves shallower than the noise; a warning says so below
        2 x the noise).
    min_groove_z : float, default=4.0
        A boundary is resolved when its groove stands this many standard errors out of the profile
        noise; when most boundaries do not, nothing is counted.
    max_wall_vertices : int, default=6_000_000
        Larger scans are decimated at random over the side wall for tracing (every height keeps its
        samples; only the count around each ring falls); the result records it.

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
    No stage needs a global axis accurate to a fraction of a lamina:

    1. Frame (:mod:`bandgeo.segment.unroll`): side-wall vertices, a coarse centreline through slab
       circle centres (good to a few degrees), the wall unrolled to (arc length, azimuth) and its
       relief high-passed.
    2. Band spacing from the averaged periodogram of narrow azimuth columns of the relief
       (:func:`bandgeo.segment.tilt.estimate_spacing`); a given spacing (``features``) wins.
    3. Tilt field and flattening (:mod:`bandgeo.segment.tilt`): the laminae's own tilt in every height
       window, from the phase of neighbouring azimuth columns.
    4. Curvature clustering (:mod:`bandgeo.segment.cluster`): the side-wall vertices are classified on
       their multi-scale curvature features by a Gaussian mixture (classes by BIC); the groove class is
       the set of most concave classes most periodic along the flattened height. It labels every
       vertex and enters each boundary's confidence.
    5. Tracing (:mod:`bandgeo.segment.trace`): grooves of the flattened wall seed the boundaries; each
       is traced in azimuth columns and fitted by its own plane (its normal is the tilt measurement);
       repair rules R1-R4 (:mod:`bandgeo.segment.repair`).
    6. The centreline follows from the boundary centres; heights are arc lengths along it.
    7. Resolution honesty (:mod:`bandgeo.segment.resolution`), in each boundary's own frame.
    """

    def __init__(self, n_classes="bic", max_classes=6, subsample=150_000, random_state=DEFAULT_SEED,
                 covariance_type="full", bic_subsample=10_000, use_luminance=False, min_relief_to_noise=0.0,
                 min_groove_z=resolution.MIN_GROOVE_Z, max_wall_vertices=MAX_WALL_VERTICES):
        self.n_classes = n_classes
        self.max_classes = max_classes
        self.subsample = subsample
        self.random_state = random_state
        self.covariance_type = covariance_type
        self.bic_subsample = bic_subsample
        self.use_luminance = use_luminance
        self.min_relief_to_noise = min_relief_to_noise
        self.min_groove_z = min_groove_z
        self.max_wall_vertices = max_wall_vertices

    _PARAMS = ("n_classes", "max_classes", "subsample", "random_state", "covariance_type", "bic_subsample",
               "use_luminance", "min_relief_to_noise", "min_groove_z", "max_wall_vertices")

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
        for name in ("min_relief_to_noise", "min_groove_z"):
            val = getattr(self, name)
            if not (isinstance(val, (int, float, np.number)) and np.isfinite(val) and val >= 0):
                raise ParameterError(f"{name} must be a number >= 0 but got {val!r}")
        if not (isinstance(self.max_wall_vertices, (int, np.integer)) and self.max_wall_vertices >= 10_000):
            raise ParameterError(f"max_wall_vertices must be a whole number >= 10000 but got {self.max_wall_vertices!r}")

    @staticmethod
    def _inputs(specimen, features):
        try:
            v = np.asarray(specimen.vertices_mm, dtype=float)
        except AttributeError:
            raise InputError("expected a Specimen with vertices_mm; prepare the scan first") from None
        n = len(v)
        if getattr(features, "mean", None) is None or features.mean.shape[0] != n:
            got = getattr(getattr(features, "mean", None), "shape", None)
            raise InputError(f"the features describe {got[0] if got else 0} vertices but the specimen has {n}; "
                             f"compute the features of this specimen")
        faces = getattr(specimen, "faces", None)
        return v, (np.asarray(faces) if faces is not None and len(faces) else None)

    def _retrace(self, frame, features, cls, rings, gaps, spacing, s_flat, run):
        """Trace once more at the traced boundaries' own spacing when it disagrees with the spectrum's.

        The relief spectrum of irregular laminae can peak at a subharmonic (three laminae and more); the
        boundaries traced with it then sit about that far apart, skipping the laminae between. When
        their median spacing differs from the spectral one by more than a quarter, the flattening and
        tracing are run again at the traced spacing; the second tracing is kept when its median
        spacing agrees with the one it was traced at better than the first did (recorded in
        ``params['retraced']``)."""
        if len(rings) < 10 or str(features.band_spacing_method) == "given":
            return rings, gaps, None, spacing, s_flat
        med = float(np.median(np.diff(np.sort([r["height"] for r in rings]))))
        if not (np.isfinite(med) and med > 0 and abs(med / spacing - 1.0) > RETRACE_MISMATCH):
            return rings, gaps, None, spacing, s_flat
        if med / frame.samp < resolution.MIN_SAMPLES_COUNT:
            return rings, gaps, None, spacing, s_flat
        run2 = _Run(warnings=[], log=[], res={}, info=dict(run.info))
        s2 = stages.flatten(frame, med, run2)
        rings2, gaps2, refuse2 = stages.trace(frame, s2, med, cls["p_groove_wall"], self, run2)
        if refuse2 is not None or len(rings2) < 10:
            return rings, gaps, None, spacing, s_flat
        med2 = float(np.median(np.diff(np.sort([r["height"] for r in rings2]))))
        before, after = abs(np.log(med / spacing)), abs(np.log(med2 / med))
        run.info["retraced"] = {"spectral_spacing_mm": float(spacing), "traced_spacing_mm": med,
                                "second_spacing_mm": med2, "boundaries_first": len(rings),
                                "boundaries_second": len(rings2), "kept": "second" if after < before else "first"}
        if after >= before:
            return rings, gaps, None, spacing, s_flat
        run.log.extend(run2.log)
        run.info.update({k: v for k, v in run2.info.items() if k != "retraced"})
        run.info["spacing_method"] = (f"{run.info.get('spacing_method', '')}; re-traced at the traced "
                                      f"boundaries' median spacing {med:.4f} mm")
        return rings2, gaps2, None, med, s2

    # ------------------------------------------------------------------ fit
    def fit(self, specimen, features, progress=None) -> "BandSegmenter":
        """Segment ``specimen`` using its ``features`` (from :func:`bandgeo.features.compute_features`)."""
        self._validate()
        v, faces = self._inputs(specimen, features)
        rng = np.random.default_rng(self.random_state)
        run = _Run(warnings=[], log=[], res={}, info={})
        report(progress, "segment: frame", 0, 6)
        frame = stages.frame(v, faces, features, rng, self.max_wall_vertices, run)
        report(progress, "segment: band spacing and tilt", 1, 6)
        spacing, refuse = stages.spacing(frame, features, run)
        s_flat = None
        if refuse is None:
            s_flat = stages.flatten(frame, spacing, run)
        report(progress, "segment: clustering", 2, 6)
        cls = stages.classify(self, features, frame, s_flat, spacing, rng)
        report(progress, "segment: tracing boundaries", 3, 6)
        rings, gaps = [], []
        if refuse is None:
            rings, gaps, refuse = stages.trace(frame, s_flat, spacing, cls["p_groove_wall"], self, run)
            if refuse is None:
                rings, gaps, refuse, spacing, s_flat = self._retrace(frame, features, cls, rings, gaps, spacing,
                                                                     s_flat, run)
        report(progress, "segment: centreline", 4, 6)
        boundaries, axis = stages.centreline(rings, frame, v, faces, features)
        report(progress, "segment: resolution checks", 5, 6)
        boundaries = stages.honesty(self, boundaries, rings, gaps, refuse, frame, spacing, features, run)
        band = assign_bands(v, boundaries, axis)
        params = dict(self.get_params())
        params.update({"n_classes_chosen": int(cls["k"]), "bic": cls["bic"], "mixture": cls["mixture_info"],
                       "groove_classes": cls["groove_classes"],
                       "groove_set_periodic_contrast": cls["contrast"],
                       "band_spacing_mm": float(spacing) if np.isfinite(spacing) else None,
                       "band_spacing_method": run.info.get("spacing_method", features.band_spacing_method),
                       "scales_mm": np.asarray(features.scales_mm).tolist(), "repair_log": run.log,
                       "method": "local tilt field + per-boundary plane fits (bandgeo.segment.tilt, .trace)",
                       **run.info})
        report(progress, "segment: done", 6, 6)
        self.segmentation_ = Segmentation(boundaries=boundaries, axis=axis, vertex_class=cls["vertex_class"],
                                          class_names=cls["class_names"], vertex_band=band, resolution=run.res,
                                          warnings=run.warnings, params=params)
        self.n_classes_ = int(cls["k"])
        self.bic_ = cls["bic"]
        self.class_names_ = cls["class_names"]
        self.repair_log_ = run.log
        self.mixture_ = cls["mixture"]
        return self
