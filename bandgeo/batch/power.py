"""Power analysis: how many years of record a specimen needs for its annual cycle to be detected.

For each record length the forward model (``bandgeo.synth.simulate_laminae``) draws ``n_trials``
lamina records; each goes through the same periodicity test the pipeline uses
(``bandgeo.series.series_from_thickness`` then ``bandgeo.spectral.test_periodicity``). The table gives
the detection probability with a Wilson (1927) score interval, the median width of the 95% interval
of days per year among detections, and its coverage of the true value.

References
----------
Wilson, E. B. (1927). Probable inference, the law of succession, and statistical inference.
J. Am. Stat. Assoc. 22:209-212.
Clopper, C. J. & Pearson, E. S. (1934). The use of confidence or fiducial limits illustrated in the
case of the binomial. Biometrika 26:404-413.
"""
from __future__ import annotations

import csv
import io
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional, Sequence

import numpy as np

from ..atomic import atomic_path, write_json, write_text
from ..constants import DEFAULT_SEED
from ..errors import BandgeoError, ParameterError
from ..progress import ProgressCallback, report

#: Table columns and their units (probabilities and counts have none).
COLUMNS = [("years", "yr"), ("bands_mean", "bands"), ("n_trials", ""), ("n_detected", ""),
           ("p_detect", ""), ("p_detect_ci95_low", ""), ("p_detect_ci95_high", ""),
           ("p_correct", ""), ("p_correct_ci95_low", ""), ("p_correct_ci95_high", ""),
           ("median_ci_width_days_per_year", "days/yr"), ("median_estimate_days_per_year", "days/yr"),
           ("coverage", ""), ("coverage_ci95_low", ""), ("coverage_ci95_high", ""),
           ("searched_max_bands", "bands"), ("n_errors", "")]


def binomial_ci(k: int, n: int, method: str = "wilson") -> tuple[Optional[float], Optional[float]]:
    """95% interval of a binomial proportion k/n: ``"wilson"`` (Wilson 1927) or ``"exact"``
    (Clopper & Pearson 1934), computed by ``scipy.stats.binomtest``. (None, None) when n = 0."""
    from scipy import stats

    if n == 0:
        return None, None
    ci = stats.binomtest(int(k), int(n)).proportion_ci(confidence_level=0.95, method=method)
    return float(ci.low), float(ci.high)


