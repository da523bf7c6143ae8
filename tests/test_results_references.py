"""The one table of published reference points (bandgeo.references) against the published values.

Each check names its source beside it. The report, the batch compilation and bandgeo.astro read the
same table, so they cannot disagree.
"""
import pytest

from bandgeo import astro
from bandgeo.batch.references import reference_points as batch_points
from bandgeo.references import REFERENCES, YEAR_HOURS
from bandgeo.report.references import reference_points as report_points


def _by_author(prefix):
    (ref,) = [r for r in REFERENCES if r.citation.startswith(prefix)]
    return ref


def test_year_is_the_tropical_year():
    # tropical year 365.24219 d (standard almanac value)
    assert YEAR_HOURS == pytest.approx(365.24219 * 24.0, rel=1e-12)


def test_williams_2000_rhythmites():
    # Williams (2000) Rev. Geophys. 38:37-59: ~620 Ma, 400 +/- 7 solar days/yr, LOD 21.9 +/- 0.4 h
    w = _by_author("Williams (2000)")
    assert (w.age_ma, w.days_per_year, w.dpy_err) == (620.0, 400.0, 7.0)
    assert (w.length_of_day_h, w.lod_err_h) == (21.9, 0.4)
    assert w.dpy_ci == (393.0, 407.0)


def test_williams_1989_rhythmites():
    # Williams (1989) J. Geol. Soc. London 146:97-111: ~650 Ma, 400 +/- 20 days/yr
    w = _by_author("Williams (1989)")
    assert (w.age_ma, w.days_per_year, w.dpy_err) == (650.0, 400.0, 20.0)
    # LOD derived as Y / N (Y the tropical year), interval mapped through the end points
    assert w.length_of_day_h == pytest.approx(YEAR_HOURS / 400.0, rel=1e-12)
    assert w.lod_ci == pytest.approx((YEAR_HOURS / 420.0, YEAR_HOURS / 380.0), rel=1e-12)
    assert "length_of_day_h" in w.derived


def test_meyers_malinverno_2018_lod():
    # Meyers & Malinverno (2018) PNAS 115:6363-6368: LOD 18.68 +/- 0.25 h (2 sigma) at 1.4 Ga
    m = _by_author("Meyers & Malinverno (2018)")
    assert (m.age_ma, m.length_of_day_h, m.lod_err_h) == (1400.0, 18.68, 0.25)
    assert m.days_per_year == pytest.approx(YEAR_HOURS / 18.68, rel=1e-12)
    assert m.dpy_ci == pytest.approx((YEAR_HOURS / 18.93, YEAR_HOURS / 18.43), rel=1e-12)


def test_vanyo_awramik_has_no_uncertainty_and_is_marked_disputed():
    # Vanyo & Awramik (1985) Precambrian Res. 29:121-142: 435 laminae per annual sway wave, ~850 Ma, no
    # uncertainty; disputed by Williams, Jenkins & Walter (2007)
    v = _by_author("Vanyo & Awramik (1985)")
    assert (v.age_ma, v.days_per_year, v.dpy_err, v.dpy_ci) == (850.0, 435.0, None, None)
    assert "2007" in v.note


def test_devonian_corals():
    # Wells (1963) Nature 197:948-950: ~400 growth lines per year; Scrutton (1965) Palaeontology
    # 7:552-558: 13 months x 30.5 days. Both at one Middle Devonian age (the age itself: from memory)
    wells, scrutton = _by_author("Wells (1963)"), _by_author("Scrutton (1965)")
    assert wells.days_per_year == 400.0 and scrutton.days_per_year == pytest.approx(13 * 30.5)
    assert wells.age_ma == scrutton.age_ma


def test_every_view_reads_the_one_table():
    n = len(REFERENCES)
    report, (batch, source), from_astro = report_points(), batch_points(), astro.reference_points()
    assert len(report) == len(batch) == len(from_astro) == n and "bandgeo.references" in source
    for a, b, c in zip(report, batch, from_astro):
        assert a["citation"] == b.citation == c["citation"]
        assert a["age_ma"] == b.age_ma == c["age_ma"]
        assert a["days_per_year"] == b.days_per_year == c["days_per_year"]
    # the 1.4 Ga length-of-day error is the published 0.25 h everywhere (not half of it)
    (mm,) = [c for c in from_astro if c["citation"].startswith("Meyers")]
    assert mm["length_of_day_err_hours"] == 0.25
