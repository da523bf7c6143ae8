"""One set of figures per set of bands: the periodicity test, the band-count uncertainty and the
astronomy, computed by one function that ``bandgeo periodicity`` and the ``analyze`` pipeline both call
with the same inputs.

``periodicity_figures(series, count_uncertainty=...)`` returns the ``result.json`` blocks
(``daily_test``, ``days_per_year`` widened by the count uncertainty, ``tidal``, ``hiatus``, ``warnings``,
``parameters``) and the ``astronomy`` block (length of day, sidereal day, synodic months per year and the
Earth-Moon distance when a tidal cycle is read), plus the :class:`PeriodicityResult` behind them.
"""
from __future__ import annotations

from ..constants import DEFAULT_SEED
from .core import METHODS, test_periodicity


def astronomy_block(blocks: dict) -> dict:
    """Length of day, sidereal day and (with a tidal month) months per year and the Earth-Moon distance,
    from the ``days_per_year`` and ``tidal`` blocks (bandgeo.astro)."""
    from .. import astro

    dpy = blocks.get("days_per_year") or {}
    block = {"length_of_day_hours": None, "sidereal_day_hours": None, "earth_moon_distance": None,
             "synodic_months_per_year": None}
    if not dpy.get("significant") or dpy.get("estimate") is None or not dpy.get("ci95"):
        return block
    rot = astro.rotation_from_days_per_year(dpy["estimate"], dpy.get("ci95"))
    block["length_of_day_hours"] = rot.get("length_of_day_hours")
    block["sidereal_day_hours"] = rot.get("sidereal_day_hours")
    block["rotation"] = rot
    route = dpy.get("thickness_route")
    if route and route.get("estimate") is not None and route.get("ci95"):
        block["length_of_day_hours_thickness_route"] = astro.rotation_from_days_per_year(
            route["estimate"], route["ci95"]).get("length_of_day_hours")
    tidal = (blocks.get("tidal") or {}).get("days_per_synodic_month")
    if tidal and tidal.get("significant") and tidal.get("estimate"):
        months = astro.months_per_year(dpy["estimate"], tidal["estimate"],
                                       days_per_year_ci95=dpy.get("ci95"),
                                       days_per_month_ci95=tidal.get("ci95"))
        block["synodic_months_per_year"] = months
        block["earth_moon_distance"] = astro.earth_moon_distance(
            synodic_months_per_year=months["estimate"], days_per_year=dpy["estimate"],
            months_ci95=months.get("ci95"), days_per_year_ci95=dpy.get("ci95"))
    return block


def periodicity_figures(series, *, count_uncertainty: dict | None = None, min_period_bands=None,
                        max_period_bands=None, n_sim: int = 1000, seed: int = DEFAULT_SEED,
                        methods=METHODS, progress=None, band_flags=None) -> dict:
    """The periodicity figures of one set of bands.

    Parameters
    ----------
    series : bandgeo.series.BandSeries
    count_uncertainty : dict, optional
        From :func:`bandgeo.uncertainty.count_uncertainty` (a band table or segmentation),
        :func:`bandgeo.uncertainty.count_uncertainty_from_bands` (a confidence column) or
        :func:`bandgeo.uncertainty.count_uncertainty_stated` (a stated relative uncertainty). The
        days-per-year interval (and each method's) is widened by it; without it the interval is the
        spectral one alone, and ``days_per_year.counting_uncertainty`` says so.
    min_period_bands, max_period_bands, n_sim, seed, methods, progress, band_flags
        As :func:`bandgeo.spectral.test_periodicity`.

    Returns
    -------
    dict
        ``blocks`` (JSON-safe result blocks, days per year widened), ``astronomy``, ``periodicity``
        (the :class:`PeriodicityResult`, whose ``spectra`` feed ``spectra.csv``).
    """
    from .. import uncertainty as _unc

    res = test_periodicity(series, min_period_bands=min_period_bands, max_period_bands=max_period_bands,
                           n_sim=n_sim, seed=seed, methods=methods, progress=progress, band_flags=band_flags)
    blocks = res.to_dict()
    if count_uncertainty is not None:
        blocks["days_per_year"] = _unc.widen_days_per_year(blocks["days_per_year"], count_uncertainty)
        tidal = blocks.get("tidal")
        if isinstance(tidal, dict) and isinstance(tidal.get("days_per_synodic_month"), dict):
            # bands per month count the same bands: a missed boundary shortens the month as it does the year
            tidal = dict(tidal)
            tidal["days_per_synodic_month"] = _unc._widen(tidal["days_per_synodic_month"], count_uncertainty)
            blocks["tidal"] = tidal
    else:
        blocks["days_per_year"]["counting_uncertainty"] = None
        blocks["days_per_year"]["interval_method"] = (
            "spectral interval only: no band-count uncertainty was given (the bands are taken as counted "
            "without error)")
    return {"blocks": blocks, "astronomy": astronomy_block(blocks), "periodicity": res}