@dataclass
class PowerTable:
    """Detection probability and interval width against years of record.

    Attributes
    ----------
    rows : list of dict
        One per years value; keys as in :data:`COLUMNS`.
    params : dict
        The forward-model and test settings (noise, amplitude, days per year, trials, seed, ...).
    trials : list of dict
        Every trial: ``years``, ``trial``, ``detected``, ``estimate``, ``ci95_low``, ``ci95_high``,
        ``p_value``, ``n_bands``, ``error``.
    """

    rows: list
    params: dict
    trials: list = field(default_factory=list, repr=False)
    files: dict = field(default_factory=dict)

    def to_csv(self) -> str:
        buf = io.StringIO()
        writer = csv.writer(buf, lineterminator="\n")
        writer.writerow([c for c, _ in COLUMNS])  # names carry the units (years, days_per_year)
        for row in self.rows:
            writer.writerow(["" if row[c] is None else (f"{row[c]:.6g}" if isinstance(row[c], float) else row[c])
                             for c, _ in COLUMNS])
        return buf.getvalue()

    def format_table(self) -> str:
        """Plain-text table with units, for the terminal."""
        p = self.params
        lines = [f"Power to detect the annual cycle: {p['days_per_year']:g} days/yr, annual amplitude "
                 f"{p['annual_amplitude']:g} (fraction of thickness), lamina noise CV {p['noise_cv']:g}, "
                 f"AR(1) phi {p['ar1_phi']:g}; {p['n_trials']} trials per row; seed {p['seed']}",
                 f"{'years':>6} {'bands':>7} {'P(detect) [95% Wilson CI]':>28} "
                 f"{'P(detect & cover)':>18} {'median 95% CI width':>20} {'coverage [95% CI]':>24}",
                 f"{'(yr)':>6} {'(n)':>7} {'':>28} {'':>18} {'(days/yr)':>20} {'':>24}"]
        for r in self.rows:
            det = f"{r['p_detect']:.3f} [{r['p_detect_ci95_low']:.3f}, {r['p_detect_ci95_high']:.3f}]"
            width = "-" if r["median_ci_width_days_per_year"] is None else f"{r['median_ci_width_days_per_year']:.1f}"
            cov = "-" if r["coverage"] is None else (
                f"{r['coverage']:.3f} [{r['coverage_ci95_low']:.3f}, {r['coverage_ci95_high']:.3f}]")
            lines.append(f"{r['years']:>6g} {r['bands_mean']:>7.0f} {det:>28} {r['p_correct']:>18.3f} "
                         f"{width:>20} {cov:>24}")
        lines.append("P(detect): share of trials where the test declared a significant annual cycle "
                     "(at zero amplitude this is the false-alarm rate). P(detect & cover): detected and "
                     f"the 95% interval holds the true {p['truth_days_per_year']:g} bands/yr. Coverage: "
                     "that share among detections.")
        short = [r["years"] for r in self.rows if r["searched_max_bands"] is not None
                 and r["searched_max_bands"] < p["truth_days_per_year"]]
        if short:
            lines.append(f"Records of {', '.join(f'{y:g}' for y in short)} yr put the true annual period "
                         "beyond the test's searched band (longest period searched is about a third of "
                         "the record): detections there are other cycles or false alarms.")
        return "\n".join(lines)

    def to_dict(self) -> dict:
        return {"schema": "bandgeo.power/1", "params": self.params, "rows": self.rows, "trials": self.trials,
                "interval_method": "Wilson (1927) score interval via scipy.stats.binomtest"}

    def write(self, out_dir, formats: Sequence[str] = ("svg", "pdf", "png")) -> dict:
        """Write ``power.csv``, ``power.json`` and ``power.<fmt>`` plots into ``out_dir``."""
        out_dir = Path(out_dir)
        out_dir.mkdir(parents=True, exist_ok=True)
        self.files["csv"] = write_text(out_dir / "power.csv", self.to_csv())
        self.files["json"] = write_json(out_dir / "power.json", self.to_dict())
        for fmt in formats:
            self.files[fmt] = self.plot(out_dir / f"power.{fmt}")
        return self.files

    def plot(self, path) -> Path:
        """Detection probability (with Wilson intervals) and median interval width against years."""
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt

        years = np.array([r["years"] for r in self.rows], float)
        pdet = np.array([r["p_detect"] for r in self.rows], float)
        low = np.array([r["p_detect_ci95_low"] for r in self.rows], float)
        high = np.array([r["p_detect_ci95_high"] for r in self.rows], float)
        width = np.array([np.nan if r["median_ci_width_days_per_year"] is None
                          else r["median_ci_width_days_per_year"] for r in self.rows], float)
        fig, (a1, a2) = plt.subplots(1, 2, figsize=(9.0, 3.8), constrained_layout=True)
        a1.errorbar(years, pdet, yerr=[pdet - low, high - pdet], fmt="o-", color="#0072B2", capsize=3,
                    label="P(detect), 95% Wilson interval")
        pok = np.array([r["p_correct"] for r in self.rows], float)
        a1.plot(years, pok, "^:", color="#CC79A7", label="detected and interval holds the truth")
        a1.axhline(0.05, color="#D55E00", ls="--", lw=1, label="nominal false-alarm rate 5%")
        a1.set_ylim(-0.02, 1.02)
        a1.set_xlabel("years of record (yr)")
        a1.set_ylabel("probability of detecting the annual cycle")
        a1.legend(fontsize=7, loc="lower right")
        a2.plot(years, width, "s-", color="#009E73")
        a2.set_xlabel("years of record (yr)")
        a2.set_ylabel("median width of 95% interval (days/yr)")
        p = self.params
        fig.suptitle(f"{p['days_per_year']:g} days/yr, amplitude {p['annual_amplitude']:g}, noise CV "
                     f"{p['noise_cv']:g}, AR(1) {p['ar1_phi']:g}; {p['n_trials']} trials per point",
                     fontsize=9)
        for ax in (a1, a2):
            ax.grid(True, lw=0.3, alpha=0.6)
        path = Path(path)
        with atomic_path(path) as tmp:
            fig.savefig(tmp, format=path.suffix.lstrip(".").lower(), dpi=150)
        plt.close(fig)
        return path


