"""Counting uncertainty: the Poisson-binomial variance and the widened days-per-year interval."""
from types import SimpleNamespace

import numpy as np
import pytest

from bandgeo.uncertainty import count_uncertainty, widen_days_per_year


def _seg(conf, flagged=(), spacing=0.5):
    return SimpleNamespace(boundaries=[SimpleNamespace(confidence=c) for c in conf],
                           resolution={"band_spacing_mm": spacing, "flagged": list(flagged)})


def test_variance_matches_exact_poisson_binomial():
    # Exact distribution of a sum of independent Bernoulli(c_i) by repeated convolution
    # (the definition of the Poisson-binomial law); its variance is sum c (1 - c).
    rng = np.random.default_rng(1)
    conf = rng.uniform(0.2, 1.0, 60)
    pmf = np.array([1.0])
    for c in conf:
        pmf = np.convolve(pmf, [1 - c, c])
    k = np.arange(pmf.size)
    exact_var = np.sum(pmf * k**2) - np.sum(pmf * k) ** 2
    got = count_uncertainty(_seg(conf))
    assert got["sd_boundaries"] ** 2 == pytest.approx(exact_var, rel=1e-9)
    assert got["relative_sd"] == pytest.approx(np.sqrt(exact_var) / 59)


def test_certain_boundaries_leave_the_interval_alone():
    counting = count_uncertainty(_seg(np.ones(100)))
    block = widen_days_per_year({"estimate": 400.0, "ci95": [395.0, 405.0]}, counting)
    assert block["ci95"] == pytest.approx([395.0, 405.0])
    assert block["ci95_spectral"] == [395.0, 405.0]


def test_missed_boundaries_raise_only_the_upper_end():
    # a 2.5 mm gap at 0.5 mm spacing may hide 4 boundaries: 4 / 99 of the count
    counting = count_uncertainty(_seg(np.ones(100), flagged=[[10.0, 12.5, "possible missed boundary"]]))
    assert counting["possibly_missed"] == pytest.approx(4.0)
    block = widen_days_per_year({"estimate": 400.0, "ci95": [395.0, 405.0]}, counting)
    assert block["ci95"][0] == pytest.approx(395.0)
    assert block["ci95"][1] == pytest.approx(405.0 + 400.0 * 4 / 99)


def test_quadrature_sum():
    counting = count_uncertainty(_seg(np.full(401, 0.5)))  # sd = sqrt(401)/2 boundaries
    rel = np.sqrt(401) / 2 / 400
    block = widen_days_per_year({"estimate": 400.0, "ci95": [396.0, 404.0]}, counting)
    half = np.hypot(4.0, 1.959963984540054 * rel * 400.0)
    assert block["ci95"] == pytest.approx([400.0 - half, 400.0 + half])


def test_no_estimate_is_left_untouched():
    block = widen_days_per_year({"estimate": None, "ci95": None, "significant": False},
                                count_uncertainty(_seg([0.5, 0.5])))
    assert block == {"estimate": None, "ci95": None, "significant": False}


def test_each_method_interval_is_widened_alike():
    counting = count_uncertainty(_seg(np.full(401, 0.5)))
    block = {"estimate": 400.0, "ci95": [396.0, 404.0],
             "methods": {"cycle_count": {"estimate": 400.0, "ci95": [396.0, 404.0]},
                         "sway": {"estimate": None, "ci95": None}}}
    out = widen_days_per_year(block, counting)
    assert out["methods"]["cycle_count"]["ci95"] == pytest.approx(out["ci95"])
    assert out["methods"]["cycle_count"]["ci95_spectral"] == [396.0, 404.0]
    assert out["methods"]["sway"] == {"estimate": None, "ci95": None}
    assert block["methods"]["cycle_count"]["ci95"] == [396.0, 404.0]  # input not modified


def test_band_confidences_give_the_poisson_binomial_variance_too():
    # The same law (sum c (1 - c)) from a band table's confidence column: what bands.csv carries, so
    # that `bandgeo periodicity bands.csv` and analyze can use one count uncertainty.
    from bandgeo.uncertainty import count_uncertainty_from_bands

    rng = np.random.default_rng(2)
    conf = rng.uniform(0.3, 1.0, 80)
    got = count_uncertainty_from_bands(conf)
    assert got["sd_boundaries"] ** 2 == pytest.approx(np.sum(conf * (1 - conf)), rel=1e-12)
    assert got["relative_sd"] == pytest.approx(got["sd_boundaries"] / 80)
    table = SimpleNamespace(confidence=conf, flags=[""] * 79 + ["possible missed boundary"],
                            thickness_axis_mm=np.r_[np.full(79, 0.1), 0.35])
    via_table = count_uncertainty(table)
    assert via_table["relative_sd"] == pytest.approx(got["relative_sd"])
    assert via_table["possibly_missed"] == pytest.approx(2.5)      # 0.35 / 0.1 - 1


def test_stated_count_uncertainty_and_its_bad_values():
    from bandgeo.errors import ParameterError
    from bandgeo.uncertainty import count_uncertainty_stated

    c = count_uncertainty_stated(0.02)
    block = {"estimate": 400.0, "ci95": [396.0, 404.0], "thickness_route": {"estimate": 400.0, "ci95": [396.0, 404.0]}}
    out = widen_days_per_year(block, c)
    half = np.hypot(4.0, 1.959963984540054 * 0.02 * 400)       # quadrature sum
    assert out["ci95"] == pytest.approx([400 - half, 400 + half])
    assert out["thickness_route"]["ci95"] == pytest.approx(out["ci95"])
    for bad in (-0.1, 1.0, float("nan")):
        with pytest.raises(ParameterError):
            count_uncertainty_stated(bad)
