"""Calibration of the periodicity test on forward-model series with known truth.

Prints (1) the coverage of the 95% interval of days per year over forward-model series with a known
number of days per year and no missing days (target 92-98%), per method and combined, and (2) the rate
at which red noise alone is declared to hold an annual cycle (target at most 5%).

Usage:  python benchmarks/calibration.py [N_SERIES] [N_SIM]      (defaults 300 and 199)
        python benchmarks/calibration.py --mesh                 (whole forward-model specimen only)

With ``--mesh`` a clear-case specimen (mesh, 400 days per year, 4 years, no missing days) goes through
the whole pipeline (bandgeo.pipeline.analyze) and the interval is compared with the truth (target:
contains it and at most 5% wide).
"""
from __future__ import annotations

import sys
import time

import numpy as np

from bandgeo.series import series_from_thickness
from bandgeo.spectral import test_periodicity
from bandgeo.synth import SynthParams, simulate_laminae

#: Tilt measurement noise added to the forward model's (noise-free) growth direction, degrees: an
#: isotropic error of each tilt component (east, north), as a measured growth direction would have.
TILT_NOISE_DEG = 0.5


def _noisy_tilt(rec, rng):
    """Inclination and azimuth of the forward model's tilt vector plus isotropic measurement noise."""
    east = rec.tilt_east_deg + rng.normal(0, TILT_NOISE_DEG, rec.n_laminae)
    north = rec.tilt_north_deg + rng.normal(0, TILT_NOISE_DEG, rec.n_laminae)
    return np.hypot(east, north), np.degrees(np.arctan2(east, north)) % 360.0


def signal_case(i: int, with_sway: bool = True):
    """A forward-model record with an annual cycle; returns (series, true days per year)."""
    rng = np.random.default_rng(1000 + i)
    dpy = float(rng.uniform(340, 460))
    p = SynthParams(days_per_year=dpy, years=float(rng.uniform(4, 7)), annual_amplitude=float(rng.uniform(0.15, 0.35)),
                    noise_cv=float(rng.uniform(0.15, 0.35)), ar1_phi=float(rng.uniform(0.2, 0.7)),
                    annual_phase_rad=float(rng.uniform(0, 2 * np.pi)), sway_amplitude_deg=2.0,
                    sway_phase_rad=float(rng.uniform(0, 2 * np.pi)), seed=i)
    rec = simulate_laminae(p)
    if not with_sway:
        return series_from_thickness(rec.thickness_mm, source="synth"), dpy
    inc, az = _noisy_tilt(rec, rng)
    return series_from_thickness(rec.thickness_mm, inc, az, source="synth"), dpy


def null_case(i: int, with_sway: bool = True):
    """A forward-model record with red noise only (no annual, tidal or sway cycle)."""
    rng = np.random.default_rng(5000 + i)
    p = SynthParams(days_per_year=400.0, years=float(rng.uniform(4, 7)), annual_amplitude=0.0,
                    noise_cv=float(rng.uniform(0.15, 0.35)), ar1_phi=float(rng.uniform(0.2, 0.8)),
                    sway_amplitude_deg=0.0, seed=10_000 + i)
    rec = simulate_laminae(p)
    if not with_sway:
        return series_from_thickness(rec.thickness_mm, source="synth")
    inc, az = _noisy_tilt(rec, rng)
    return series_from_thickness(rec.thickness_mm, inc, az, source="synth")


def coverage(n_series: int, n_sim: int, methods=("spectrum", "cycle_count", "sway"), with_sway=True):
    """Fraction of signal cases whose interval holds the truth, per method and combined."""
    hits = {"combined": [], "thickness_spectrum": [], "cycle_count": [], "sway": []}
    detected = 0
    widths = []
    for i in range(n_series):
        s, truth = signal_case(i, with_sway)
        d = test_periodicity(s, n_sim=n_sim, seed=i, methods=methods).to_dict()["days_per_year"]
        if not d["significant"]:
            hits["combined"].append(False)
            continue
        detected += 1
        lo, hi = d["ci95"]
        hits["combined"].append(lo <= truth <= hi)
        widths.append((hi - lo) / truth)
        for name, block in d["methods"].items():
            if block.get("ci95"):
                lo, hi = block["ci95"]
                hits[name].append(lo <= truth <= hi)
    return {k: (float(np.mean(v)) if v else None, len(v)) for k, v in hits.items()}, detected, widths


