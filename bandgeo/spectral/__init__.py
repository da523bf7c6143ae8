"""Periodicity tests of band series: are the bands regular increments, is there an annual cycle above
red noise, how many bands per year (and per synodic month), with honest 95% intervals.

Public entry
------------
test_periodicity(series, ...) -> PeriodicityResult
periodicity_figures(series, count_uncertainty=..., ...) -> {blocks, astronomy, periodicity}: the one
    function behind every set of figures (``bandgeo periodicity`` and ``analyze``)

Methods (one module each)
-------------------------
lomb_scargle   Lomb-Scargle periodogram (astropy) and the batched FFT engine behind the Monte Carlo
multitaper     DPSS tapers (scipy) and Thomson's harmonic F-test
rednoise       AR(1) background with a robust fit (after Mann & Lees 1996), surrogates
significance   Monte Carlo maximum statistic over the searched band (explicit seed, batched)
search         one series: background, levels, peaks by prewhitening
peaks, cycles  peak frequency and its Monte Carlo interval; cycle counting on the analytic signal
annual         the three annual estimates and their combination / consistency test
evolutive      sliding-window spectrum
daily          daily-increment test
trend          removal of variation slower than the searched band (a trend is not a cycle)
select         which significant peak is the annual cycle: line test, harmonics, sub-harmonics
tidal          fortnightly / monthly cycles -> days per synodic month
hiatus         evidence of missing days
slow           slow reference implementations used by the tests
"""
from .core import METHODS, test_periodicity
from .figures import astronomy_block, periodicity_figures
from .result import PeriodicityResult

__all__ = ["test_periodicity", "periodicity_figures", "astronomy_block", "PeriodicityResult", "METHODS",
           "available_methods"]


def available_methods() -> tuple:
    """Names accepted by ``test_periodicity(methods=...)``."""
    return METHODS
