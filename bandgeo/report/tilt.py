"""Heliotropic tilt of a column, from the growth direction of each band: sway-plane azimuth, sway
amplitude and mean lean, each with a 95 % interval from a moving-block bootstrap.

The tilt of band ``i`` is the vector ``t_i = inclination_i * (sin az_i, cos az_i)`` (east, north) in
degrees (small-angle plan view of the growth direction). The *mean lean* is the length of the mean
tilt vector and its azimuth; the *sway plane* is the principal axis of the centred tilt vectors
(as :func:`bandgeo.series.fit_sway_plane`); the *sway amplitude* is the amplitude of a sinusoid at the
annual period (least squares, with a linear trend) fitted to the tilt component in the sway plane, or
``sqrt(2)`` times its standard deviation when no annual period was found.

The bootstrap resamples blocks of consecutive bands (one annual period long, or 50 bands) so that the
serial correlation of the tilt series is kept (moving-block bootstrap, Kunsch 1989, Ann. Stat. 17:1217).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

N_BOOT = 400


@dataclass
class TiltSummary:
    """Heliotropic tilt of one column (angles in degrees, azimuths clockwise from north)."""

    n_bands: int
    east_deg: np.ndarray                 # (N,) tilt component toward +x (east), degrees
    north_deg: np.ndarray                # (N,) tilt component toward +y (north), degrees
    sway_azimuth_deg: float              # 0-180, axis of the sway plane
    sway_azimuth_ci95: list
    sway_amplitude_deg: float
    sway_amplitude_ci95: list
    sway_amplitude_method: str
    mean_lean_deg: float
    mean_lean_ci95: list
    mean_lean_azimuth_deg: float
    period_bands: float | None
    north_known: bool
    source: str
    method: str = ("tilt vectors inclination x (sin azimuth, cos azimuth); sway plane = principal axis of "
                   "the centred vectors; 95 % intervals from a moving-block bootstrap")
    n_boot: int = N_BOOT
    notes: list = field(default_factory=list)

    @property
    def sway_component_deg(self) -> np.ndarray:
        """(N,) tilt component along the sway plane's azimuth, degrees."""
        a = np.radians(self.sway_azimuth_deg)
        return self.east_deg * np.sin(a) + self.north_deg * np.cos(a)


def _axis_azimuth(e: np.ndarray, n: np.ndarray) -> np.ndarray:
    """Principal-axis azimuth (0-180) of centred 2-D vectors, vectorised over the leading axis."""
    e = e - e.mean(axis=-1, keepdims=True)
    n = n - n.mean(axis=-1, keepdims=True)
    see, snn, sen = (e * e).sum(-1), (n * n).sum(-1), (e * n).sum(-1)
    # the major axis of [[see, sen], [sen, snn]] makes angle theta with +east: tan 2theta = 2 sen/(see-snn)
    theta = 0.5 * np.arctan2(2 * sen, see - snn)
    return np.degrees(np.pi / 2 - theta) % 180.0          # azimuth from north, clockwise


def _amplitude(x: np.ndarray, y: np.ndarray, period: float | None) -> np.ndarray:
    """Sinusoid amplitude at ``period`` (with mean and trend), vectorised over y's leading axis."""
    if period is None:
        return np.sqrt(2.0) * y.std(axis=-1)
    w = 2 * np.pi / period
    X = np.column_stack([np.ones_like(x), x - x.mean(), np.cos(w * x), np.sin(w * x)])
    coef, *_ = np.linalg.lstsq(X, np.atleast_2d(y).T, rcond=None)
    return np.hypot(coef[2], coef[3])


def _percentile_axial(values: np.ndarray, centre: float) -> list:
    """95 % interval of axial angles (period 180) around ``centre``."""
    d = (values - centre + 90.0) % 180.0 - 90.0
    lo, hi = np.percentile(d, [2.5, 97.5])
    return [float(centre + lo), float(centre + hi)]


