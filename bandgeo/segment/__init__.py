"""Automatic band segmentation: curvature clustering, ring tracing, growth axis, repairs, honesty checks.

- :class:`BandSegmenter` - the estimator (``fit(specimen, features).segmentation_``).
- :class:`Segmentation`, :class:`Boundary`, :class:`Centreline` - the data objects passed downstream.
- :func:`assign_bands` - band index of each vertex for a list of boundaries.
"""
from .axis import Centreline, fit_centreline
from .estimator import BandSegmenter
from .model import Boundary, Segmentation, assign_bands, plane_height

__all__ = ["BandSegmenter", "Segmentation", "Boundary", "Centreline", "assign_bands", "fit_centreline",
           "plane_height"]
