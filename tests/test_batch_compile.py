"""Compilation across specimens: the table, the figures, the page, and the horizon-outlier rule."""
import csv
import re

import numpy as np
import pytest
from scipy import stats

from bandgeo.atomic import write_json
from bandgeo.batch import compile_results
from bandgeo.batch.compile import OUTLIER_ALPHA, Z95, horizon_tests, weighted_mean
from bandgeo.errors import InputError


def _specimen(out, sid, horizon, age, dpy, half, significant=True):
    block = {"estimate": dpy if significant else None, "ci95": [dpy - half, dpy + half] if significant else None,
             "significant": significant, "p_value": 0.001 if significant else 0.4, "method": "combined"}
    write_json(out / sid / "result.json", {
        "schema": "bandgeo.result/1",
        "specimen": {"id": sid, "sheet": {"specimen_id": sid, "age_ma": age, "age_err_ma": 15.0,
                                          "horizon": horizon, "locality": "Tallow Creek, Mirrin Ranges"},
                     "age_ma": age, "age_err_ma": 15.0, "horizon": horizon},
        "days_per_year": block, "length_of_day_hours": None, "warnings": []})


@pytest.fixture
def batch_folder(tmp_path):
    out = tmp_path / "batch"
    for k, dpy in enumerate([401.0, 398.5, 403.0, 399.0, 441.0]):  # KRB-05 is the planted outlier
        _specimen(out, f"KRB-0{k + 1}", "Karrabin lower", 1100.0 + k, dpy, 6.0)
    for k, dpy in enumerate([420.0, 423.0, 418.5]):
        _specimen(out, f"KRB-1{k + 1}", "Karrabin upper", 1080.0 + k, dpy, 8.0)
    _specimen(out, "KRB-31", "Karrabin upper", 1081.0, 0.0, 0.0, significant=False)
    return out


def test_weighted_mean_matches_numpy():
    x, s = np.array([400.0, 410.0, 395.0]), np.array([3.0, 5.0, 4.0])
    mean, se = weighted_mean(x, s)
    # Reference: numpy.average with weights 1/s^2; se = sqrt(1/sum w) (inverse-variance weighting).
    assert mean == pytest.approx(np.average(x, weights=1 / s ** 2))
    assert se == pytest.approx(np.sqrt(1.0 / np.sum(1 / s ** 2)))


def test_horizon_tests_against_scipy():
    values = [(400.0, 394.0, 406.0), (402.0, 396.0, 408.0), (430.0, 424.0, 436.0)]
    per, summary = horizon_tests(values)
    sigma = 6.0 / Z95
    x = np.array([v[0] for v in values])
    mean = x.mean()  # equal weights
    q = np.sum((x - mean) ** 2) / sigma ** 2
    # Cochran's Q is chi-square with n-1 dof under homogeneity (Cochran 1954, Biometrics 10:101-129, pages from memory); scipy.
    assert summary["cochran_q"] == pytest.approx(q)
    assert summary["p_value"] == pytest.approx(stats.chi2.sf(q, 2))
    z = (430.0 - 401.0) / np.sqrt(sigma ** 2 + sigma ** 2 / 2)
    assert per[2]["z"] == pytest.approx(z)
    assert per[2]["p"] == pytest.approx(2 * stats.norm.sf(z))  # two-sided normal p, scipy reference
    assert [p["outlier"] for p in per] == [False, False, True]


def test_outlier_rule_false_alarm_rate_is_at_most_alpha():
    """Homogeneous horizons with honest intervals: the rule flags at most alpha of specimens."""
    rng = np.random.default_rng(11)
    flags = n = 0
    for _ in range(300):
        sig = rng.uniform(2.0, 8.0, 5)
        x = 400.0 + rng.normal(0.0, sig)
        per, _ = horizon_tests([(xi, xi - Z95 * si, xi + Z95 * si) for xi, si in zip(x, sig)])
        flags += sum(p["outlier"] for p in per)
        n += len(per)
    # Under the null P(flag) <= P(|z| > z_0.995) = alpha; binomial upper 99.9% quantile as slack.
    assert flags <= stats.binom.ppf(0.999, n, OUTLIER_ALPHA)


def test_compilation_flags_the_planted_outlier(batch_folder):
    comp = compile_results(batch_folder)
    assert comp.flagged == ["KRB-05"]
    with open(comp.files["csv"], newline="") as fh:
        rows = {r["specimen_id"]: r for r in csv.DictReader(fh)}
    for header in ("days_per_year", "days_per_year_ci95_low", "days_per_year_ci95_high", "length_of_day_h",
                   "length_of_day_ci95_low_h", "age_ma", "age_err_ma", "horizon", "significant", "flags"):
        assert header in rows["KRB-01"]
    assert "horizon_outlier" in rows["KRB-05"]["flags"]
    # No annual cycle: listed, never given an estimate.
    assert rows["KRB-31"]["days_per_year"] == "" and "no annual cycle" in rows["KRB-31"]["flags"]
    # LOD = Y / N with Y = 365.24219 d: N = 400 -> 21.91 h (worked number from the published constants).
    _specimen(batch_folder, "KRB-77", "Karrabin mid", 1090.0, 400.0, 7.0)
    rows = {r["specimen_id"]: r for r in csv.DictReader(open(compile_results(batch_folder).files["csv"]))}
    assert float(rows["KRB-77"]["length_of_day_h"]) == pytest.approx(21.91, abs=0.005)
    assert float(rows["KRB-77"]["length_of_day_ci95_low_h"]) < 21.91 < float(rows["KRB-77"]["length_of_day_ci95_high_h"])
    assert comp.horizons["Karrabin lower"]["n_significant"] == 5
    assert comp.horizons["Karrabin upper"]["n"] == 4 and comp.horizons["Karrabin upper"]["n_significant"] == 3


def test_figures_and_page_are_self_contained(batch_folder):
    comp = compile_results(batch_folder)
    assert comp.files["pdf"].read_bytes().startswith(b"%PDF")
    svg = comp.files["svg"].read_text()
    assert "<svg" in svg
    html = comp.files["html"].read_text()
    assert "<svg" in html and "KRB-05" in html and "no annual cycle" in html
    assert not re.search(r"""(src|href)\s*=\s*["']https?://""", html)  # nothing fetched from the network
    # Published points, each with its citation.
    assert "Williams (2000)" in html and "Meyers &amp; Malinverno (2018)" in html
    assert "How outliers are flagged" in html
    assert "No age given" not in html  # every specimen here has an age


def test_empty_folder_is_input_error(tmp_path):
    with pytest.raises(InputError, match="no analysed specimen"):
        compile_results(tmp_path)
    with pytest.raises(InputError, match="not a folder"):
        compile_results(tmp_path / "missing")
