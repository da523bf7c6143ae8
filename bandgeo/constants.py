"""Units, physical constants used across stages, tolerances and the package logger.

The core works in millimetres and radians; conversion happens at the edges (loading, report).
"""
import logging

log = logging.getLogger("bandgeo")

#: Length units accepted for scans, with their size in millimetres.
UNIT_TO_MM = {"um": 1e-3, "mm": 1.0, "cm": 10.0, "m": 1000.0, "in": 25.4}

#: Tropical year in seconds, taken as constant through geological time
#: (standard almanac value 365.24219 d; see docs/astronomy.md).
YEAR_SECONDS = 365.24219 * 86400.0

#: Default random seed: every stochastic step takes a seed, and this is the default.
DEFAULT_SEED = 20261202

#: Schema identifiers of files bandgeo writes.
RESULT_SCHEMA = "bandgeo.result/1"
SEGMENTATION_SCHEMA = "bandgeo.segmentation/1"
REVIEW_SCHEMA = "bandgeo.review/1"
TRUTH_SCHEMA = "bandgeo.synth-truth/1"
