"""Earth's rotation and the Moon's distance from days per year and synodic months per year.

Formulas and constants follow /work/shared/reference-values.md (see docs/astronomy.md):

- length of day ``LOD = Y / N``; sidereal day ``Y / (N + 1)``; spin rate ``omega = 2 pi (N + 1) / Y``,
  with ``Y`` the year in seconds, taken as constant (365.24219 days of 86400 s);
- sidereal months per year = synodic months per year + 1;
- Kepler's third law ``n^2 a^3 = G (M_E + M_M)``: ``a / a0 = (T_sid / T_sid,0)^(2/3)``;
- conservation of the Earth-Moon angular momentum (Runcorn 1964; Lambeck 1980), at constant
  eccentricity: ``sqrt(a / a0) = 1 + C (omega0 - omega) / L_orb,0``.

Intervals: every function here is monotonic in its single uncertain input, so a 95% interval maps
exactly through its end points; with two uncertain inputs (months per year from days per year and days
per month) a seeded Monte Carlo propagates them.
"""
from __future__ import annotations

import math

import numpy as np

from .constants import DEFAULT_SEED, YEAR_SECONDS
from .errors import ParameterError

#: Present-day values (reference-values.md).
SYNODIC_MONTH_DAYS = 29.53058885          # Meeus, Astronomical Algorithms
SIDEREAL_MONTH_DAYS = 27.32166155         # Meeus
STELLAR_DAY_S = 86164.099                 # Astronomical Almanac
GM_EARTH = 3.986004418e14                 # m^3 s^-2, IAU current best estimates
MOON_EARTH_MASS_RATIO = 0.0123000371      # IAU 2009 (from memory in reference-values.md)
A0_KM = 384_399.0                         # semimajor axis, Williams et al. (2001)
ECCENTRICITY = 0.0549                     # lunar orbit, mean (standard almanac value, from memory)
C_MOMENT = 8.034e37                       # kg m^2, C = 0.3307 M R^2 (Yoder 1995; from memory)
DAY_S = 86400.0


def _constants():
    """G and Earth's radius from astropy.constants; Earth's mass from GM (IAU) / G."""
    from astropy import constants as const

    G = float(const.G.value)
    return G, GM_EARTH / G, float(const.R_earth.value)


def _check(name: str, value, low: float, high: float) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"{name} must be a number but got {value!r}") from None
    if not (math.isfinite(v) and low < v < high):
        raise ParameterError(f"{name} must be between {low:g} and {high:g} but got {value!r}")
    return v


def _ci(ci95, name: str):
    if ci95 is None:
        return None
    lo, hi = (float(c) for c in ci95)
    if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo <= hi):
        raise ParameterError(f"{name} must be [low, high] with 0 < low <= high but got {ci95!r}")
    return lo, hi


def _mapped(fn, estimate: float, ci) -> dict:
    if ci is None:
        return {"estimate": fn(estimate), "ci95": None}
    a, b = fn(ci[0]), fn(ci[1])
    return {"estimate": fn(estimate), "ci95": [min(a, b), max(a, b)]}


