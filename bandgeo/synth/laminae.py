"""What a growing column records, lamina by lamina: thickness, missing days and growth direction.

No mesh is built here; this is fast enough (about a millisecond for a few thousand laminae) to be
called thousands of times for calibration and power analysis.

Thickness model
---------------
Lamina ``k`` (k = 0 .. n-1, n = round(days_per_year * years * laminae_per_day)) is laid down at time
``t_k = k / laminae_per_day`` days. Its thickness is::

    h_k = mean_thickness_mm * (1 + A cos(2 pi t_k / days_per_year + phi_A))
                            * (1 + a_T [0.7 cos(4 pi t_k / M) + 0.3 cos(2 pi t_k / M)])
                            * exp(e_k - sigma^2 / 2)

with ``A = annual_amplitude``, ``a_T = tidal_amplitude``, ``M = days_per_synodic_month`` (the 4 pi term
is the fortnightly spring-neap cycle, the 2 pi term the monthly inequality), and ``e_k`` a stationary
Gaussian AR(1) series with lag-1 correlation ``ar1_phi`` and variance ``sigma^2 = ln(1 + noise_cv^2)``,
so that ``exp(e_k - sigma^2/2)`` is log-normal with mean 1 and coefficient of variation ``noise_cv``.
Because every factor has expectation 1 (the cosines average out over whole cycles and the noise is
independent of them), the expected thickness is ``mean_thickness_mm``; no sample renormalisation is
done, so the sample mean scatters about it as a real record would.

Missing days: hiatus episodes start on days drawn from a Poisson process of rate
``hiatus_rate_per_year`` per year; each removes ``L`` consecutive days, ``L`` geometric on 1, 2, ...
with mean ``hiatus_mean_days``. Laminae laid down on a missing day are absent from the record.

Growth direction: the tilt of lamina ``k`` from the paleo-vertical, as a small horizontal vector
(degrees, components east and north), is ``m + s_k u`` where ``m`` is the mean tilt (magnitude
``mean_tilt_deg`` toward ``mean_tilt_azimuth_deg``), ``u`` the unit vector of the sway plane azimuth and
``s_k = sway_amplitude_deg * sin(2 pi t_k / days_per_year + sway_phase_rad)``, plus the **meander**
``w_k``: two independent stationary Gaussian AR(1) series (east, north) in the nominal lamina index with
standard deviation ``meander_amplitude_deg`` and lag-1 correlation ``exp(-1 / meander_correlation_laminae)``
(an Ornstein-Uhlenbeck process sampled once a lamina). Its length is the inclination and its direction
the azimuth of the growth direction. The meander is drawn after the thickness noise and the hiatuses,
so a record with no meander is the same as before the meander existed.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .params import SynthParams


@dataclass
class LaminaRecord:
    """The laminae a column recorded, in growth order (base to top); no mesh.

    Attributes
    ----------
    thickness_mm : (N,) float
        Thickness of each recorded lamina along the growth axis, mm (missing days are absent).
    day_index : (N,) int
        Day on which each recorded lamina was laid down, counted from the start of the record.
    boundary_heights_mm : (N+1,) float
        Arc length along the growth axis of each lamina boundary, from 0 (base of the first lamina).
    inclination_deg, azimuth_deg : (N,) float
        Tilt of the growth direction from the paleo-vertical, and its azimuth (clockwise from north).
    sway_deg : (N,) float
        Component of the tilt vector along the sway-plane azimuth, degrees (mean tilt included).
    hiatus_after : (N,) bool
        True where one or more laminae are missing between this lamina and the next.
    params : SynthParams
        The parameters that made the record.
    seed : int or None
        The integer seed used, when one was given (None if a Generator was passed).
    """

    thickness_mm: np.ndarray
    day_index: np.ndarray
    boundary_heights_mm: np.ndarray
    inclination_deg: np.ndarray
    azimuth_deg: np.ndarray
    sway_deg: np.ndarray
    hiatus_after: np.ndarray
    params: SynthParams
    seed: int | None = None
    tilt_east_deg: np.ndarray = field(default=None, repr=False)
    tilt_north_deg: np.ndarray = field(default=None, repr=False)
    nominal_index: np.ndarray = field(default=None, repr=False)
    annual_sway_deg: np.ndarray = field(default=None, repr=False)
    meander_east_deg: np.ndarray = field(default=None, repr=False)
    meander_north_deg: np.ndarray = field(default=None, repr=False)

    @property
    def n_laminae(self) -> int:
        """Number of recorded laminae."""
        return int(self.thickness_mm.size)

    @property
    def recorded_laminae_per_year(self) -> float:
        """Recorded laminae divided by the years spanned (a minimum count of days per year)."""
        return self.n_laminae / float(self.params.years)

    @property
    def missing_laminae(self) -> int:
        """Nominal laminae lost to hiatuses."""
        return int(self.params.n_nominal - self.n_laminae)

    def growth_directions(self) -> np.ndarray:
        """Unit growth direction of each lamina in the paleo-vertical frame (x east, y north, z up).

        Returns
        -------
        (N, 3) float
        """
        return tilt_to_direction(self.tilt_east_deg, self.tilt_north_deg)

    def hiatus_positions(self) -> list[dict]:
        """Each gap as ``{"after_lamina", "height_mm", "laminae_missing", "days_missing"}``.

        ``height_mm`` is the boundary above the lamina before the gap; ``days_missing`` counts whole
        days with no recorded lamina."""
        idx = np.flatnonzero(self.hiatus_after)
        lost = self.nominal_index[idx + 1] - self.nominal_index[idx] - 1
        days = np.maximum(self.day_index[idx + 1] - self.day_index[idx] - 1, 0)
        return [{"after_lamina": int(i), "height_mm": float(self.boundary_heights_mm[i + 1]),
                 "laminae_missing": int(k), "days_missing": int(d)} for i, k, d in zip(idx, lost, days)]


def tilt_to_direction(east_deg: np.ndarray, north_deg: np.ndarray) -> np.ndarray:
    """Unit vectors tilted from +z by the length of the tilt vector toward its direction.

    Parameters
    ----------
    east_deg, north_deg : (N,) float
        Components of the tilt vector, degrees.

    Returns
    -------
    (N, 3) float
        Unit vectors (x east, y north, z up).
    """
    east = np.radians(np.asarray(east_deg, dtype=float))
    north = np.radians(np.asarray(north_deg, dtype=float))
    theta = np.hypot(east, north)
    with np.errstate(invalid="ignore", divide="ignore"):
        scale = np.where(theta > 0, np.sin(theta) / np.where(theta > 0, theta, 1.0), 1.0)
    return np.column_stack([east * scale, north * scale, np.cos(theta)])


def _rng(rng, params: SynthParams):
    if rng is None:
        return np.random.default_rng(params.seed), int(params.seed)
    if isinstance(rng, np.random.Generator):
        return rng, None
    if isinstance(rng, (int, np.integer)) and not isinstance(rng, bool):
        return np.random.default_rng(int(rng)), int(rng)
    from ..errors import ParameterError
    raise ParameterError(f"rng must be an integer seed or numpy Generator but got {type(rng).__name__}")


def _ar1(gen: np.random.Generator, n: int, phi: float, sigma: float) -> np.ndarray:
    """Stationary Gaussian AR(1) series of length n, variance sigma**2, lag-1 correlation phi."""
    from scipy.signal import lfilter  # scipy.signal takes ~1 s to import; keep `bandgeo --help` fast
    innov = gen.standard_normal(n) * (sigma * np.sqrt(1.0 - phi * phi))
    if sigma == 0.0:
        return np.zeros(n)
    first = gen.standard_normal() * sigma
    out, _ = lfilter([1.0], [1.0, -phi], innov, zi=[phi * first])
    return out


def _missing_days(gen: np.random.Generator, params: SynthParams) -> np.ndarray:
    """Boolean (n_days,) array, True on days lost to hiatus episodes."""
    n_days = params.n_days
    missing = np.zeros(n_days + 1, dtype=bool)
    if params.hiatus_rate_per_year <= 0:
        return missing[:n_days]
    n_ep = gen.poisson(params.hiatus_rate_per_year * params.years)
    if n_ep == 0:
        return missing[:n_days]
    starts = np.sort(gen.uniform(0.0, n_days, n_ep)).astype(np.int64)
    lengths = gen.geometric(1.0 / params.hiatus_mean_days, n_ep).astype(np.int64)
    # Mark [start, start+length) with a difference array, then a running sum.
    diff = np.zeros(n_days + 2, dtype=np.int64)
    np.add.at(diff, starts, 1)
    np.add.at(diff, np.minimum(starts + lengths, n_days + 1), -1)
    missing = np.cumsum(diff)[:n_days] > 0
    return missing


def simulate_laminae(params: SynthParams, rng=None) -> LaminaRecord:
    """Simulate the laminae a column records (thickness, missing days, growth direction).

    Parameters
    ----------
    params : SynthParams
        The model parameters (see the module docstring for the thickness model).
    rng : int, numpy.random.Generator or None
        Seed or generator; None uses ``params.seed``. The draws are, in order: the AR(1) noise, then
        the hiatus episodes, so the same seed always gives the same record.

    Returns
    -------
    LaminaRecord
    """
    if not isinstance(params, SynthParams):
        from ..errors import ParameterError
        raise ParameterError(f"expected SynthParams but got {type(params).__name__}")
    gen, seed = _rng(rng, params)
    p = params
    n = p.n_nominal
    t_days = np.arange(n, dtype=float) / p.laminae_per_day
    omega_year = 2.0 * np.pi / p.days_per_year

    factor = 1.0 + p.annual_amplitude * np.cos(omega_year * t_days + p.annual_phase_rad)
    if p.tidal_amplitude > 0:
        omega_month = 2.0 * np.pi / p.days_per_synodic_month
        factor *= 1.0 + p.tidal_amplitude * (0.7 * np.cos(2.0 * omega_month * t_days)
                                             + 0.3 * np.cos(omega_month * t_days))
    sigma2 = np.log1p(p.noise_cv ** 2)
    noise = _ar1(gen, n, p.ar1_phi, np.sqrt(sigma2))
    thickness = p.mean_thickness_mm * factor * np.exp(noise - 0.5 * sigma2)

    day = np.floor(t_days + 1e-9).astype(np.int64)
    missing = _missing_days(gen, p)
    keep = ~missing[np.minimum(day, missing.size - 1)] if missing.size else np.ones(n, bool)
    if keep.sum() < 2:
        from ..errors import ParameterError
        raise ParameterError(f"hiatuses removed all but {int(keep.sum())} laminae; lower "
                             f"hiatus_rate_per_year or hiatus_mean_days")
    kept = np.flatnonzero(keep)
    hiatus_after = np.zeros(kept.size, dtype=bool)
    hiatus_after[:-1] = np.diff(kept) > 1

    sway = p.sway_amplitude_deg * np.sin(omega_year * t_days[kept] + p.sway_phase_rad)
    az_u = np.radians(p.sway_azimuth_deg)
    az_m = np.radians(p.mean_tilt_azimuth_deg)
    if p.meander_amplitude_deg > 0:
        phi_m = float(np.exp(-1.0 / p.meander_correlation_laminae))
        m_east = _ar1(gen, n, phi_m, p.meander_amplitude_deg)[kept]
        m_north = _ar1(gen, n, phi_m, p.meander_amplitude_deg)[kept]
    else:
        m_east = m_north = np.zeros(kept.size)
    east = p.mean_tilt_deg * np.sin(az_m) + sway * np.sin(az_u) + m_east
    north = p.mean_tilt_deg * np.cos(az_m) + sway * np.cos(az_u) + m_north

    h = thickness[kept]
    heights = np.empty(h.size + 1)
    heights[0] = 0.0
    np.cumsum(h, out=heights[1:])
    return LaminaRecord(
        thickness_mm=h,
        day_index=day[kept],
        boundary_heights_mm=heights,
        inclination_deg=np.hypot(east, north),
        azimuth_deg=np.degrees(np.arctan2(east, north)) % 360.0,
        sway_deg=east * np.sin(az_u) + north * np.cos(az_u),
        hiatus_after=hiatus_after,
        params=p,
        seed=seed,
        tilt_east_deg=east,
        tilt_north_deg=north,
        nominal_index=kept,
        annual_sway_deg=sway,
        meander_east_deg=m_east,
        meander_north_deg=m_north,
    )
