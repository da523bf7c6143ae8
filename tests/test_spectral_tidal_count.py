"""The band-count uncertainty widens the tidal month as it widens the year (both count the same bands)."""
import numpy as np

from bandgeo.series import series_from_thickness
from bandgeo.spectral import periodicity_figures
from bandgeo.uncertainty import count_uncertainty_stated


def test_count_uncertainty_widens_days_per_synodic_month():
    # 6 cycles of 400 bands with a 30.5-band month: 400 days per year and 30.5 days per synodic month
    # (~620 Ma tidal rhythmites, Williams 2000 Rev. Geophys. 38:37-59; reference-values.md)
    rng = np.random.default_rng(3)
    n = np.arange(2400)
    h = 0.2 * (1 + 0.35 * np.sin(2 * np.pi * n / 400) + 0.25 * np.sin(2 * np.pi * n / 30.5)) \
        * np.exp(0.08 * rng.standard_normal(n.size))
    series = series_from_thickness(h)
    plain = periodicity_figures(series, n_sim=99, seed=1)["blocks"]
    wide = periodicity_figures(series, n_sim=99, seed=1,
                               count_uncertainty=count_uncertainty_stated(0.02))["blocks"]
    month0, month1 = plain["tidal"]["days_per_synodic_month"], wide["tidal"]["days_per_synodic_month"]
    assert month0["estimate"] is not None and month0["estimate"] == month1["estimate"]
    width0 = month0["ci95"][1] - month0["ci95"][0]
    width1 = month1["ci95"][1] - month1["ci95"][0]
    # 2% relative sd: the interval must be at least +-1.96 x 2% of the estimate wide
    assert width1 >= 2 * 1.96 * 0.02 * month1["estimate"] * 0.99
    assert width1 > width0