def rotation_from_days_per_year(n, ci95=None) -> dict:
    """Length of day, sidereal day and spin rate from solar days per year.

    Parameters
    ----------
    n : float
        Solar days per year.
    ci95 : [low, high], optional
        95% interval of ``n``; mapped through each (monotonic) formula.

    Returns
    -------
    dict
        ``length_of_day_hours``, ``sidereal_day_hours``, ``spin_rate_rad_per_s``,
        ``spin_angular_momentum_kg_m2_per_s`` - each ``{estimate, ci95, method}`` - and ``days_per_year``.
    """
    n = _check("days per year", n, 1.0, 1e5)
    ci = _ci(ci95, "ci95 of days per year")
    Y = YEAR_SECONDS
    method = "Y / N with a constant year Y = 365.24219 d of 86400 s; interval mapped through the end points"
    lod = _mapped(lambda v: Y / v / 3600.0, n, ci)
    sid = _mapped(lambda v: Y / (v + 1.0) / 3600.0, n, ci)
    spin = _mapped(lambda v: 2 * math.pi * (v + 1.0) / Y, n, ci)
    mom = _mapped(lambda v: C_MOMENT * 2 * math.pi * (v + 1.0) / Y, n, ci)
    lod["method"] = method
    sid["method"] = "Y / (N + 1) (one more rotation against the stars than against the Sun per year)"
    spin["method"] = "2 pi (N + 1) / Y"
    mom["method"] = "C omega with C = 8.034e37 kg m^2 held constant"
    return {"days_per_year": {"estimate": n, "ci95": list(ci) if ci else None},
            "length_of_day_hours": lod, "sidereal_day_hours": sid, "spin_rate_rad_per_s": spin,
            "spin_angular_momentum_kg_m2_per_s": mom}


def months_per_year(days_per_year, days_per_synodic_month, days_per_year_ci95=None,
                    days_per_month_ci95=None, n_mc: int = 20000, seed: int = DEFAULT_SEED) -> dict:
    """Synodic months per year ``N / D`` (days per year over days per synodic month).

    Intervals are propagated by a seeded Monte Carlo, each input normal with the standard deviation
    implied by its 95% interval (half-width / 1.96).

    Returns
    -------
    dict
        ``estimate``, ``ci95``, ``method``, ``sidereal_months_per_year`` ({estimate, ci95}).
    """
    n = _check("days per year", days_per_year, 1.0, 1e5)
    d = _check("days per synodic month", days_per_synodic_month, 1.0, 1e4)
    ci_n = _ci(days_per_year_ci95, "days_per_year_ci95")
    ci_d = _ci(days_per_month_ci95, "days_per_month_ci95")
    est = n / d
    out = {"estimate": est, "ci95": None, "method": "N / D"}
    if ci_n or ci_d:
        rng = np.random.default_rng(seed)
        sn = (ci_n[1] - ci_n[0]) / 3.919928 if ci_n else 0.0
        sd = (ci_d[1] - ci_d[0]) / 3.919928 if ci_d else 0.0
        draws = rng.normal(n, sn, n_mc) / rng.normal(d, sd, n_mc)
        lo, hi = np.quantile(draws, [0.025, 0.975])
        out["ci95"] = [float(lo), float(hi)]
        out["method"] = f"N / D; interval by Monte Carlo ({n_mc} draws, seed {seed}), inputs normal"
    out["sidereal_months_per_year"] = {"estimate": est + 1.0,
                                       "ci95": [out["ci95"][0] + 1, out["ci95"][1] + 1] if out["ci95"] else None}
    return out


def kepler_ratio(synodic_months: float) -> float:
    """a / a0 by Kepler's third law from synodic months per year (present sidereal month as T0)."""
    t_sid_days = YEAR_SECONDS / DAY_S / (synodic_months + 1.0)
    return (t_sid_days / SIDEREAL_MONTH_DAYS) ** (2.0 / 3.0)


def kepler_two_body_km(synodic_months: float) -> float:
    """Semimajor axis (km) from the two-body Kepler law n^2 a^3 = G (M_E + M_M), no solar perturbation."""
    t = YEAR_SECONDS / (synodic_months + 1.0)
    return (GM_EARTH * (1 + MOON_EARTH_MASS_RATIO) * t * t / (4 * math.pi ** 2)) ** (1 / 3) / 1000.0