def false_alarms(n_series: int, n_sim: int, methods=("spectrum", "cycle_count", "sway"), with_sway=True):
    """Fraction of red-noise cases declared to hold a significant annual cycle."""
    flags = []
    for i in range(n_series):
        d = test_periodicity(null_case(i, with_sway), n_sim=n_sim, seed=i,
                             methods=methods).to_dict()["days_per_year"]
        flags.append(bool(d["significant"]))
    return float(np.mean(flags))


def main(n_series: int = 300, n_sim: int = 199) -> int:
    from threadpoolctl import threadpool_info

    threads = sorted({i.get("num_threads") for i in threadpool_info()})
    print(f"calibration: {n_series} series each, n_sim = {n_sim}, BLAS threads {threads}")
    t0 = time.perf_counter()
    cov, det, widths = coverage(n_series, n_sim)
    t1 = time.perf_counter()
    print(f"coverage of the 95% interval (target 0.92-0.98), {det}/{n_series} detected "
          f"({t1 - t0:.1f} s):")
    for k, (frac, m) in cov.items():
        print(f"  {k:20s} {'-' if frac is None else f'{frac:.3f}'}  over {m} series")
    print(f"  median relative width of the combined interval: {np.median(widths):.4f}")
    fa = false_alarms(n_series, n_sim)
    t2 = time.perf_counter()
    print(f"red noise declared annual (target <= 0.05): {fa:.3f} over {n_series} series ({t2 - t1:.1f} s)")
    fa1 = false_alarms(n_series, n_sim, methods=("spectrum", "cycle_count"), with_sway=False)
    print(f"  thickness only: {fa1:.3f} ({time.perf_counter() - t2:.1f} s)")
    return 0


def mesh_case(folder: str = None, n_sim: int = 499) -> dict:
    """Clear-case forward-model specimen through the whole pipeline; prints and returns the figures."""
    import tempfile
    from pathlib import Path

    from bandgeo.pipeline import analyze
    from bandgeo.synth.specimen import simulate
    from bandgeo.synth.writer import write_specimen

    folder = Path(folder or tempfile.mkdtemp(prefix="bandgeo-calibration-"))
    truth = 400.0
    p = SynthParams(days_per_year=truth, years=4, annual_amplitude=0.3, noise_cv=0.15, seed=7)
    t0 = time.perf_counter()
    write_specimen(simulate(p), folder / "KRB-07.ply")
    st = analyze(folder / "KRB-07.ply", folder / "out", report=False, n_sim=n_sim)
    d = st.result["days_per_year"]
    n_bands = st.result["bands"]["count"]
    out = {"truth": truth, "true_bands": p.n_nominal, "bands_found": n_bands, "estimate": d["estimate"],
           "ci95": d["ci95"], "method": d["method"], "seconds": time.perf_counter() - t0}
    print(f"whole specimen (mesh): {n_bands} bands found of {p.n_nominal}; days per year "
          f"{d['estimate']} with 95% interval {d['ci95']} ({d['method']}); truth {truth:g}; "
          f"{out['seconds']:.1f} s")
    if d["ci95"]:
        lo, hi = d["ci95"]
        print(f"  contains the truth: {lo <= truth <= hi}; width {(hi - lo) / truth:.2%} of the truth "
              f"(target: contains it, at most 5%); bands found / years = {n_bands / p.years:.1f}")
    return out


if __name__ == "__main__":
    if "--mesh" in sys.argv:
        mesh_case()
        sys.exit(0)
    args = [int(a) for a in sys.argv[1:]]
    sys.exit(main(*args))
