"""Automatic band segmentation with no global axis: local tilt field, per-boundary plane fits, curvature
classes, repairs, a centreline from the boundaries, and honesty checks (docs/segmentation.md).

- :class:`BandSegmenter` - the estimator (``fit(specimen, features).segmentation_``).
- :class:`Segmentation`, :class:`Boundary`, :class:`Centreline` - the data objects passed downstream.
- :func:`assign_bands` - band index of each vertex for a list of boundaries.
- :func:`resolvable_lamina_mm` - the finest lamina a scan (sampling, noise) can count.
"""
from .axis import Centreline, fit_centreline
from .estimator import BandSegmenter
from .model import Boundary, Segmentation, assign_bands, plane_height
from .resolution import resolvable_lamina_mm

__all__ = ["BandSegmenter", "Segmentation", "Boundary", "Centreline", "assign_bands", "fit_centreline",
           "plane_height", "resolvable_lamina_mm"]