def _trial(model: dict, years: float, trial_seed: int, n_sim: int, use_tilt: bool) -> dict:
    """One forward-model record through the periodicity test (module level: runs in workers)."""
    from .. import series as _series
    from .. import spectral as _spectral
    from ..synth import SynthParams, simulate_laminae

    params = SynthParams(**model, years=float(years), seed=int(trial_seed))
    record = simulate_laminae(params, int(trial_seed))
    out = {"years": float(years), "n_bands": int(record.n_laminae), "detected": False, "estimate": None,
           "ci95_low": None, "ci95_high": None, "p_value": None, "searched_max_bands": None, "error": None}
    try:
        series = _series.series_from_thickness(
            record.thickness_mm, inclination_deg=record.inclination_deg if use_tilt else None,
            azimuth_deg=record.azimuth_deg if use_tilt else None, source="forward model (power analysis)")
        dpy = _spectral.test_periodicity(series, n_sim=int(n_sim), seed=int(trial_seed)).to_dict()["days_per_year"]
    except BandgeoError as exc:  # e.g. a record too short to test: counted as not detected
        out["error"] = str(exc)
        return out
    ci = dpy.get("ci95") or [None, None]
    band = dpy.get("searched_band_bands_per_cycle") or [None, None]
    # A cycle found on too few cycles of record has its interval refused: no days per year, not detected.
    out.update(detected=bool(dpy.get("significant")) and dpy.get("estimate") is not None and ci[0] is not None,
               estimate=dpy.get("estimate"), ci95_low=ci[0],
               ci95_high=ci[1], p_value=dpy.get("p_value"), searched_max_bands=band[1])
    return out


def _chunk(args: list) -> list:
    return [_trial(*a) for a in args]