def summarise_tilt(inclination_deg, azimuth_deg, period_bands=None, seed=0, north_known=True,
                   source="base boundary of each band", n_boot=N_BOOT) -> TiltSummary | None:
    """Tilt summary of a column, or None with fewer than 12 usable bands.

    Parameters
    ----------
    inclination_deg, azimuth_deg : (N,) float
        Growth direction of each band from the paleo-vertical, and its azimuth clockwise from north.
    period_bands : float or None
        Annual period in bands, when a significant one was found.
    seed : int
        Seed of the bootstrap.
    """
    inc = np.asarray(inclination_deg, float).reshape(-1)
    az = np.radians(np.asarray(azimuth_deg, float).reshape(-1))
    ok = np.isfinite(inc) & np.isfinite(az)
    if ok.sum() < 12:
        return None
    x = np.flatnonzero(ok).astype(float)
    e, n = inc[ok] * np.sin(az[ok]), inc[ok] * np.cos(az[ok])
    period = float(period_bands) if period_bands and np.isfinite(period_bands) and period_bands < len(x) else None
    sway_az = float(_axis_azimuth(e, n))
    a = np.radians(sway_az)
    amp = float(_amplitude(x, e * np.sin(a) + n * np.cos(a), period)[0] if period else
                _amplitude(x, e * np.sin(a) + n * np.cos(a), None))
    mean_e, mean_n = float(e.mean()), float(n.mean())

    # moving-block bootstrap
    rng = np.random.default_rng(seed)
    m = len(x)
    block = int(np.clip(round(period) if period else 50, 5, max(m // 3, 5)))
    n_blocks = int(np.ceil(m / block))
    starts = rng.integers(0, m - block + 1, size=(n_boot, n_blocks))
    idx = (starts[:, :, None] + np.arange(block)[None, None, :]).reshape(n_boot, -1)[:, :m]
    be, bn = e[idx], n[idx]
    b_az = _axis_azimuth(be, bn)
    b_lean = np.hypot(be.mean(1), bn.mean(1))
    ba = np.radians(b_az)[:, None]
    comp = be * np.sin(ba) + bn * np.cos(ba)
    if period:
        # the block keeps whole cycles, so the phase of the resampled series stays that of x[idx]
        w = 2 * np.pi / period
        xs = x[idx]
        X = np.stack([np.ones_like(xs), xs - xs.mean(axis=1, keepdims=True), np.cos(w * xs), np.sin(w * xs)],
                     axis=-1)                                         # (n_boot, m, 4)
        XtX = np.einsum("bmi,bmj->bij", X, X)
        Xty = np.einsum("bmi,bm->bi", X, comp)
        coef = np.linalg.solve(XtX + 1e-12 * np.eye(4), Xty[..., None])[..., 0]
        b_amp = np.hypot(coef[:, 2], coef[:, 3])
        amp_method = f"amplitude of a sinusoid at the annual period ({period:.0f} bands), least squares with a linear trend"
    else:
        b_amp = np.sqrt(2.0) * comp.std(axis=1)
        amp_method = "sqrt(2) x standard deviation of the tilt in the sway plane (no annual period was found to fit)"
    notes = []
    if not north_known:
        notes.append("north was not given: azimuths are measured from the specimen's arbitrary y axis")
    return TiltSummary(
        n_bands=int(m), east_deg=e, north_deg=n, sway_azimuth_deg=sway_az,
        sway_azimuth_ci95=_percentile_axial(b_az, sway_az), sway_amplitude_deg=amp,
        sway_amplitude_ci95=[float(v) for v in np.percentile(b_amp, [2.5, 97.5])],
        sway_amplitude_method=amp_method, mean_lean_deg=float(np.hypot(mean_e, mean_n)),
        mean_lean_ci95=[float(v) for v in np.percentile(b_lean, [2.5, 97.5])],
        mean_lean_azimuth_deg=float(np.degrees(np.arctan2(mean_e, mean_n)) % 360.0), period_bands=period,
        north_known=bool(north_known), source=source, n_boot=n_boot, notes=notes)


def tilt_from_state(state, period_bands=None, seed=0) -> TiltSummary | None:
    """Tilt summary from the band table of an analysis state (base-boundary angles when measured)."""
    table = getattr(state, "band_table", None)
    if table is None:
        return None
    inc, az = getattr(table, "base_inclination_deg", None), getattr(table, "base_azimuth_deg", None)
    source = "base boundary normal of each band"
    if inc is None or az is None or not np.isfinite(np.asarray(inc, float)).any():
        inc, az = getattr(table, "inclination_deg", None), getattr(table, "azimuth_deg", None)
        source = "mean of each band's two boundary normals"
    if inc is None or az is None:
        return None
    spec = getattr(state, "specimen", None)
    north = bool(getattr(table, "north_known", getattr(spec, "north_known", True)))
    return summarise_tilt(inc, az, period_bands=period_bands, seed=seed, north_known=north, source=source)