def present_angular_momenta() -> dict:
    """Present spin ``C omega0`` and lunar orbital angular momentum ``mu sqrt(G (M_E+M_M) a0 (1-e^2))``."""
    G, m_e, _ = _constants()
    m_m = MOON_EARTH_MASS_RATIO * m_e
    mu = m_e * m_m / (m_e + m_m)
    omega0 = 2 * math.pi / STELLAR_DAY_S
    l_orb = mu * math.sqrt(G * (m_e + m_m) * A0_KM * 1e3 * (1 - ECCENTRICITY ** 2))
    return {"spin_kg_m2_per_s": C_MOMENT * omega0, "orbital_kg_m2_per_s": l_orb, "omega0_rad_per_s": omega0}


def angular_momentum_ratio(days_per_year: float) -> float:
    """a / a0 from conservation of the Earth-Moon angular momentum at constant eccentricity."""
    am = present_angular_momenta()
    omega = 2 * math.pi * (days_per_year + 1.0) / YEAR_SECONDS
    root = 1.0 + C_MOMENT * (am["omega0_rad_per_s"] - omega) / am["orbital_kg_m2_per_s"]
    return root * root


def _distance_block(ratio_fn, value, ci, method) -> dict:
    _, _, r_earth = _constants()
    r = _mapped(ratio_fn, value, ci)
    km = {"estimate": r["estimate"] * A0_KM, "ci95": [c * A0_KM for c in r["ci95"]] if r["ci95"] else None}
    re = {"estimate": km["estimate"] * 1e3 / r_earth,
          "ci95": [c * 1e3 / r_earth for c in km["ci95"]] if km["ci95"] else None}
    return {"a_over_a0": r, "distance_km": km, "distance_earth_radii": re, "method": method}


def earth_moon_distance(synodic_months_per_year=None, days_per_year=None, *, months_ci95=None,
                        days_per_year_ci95=None) -> dict:
    """Earth-Moon distance by Kepler's third law (from months per year) and by conservation of angular
    momentum (from days per year), as a/a0, km (a0 = 384,399 km) and Earth radii.

    Returns
    -------
    dict
        ``kepler`` and ``angular_momentum`` blocks (None when their input is missing), each with
        ``a_over_a0``, ``distance_km``, ``distance_earth_radii`` ({estimate, ci95}) and ``method``;
        ``kepler`` also gives ``two_body_distance_km`` (absolute two-body Kepler, no solar perturbation).
    """
    if synodic_months_per_year is None and days_per_year is None:
        raise ParameterError("give synodic_months_per_year, days_per_year or both")
    out = {"kepler": None, "angular_momentum": None}
    if synodic_months_per_year is not None:
        m = _check("synodic months per year", synodic_months_per_year, 1.0, 100.0)
        ci = _ci(months_ci95, "months_ci95")
        blk = _distance_block(kepler_ratio, m, ci,
                              "Kepler's third law: a/a0 = (T_sid / T_sid,0)^(2/3), sidereal months = synodic + 1")
        blk["two_body_distance_km"] = _mapped(kepler_two_body_km, m, ci)
        out["kepler"] = blk
    if days_per_year is not None:
        n = _check("days per year", days_per_year, 1.0, 1e5)
        ci = _ci(days_per_year_ci95, "days_per_year_ci95")
        out["angular_momentum"] = _distance_block(
            angular_momentum_ratio, n, ci,
            "conservation of Earth-Moon angular momentum (Runcorn 1964; Lambeck 1980): sqrt(a/a0) = 1 + "
            "C (omega0 - omega) / L_orb,0, constant e and C, solar torque ignored")
    return out


def reference_points() -> list[dict]:
    """Published estimates for the comparison figure: the one cited table, ``bandgeo.references``."""
    from .references import references

    return [{"age_ma": r.age_ma, "days_per_year": r.days_per_year, "days_per_year_err": r.dpy_half_width,
             "length_of_day_hours": r.length_of_day_h,
             "length_of_day_err_hours": r.lod_err_h if r.lod_err_h is not None else (
                 None if r.dpy_err is None else r.length_of_day_h * r.dpy_err / r.days_per_year),
             "citation": r.citation, "label": r.label, "note": r.note} for r in references()]