def power_analysis(noise_cv: float = 0.15, annual_amplitude: float = 0.3,
                   years: Sequence[float] = (1, 2, 3, 5, 8), days_per_year: float = 400.0,
                   n_trials: int = 200, seed: int = DEFAULT_SEED, ar1_phi: float = 0.5, workers: int = 1,
                   n_sim: int = 200, mean_thickness_mm: float = 0.25, hiatus_rate_per_year: float = 0.0,
                   use_tilt: bool = False, progress: Optional[ProgressCallback] = None) -> PowerTable:
    """Probability of detecting the annual cycle against years of record, by simulation.

    Parameters
    ----------
    noise_cv : float
        Coefficient of variation of the lamina-thickness noise (log-normal AR(1)).
    annual_amplitude : float
        Fractional annual modulation of thickness (0 = no annual cycle: the false-alarm case).
    years : sequence of float
        Record lengths to evaluate, years.
    days_per_year : float
        True solar days per year of the simulated column (one lamina a day).
    n_trials : int
        Simulated records per years value.
    seed : int
        Trial ``j`` of years value ``i`` uses a seed drawn from ``SeedSequence(seed, spawn_key=(i, j))``,
        so the table does not depend on ``workers``.
    ar1_phi : float
        Lag-1 autocorrelation of the log-noise.
    workers : int
        Local processes to spread the trials over.
    n_sim : int
        Monte Carlo replicates inside each periodicity test.
    use_tilt : bool
        Also give the test the growth-direction tilt (sway route); by default thickness only.

    Returns
    -------
    PowerTable
    """
    years = [float(y) for y in (years if isinstance(years, (list, tuple, np.ndarray)) else [years])]
    if not years or any(not np.isfinite(y) or y <= 0 for y in years):
        raise ParameterError(f"expected positive years of record but got {years}")
    if int(n_trials) < 1:
        raise ParameterError(f"expected n_trials >= 1 but got {n_trials}")
    if int(workers) < 1:
        raise ParameterError(f"expected workers >= 1 but got {workers}")
    model = {"days_per_year": float(days_per_year), "noise_cv": float(noise_cv),
             "annual_amplitude": float(annual_amplitude), "ar1_phi": float(ar1_phi),
             "mean_thickness_mm": float(mean_thickness_mm), "hiatus_rate_per_year": float(hiatus_rate_per_year)}
    from ..synth import SynthParams

    SynthParams(**model, years=years[0])  # validate once here: a bad value is one line, not n errors
    args = []
    for i, y in enumerate(years):
        for j in range(int(n_trials)):
            s = int(np.random.SeedSequence(int(seed), spawn_key=(i, j)).generate_state(1)[0])
            args.append((model, y, s, int(n_sim), bool(use_tilt)))
    trials: list = []
    total = len(args)
    size = max(1, min(20, total // (4 * int(workers)) or 1))
    chunks = [args[k:k + size] for k in range(0, total, size)]
    if int(workers) == 1:
        for chunk in chunks:
            trials.extend(_chunk(chunk))
            report(progress, f"power: {len(trials)}/{total} trials", len(trials), total)
    else:
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(max_workers=int(workers)) as pool:
            for result in pool.map(_chunk, chunks):
                trials.extend(result)
                report(progress, f"power: {len(trials)}/{total} trials", len(trials), total)
    truth = float(days_per_year) * 1.0  # one lamina a day: bands per annual cycle = days per year
    rows = [_summarise(y, [t for t in trials if t["years"] == y], truth) for y in years]
    params = {**model, "years": years, "n_trials": int(n_trials), "seed": int(seed), "n_sim": int(n_sim),
              "use_tilt": bool(use_tilt), "truth_days_per_year": truth, "laminae_per_day": 1.0,
              "workers": int(workers)}
    return PowerTable(rows=rows, params=params, trials=trials)


def _summarise(years: float, trials: list, truth: float) -> dict:
    n = len(trials)
    det = [t for t in trials if t["detected"]]
    k = len(det)
    low, high = binomial_ci(k, n)
    widths = [t["ci95_high"] - t["ci95_low"] for t in det if t["ci95_low"] is not None and t["ci95_high"] is not None]
    estimates = [t["estimate"] for t in det if t["estimate"] is not None]
    covered = [t["ci95_low"] <= truth <= t["ci95_high"] for t in det
               if t["ci95_low"] is not None and t["ci95_high"] is not None]
    c_low, c_high = binomial_ci(sum(covered), len(covered))
    k_ok = sum(covered)
    ok_low, ok_high = binomial_ci(k_ok, n)
    searched = [t["searched_max_bands"] for t in trials if t.get("searched_max_bands") is not None]
    return {"years": years, "bands_mean": float(np.mean([t["n_bands"] for t in trials])) if n else 0.0,
            "n_trials": n, "n_detected": k, "p_detect": k / n if n else 0.0,
            "p_detect_ci95_low": low, "p_detect_ci95_high": high,
            "p_correct": k_ok / n if n else 0.0, "p_correct_ci95_low": ok_low, "p_correct_ci95_high": ok_high,
            "searched_max_bands": float(np.median(searched)) if searched else None,
            "median_ci_width_days_per_year": float(np.median(widths)) if widths else None,
            "median_estimate_days_per_year": float(np.median(estimates)) if estimates else None,
            "coverage": (sum(covered) / len(covered)) if covered else None,
            "coverage_ci95_low": c_low, "coverage_ci95_high": c_high,
            "n_errors": sum(t["error"] is not None for t in trials)}
