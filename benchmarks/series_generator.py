"""An independent generator of band series, written to differ from the forward model (bandgeo.synth)
on purpose, so that the periodicity test is calibrated on series it was not designed around.

It does not import ``bandgeo.synth``. What differs:

- the annual shape is skewed or peaked (von Mises-like growth season, a saw-tooth with a smooth
  reset) or carries random 2nd and 3rd harmonics, not a sine;
- the noise is multiplicative and log-normal, with AR(1) memory phi in 0.2-0.9;
- the growth rate drifts slowly (a smoothed random walk) and carries a long-term trend, linear or
  curved (quadratic or exponential);
- single days go missing and a few short hiatuses (3-20 days) are cut out of the record;
- records are 3-10 years long at 300-480 days per year;
- the tilt has an annual sway (when there is a cycle) plus meander noise: a slow AR(1) wander of the
  growth direction (phi 0.9-0.99) and white measurement noise;
- half the series have no annual cycle at all (thickness and tilt), but keep drift, trend and memory.

The truth given with each series is the mean number of *bands* per year actually present (days kept
over years spanned), which is what a count of bands can measure; the true days per year is given too.

Usage: ``make_series(seed)`` -> dict; ``make_batch(n, seed)`` -> list of dicts.
"""
from __future__ import annotations

import numpy as np

SHAPES = ("sine", "skewed", "peaked", "harmonics")
TRENDS = ("none", "linear", "quadratic", "exponential")


def _season(theta: np.ndarray, shape: str, rng: np.random.Generator) -> np.ndarray:
    """Zero-mean, unit-sd annual shape at phase ``theta`` (radians)."""
    if shape == "sine":
        g = np.sin(theta)
    elif shape == "skewed":
        # saw-tooth with a smooth reset: slow rise, fast fall (asymmetry a in 0.6-0.9 of the year)
        a = rng.uniform(0.6, 0.9)
        u = np.mod(theta, 2 * np.pi) / (2 * np.pi)
        g = np.where(u < a, u / a, (1 - u) / (1 - a))
        g = np.tanh(3 * (g - 0.5))
    elif shape == "peaked":
        # short growth season: von Mises bump, concentration 2-8
        kappa = rng.uniform(2.0, 8.0)
        g = np.exp(kappa * (np.cos(theta) - 1.0))
    else:
        c2, c3 = rng.uniform(0.3, 0.8), rng.uniform(0.1, 0.5)
        p2, p3 = rng.uniform(0, 2 * np.pi, 2)
        g = np.sin(theta) + c2 * np.sin(2 * theta + p2) + c3 * np.sin(3 * theta + p3)
    g = g - g.mean()
    sd = g.std()
    return g / sd if sd > 0 else g


def _ar1(rng, n, phi, sd):
    e = rng.standard_normal(n) * sd * np.sqrt(1 - phi * phi)
    out = np.empty(n)
    out[0] = rng.standard_normal() * sd
    for i in range(1, n):
        out[i] = phi * out[i - 1] + e[i]
    return out


def make_series(seed: int, *, has_cycle: bool | None = None, shape: str | None = None,
                phi: float | None = None, years: float | None = None) -> dict:
    """One series with its truth. Keyword arguments fix a factor; the rest is drawn from ``seed``.

    Returns
    -------
    dict
        ``thickness_mm (N,)``, ``sway_deg (N,)``, ``has_cycle``, ``bands_per_year`` (truth: bands kept
        per year spanned, or None), ``days_per_year``, ``years``, ``shape``, ``phi``, ``trend``,
        ``noise_sd`` (log scale), ``amplitude`` (relative, of the log thickness), ``missing_days``,
        ``hiatuses`` (list of (day, length)), ``sway_amplitude_deg``, ``meander_sd_deg``.
    """
    rng = np.random.default_rng(np.random.SeedSequence([int(seed), 424242]))
    if has_cycle is None:
        has_cycle = bool(rng.random() < 0.5)
    N = float(rng.uniform(300, 480))
    Y = float(rng.uniform(3, 10)) if years is None else float(years)
    shape = str(rng.choice(SHAPES)) if shape is None else shape
    phi = float(rng.uniform(0.2, 0.9)) if phi is None else float(phi)
    trend = str(rng.choice(TRENDS))
    D = int(round(N * Y))
    d = np.arange(D, dtype=float)
    theta = 2 * np.pi * d / N + rng.uniform(0, 2 * np.pi)
    u = 2 * d / (D - 1) - 1.0
    # long-term trend of the log growth rate
    k = rng.uniform(0.2, 0.8) * rng.choice([-1, 1])
    trend_f = {"none": 0 * u, "linear": k * u, "quadratic": k * (u * u - 1 / 3),
               "exponential": np.expm1(1.5 * u) * k / np.expm1(1.5)}[trend]
    # slow drift: a random walk smoothed over about one year, scaled to 0.05-0.25 (log units)
    walk = np.cumsum(rng.standard_normal(D))
    kern = np.ones(int(N)) / int(N)
    walk = np.convolve(walk - walk.mean(), kern, mode="same")
    walk = walk / max(walk.std(), 1e-12) * rng.uniform(0.05, 0.25)
    amp = float(rng.uniform(0.15, 0.45)) if has_cycle else 0.0
    season = amp * _season(theta, shape, rng) if has_cycle else 0.0 * d
    noise_sd = float(rng.uniform(0.15, 0.4))
    noise = _ar1(rng, D, phi, noise_sd)
    base = rng.uniform(0.02, 0.3)       # mm per day
    log_h = np.log(base) + trend_f + walk + season + noise - 0.5 * noise_sd ** 2
    thickness = np.exp(log_h)
    # tilt: annual sway (heliotropic, when there is a cycle) + meander + measurement noise
    sway_amp = float(rng.uniform(1.0, 4.0)) if has_cycle else 0.0
    meander_sd = float(rng.uniform(0.5, 3.0))
    sway = (sway_amp * np.sin(theta + rng.uniform(0, 2 * np.pi))
            + _ar1(rng, D, float(rng.uniform(0.9, 0.99)), meander_sd)
            + rng.normal(0, rng.uniform(0.2, 1.0), D))
    # missing days: scattered single days and a few short hiatuses
    keep = rng.random(D) >= rng.uniform(0.0, 0.02)
    hiatuses = []
    for _ in range(int(rng.integers(0, 4))):
        start, length = int(rng.integers(0, D - 20)), int(rng.integers(3, 21))
        keep[start:start + length] = False
        hiatuses.append((start, length))
    n_kept = int(keep.sum())
    return {"thickness_mm": thickness[keep], "sway_deg": sway[keep], "has_cycle": has_cycle,
            "bands_per_year": n_kept / (D / N) if has_cycle else None, "days_per_year": N, "years": Y,
            "shape": shape if has_cycle else "none", "phi": phi, "trend": trend, "noise_sd": noise_sd,
            "amplitude": amp, "missing_days": int(D - n_kept), "hiatuses": hiatuses,
            "sway_amplitude_deg": sway_amp, "meander_sd_deg": meander_sd}


def make_batch(n: int, seed: int = 0) -> list[dict]:
    """``n`` series, alternately with and without an annual cycle (half each), seeded."""
    return [make_series(seed * 100_003 + i, has_cycle=(i % 2 == 0)) for i in range(n)]


if __name__ == "__main__":     # a quick look
    for s in make_batch(6):
        print(s["has_cycle"], s["shape"], s["trend"], f"phi {s['phi']:.2f}", len(s["thickness_mm"]),
              s["bands_per_year"], s["missing_days"])
