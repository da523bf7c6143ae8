"""Counting uncertainty of the segmentation, carried into the days-per-year interval.

The spectral interval says how well the annual period (in bands) is determined *given the bands that
were found*. It says nothing about boundaries the segmentation may have missed or invented. Those change
the count of bands per year in proportion. This module turns the segmentation's own evidence into a
relative count uncertainty and widens the interval with it:

* every boundary carries a confidence ``c`` in 0..1; taken as the probability that the boundary is real,
  the number of real boundaries has variance ``sum c (1 - c)`` (a sum of independent Bernoulli
  variables: Poisson-binomial variance; e.g. Wang 1993, Statistica Sinica 3:295-312);
* each stretch flagged "possible missed boundary" may hide boundaries: the expected number hidden is the
  stretch's length over the local spacing, minus one; they can only raise the count, so they widen the
  upper end alone.

The widened interval is the spectral half-width and the count half-width added in quadrature
(independent errors), with the one-sided missed-boundary term added to the upper end. The method string
of the result says so. Confidences are the segmenter's heuristics, not calibrated probabilities; the
forward-model calibration in the tests is what checks that the widened interval covers the truth.
"""
from __future__ import annotations

import math

import numpy as np

Z95 = 1.959963984540054  # two-sided 95% normal quantile (scipy.stats.norm.ppf(0.975))


def count_uncertainty(segmentation) -> dict:
    """Relative uncertainty of the band count from boundary confidences and flagged gaps.

    ``segmentation`` may also be a band table (:class:`bandgeo.measure.BandTable`, or anything with
    per-band ``confidence`` and ``flags``): then :func:`count_uncertainty_from_bands` is used, which is
    what ``bandgeo periodicity bands.csv`` can compute too (one set of figures per set of bands).

    Returns
    -------
    dict
        ``n_boundaries``, ``sd_boundaries`` (Poisson-binomial standard deviation), ``relative_sd``,
        ``possibly_missed`` (expected hidden boundaries), ``relative_missed`` and ``method``.
    """
    if not hasattr(segmentation, "boundaries") and hasattr(segmentation, "confidence"):
        h = getattr(segmentation, "thickness_axis_mm", None)
        return count_uncertainty_from_bands(segmentation.confidence, getattr(segmentation, "flags", None), h)
    boundaries = list(segmentation.boundaries)
    n = len(boundaries)
    conf = np.clip(np.array([float(getattr(b, "confidence", 1.0)) for b in boundaries], float), 0.0, 1.0)
    conf = np.where(np.isfinite(conf), conf, 0.5)
    sd = float(math.sqrt(float(np.sum(conf * (1.0 - conf))))) if n else 0.0
    spacing = float((segmentation.resolution or {}).get("band_spacing_mm") or 0.0)
    missed = 0.0
    for s0, s1, reason in (segmentation.resolution or {}).get("flagged", []) or []:
        if "missed" in str(reason) and spacing > 0:
            missed += max(0.0, (float(s1) - float(s0)) / spacing - 1.0)
    n_bands = max(n - 1, 1)
    return {
        "n_boundaries": n,
        "sd_boundaries": sd,
        "relative_sd": sd / n_bands,
        "possibly_missed": missed,
        "relative_missed": missed / n_bands,
        "method": "boundary confidences taken as probabilities (Poisson-binomial variance) and "
                  "flagged gaps over the local spacing (possible missed boundaries)",
    }


def count_uncertainty_from_bands(confidence, flags=None, thickness_mm=None) -> dict:
    """Count uncertainty from a band table's columns (e.g. the ``confidence`` and ``flags`` columns of
    ``bands.csv``).

    Each band's confidence is taken as the probability that its top boundary is real (Poisson-binomial
    variance ``sum c (1 - c)``); a band whose flags mention a possibly missed boundary may hide
    ``thickness / median thickness - 1`` boundaries (upper end only).
    """
    conf = np.asarray(confidence, dtype=float).reshape(-1)
    conf = np.clip(np.where(np.isfinite(conf), conf, 0.5), 0.0, 1.0)
    n = conf.size
    sd = float(math.sqrt(float(np.sum(conf * (1.0 - conf))))) if n else 0.0
    missed = 0.0
    if flags is not None and thickness_mm is not None:
        h = np.asarray(thickness_mm, dtype=float).reshape(-1)
        good = h[np.isfinite(h) & (h > 0)]
        med = float(np.median(good)) if good.size else 0.0
        for f, t in zip(flags, h):
            if med > 0 and np.isfinite(t) and "missed" in str(f or ""):
                missed += max(0.0, t / med - 1.0)
    n_bands = max(n, 1)
    return {"n_boundaries": n + 1, "sd_boundaries": sd, "relative_sd": sd / n_bands,
            "possibly_missed": missed, "relative_missed": missed / n_bands,
            "method": "band confidences taken as probabilities (Poisson-binomial variance) and bands "
                      "flagged as possibly hiding a missed boundary (thickness over the median)"}


def count_uncertainty_stated(relative_sd: float, source: str = "stated by the user") -> dict:
    """Count uncertainty given as a relative standard deviation (e.g. 0.01 for 1%)."""
    r = float(relative_sd)
    if not (math.isfinite(r) and 0.0 <= r < 1.0):
        from .errors import ParameterError

        raise ParameterError(f"the count uncertainty must be a fraction in [0, 1) but got {r:g}; give e.g. "
                             f"0.01 for 1%")
    return {"n_boundaries": None, "sd_boundaries": None, "relative_sd": r, "possibly_missed": 0.0,
            "relative_missed": 0.0, "method": f"relative standard deviation of the band count {source}"}


def widen_days_per_year(block: dict, counting: dict) -> dict:
    """Return a copy of a ``days_per_year`` block with the counting uncertainty added to its interval,
    and to the interval of each method in ``block["methods"]`` (all count the same bands).

    The spectral interval is kept as ``ci95_spectral``; ``ci95`` becomes the widened one.
    """
    out = _widen(block, counting)
    if isinstance(block.get("thickness_route"), dict):
        out["thickness_route"] = _widen(block["thickness_route"], counting)
    if isinstance(block.get("methods"), dict):
        out["methods"] = {name: _widen(m, counting) if isinstance(m, dict) else m
                          for name, m in block["methods"].items()}
    return out


def _widen(block: dict, counting: dict) -> dict:
    out = dict(block)
    est, ci = block.get("estimate"), block.get("ci95")
    if est is None or not ci or ci[0] is None:
        return out
    lo, hi = float(ci[0]), float(ci[1])
    count_half = Z95 * counting["relative_sd"] * est
    new_lo = est - math.hypot(est - lo, count_half)
    new_hi = est + math.hypot(hi - est, count_half) + counting["relative_missed"] * est
    out["ci95_spectral"] = [lo, hi]
    out["ci95"] = [new_lo, new_hi]
    out["counting_uncertainty"] = dict(counting)
    out["interval_method"] = ("spectral interval and band-count uncertainty added in quadrature; upper end "
                              "raised by possibly missed boundaries")
    return out
