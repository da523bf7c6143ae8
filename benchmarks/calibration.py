"""Calibration of the periodicity test on series with known truth.

Default: the independent generator (benchmarks/series_generator.py, written to differ from the forward
model: skewed and peaked seasons with harmonics, multiplicative log-normal AR(1) noise, drift and trends,
missing days and hiatuses, meandering tilt, no cycle in half the series). Prints the coverage of the 95%
interval and the false-alarm rate with binomial 95% intervals (Wilson; Clopper-Pearson in brackets, both
from scipy.stats.binomtest), broken down by record length, noise phi and annual shape.

Usage:  python benchmarks/calibration.py [N_SERIES] [N_SIM] [--workers K]   (defaults 400, 199, 1)
        python benchmarks/calibration.py --forward-model [N_SERIES] [N_SIM]

With ``--forward-model`` it prints (1) the coverage of the 95% interval of days per year over forward-model series with a known
number of days per year and no missing days (target 92-98%), per method and combined, and (2) the rate
at which red noise alone is declared to hold an annual cycle (target at most 5%).

Usage (forward model): python benchmarks/calibration.py --forward-model [N_SERIES] [N_SIM]
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


# ---------------------------------------------------------------- independent generator

def _one_independent(args):
    """Run the test on one generated series; returns a flat record."""
    i, n_sim, batch_seed = args
    import os
    sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
    from series_generator import make_series

    g = make_series(batch_seed * 100_003 + i, has_cycle=(i % 2 == 0))
    s = series_from_thickness(g["thickness_mm"], source="generator")
    s.sway_deg = g["sway_deg"]
    res = test_periodicity(s, n_sim=n_sim, seed=i).to_dict()
    d = res["days_per_year"]
    rec = {"i": i, "has_cycle": g["has_cycle"], "truth": g["bands_per_year"], "years": g["years"],
           "phi": g["phi"], "shape": g["shape"], "trend": g["trend"], "n": len(g["thickness_mm"]),
           "significant": bool(d["significant"]), "refused": bool(d.get("refused")),
           "estimate": d["estimate"], "ci95": d["ci95"], "weights": d.get("weights"),
           "thickness_ci95": (d.get("thickness_route") or {}).get("ci95"),
           "sway_ci95": (d["methods"].get("sway") or {}).get("ci95"),
           "cycle_ci95": (d["methods"].get("cycle_count") or {}).get("ci95"),
           "spec_ci95": (d["methods"].get("thickness_spectrum") or {}).get("ci95"),
           "consistency_p": (d.get("consistency") or {}).get("p_value"),
           "tidal": bool((res["tidal"] or {}).get("days_per_synodic_month"))}
    return rec


def _binom(k: int, n: int) -> str:
    from scipy.stats import binomtest

    if n == 0:
        return "   -   (no series)"
    r = binomtest(k, n)
    w = r.proportion_ci(0.95, method="wilson")
    e = r.proportion_ci(0.95, method="exact")
    return (f"{k:4d}/{n:<4d} = {k / n:.3f}  Wilson 95% [{w.low:.3f}, {w.high:.3f}]  "
            f"Clopper-Pearson [{e.low:.3f}, {e.high:.3f}]")


def _holds(ci, truth):
    return ci is not None and ci[0] is not None and ci[0] <= truth <= ci[1]


def independent(n_series: int = 400, n_sim: int = 199, workers: int = 1, batch_seed: int = 0) -> list:
    """Run the generator calibration and print the tables. Returns the records."""
    from threadpoolctl import threadpool_info, threadpool_limits

    threads = sorted({i.get("num_threads") for i in threadpool_info()})
    print(f"calibration on the independent generator (benchmarks/series_generator.py, batch seed "
          f"{batch_seed}): {n_series} series (half with an annual cycle), n_sim = {n_sim}, "
          f"{workers} worker(s), BLAS threads {threads}")
    t0 = time.perf_counter()
    args = [(i, n_sim, batch_seed) for i in range(n_series)]
    if workers > 1:
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(workers) as ex:
            recs = list(ex.map(_one_independent, args, chunksize=4))
    else:
        with threadpool_limits(1):
            recs = [_one_independent(a) for a in args]
    secs = time.perf_counter() - t0
    import json
    import os

    dump = os.environ.get("BANDGEO_CALIBRATION_JSON")
    if dump:
        with open(dump, "w") as fh:
            json.dump(recs, fh, default=float)
    cyc = [r for r in recs if r["has_cycle"]]
    null = [r for r in recs if not r["has_cycle"]]
    given = [r for r in cyc if r["ci95"] is not None]
    print(f"run time {secs:.0f} s ({secs / max(n_series, 1):.2f} s per series)")
    print("\nseries with an annual cycle:")
    print(f"  detected (significant)          {_binom(sum(r['significant'] for r in cyc), len(cyc))}")
    print(f"  estimate refused (with reason) {_binom(sum(r['refused'] for r in cyc), len(cyc))}")
    print(f"  COVERAGE of the 95% interval    {_binom(sum(_holds(r['ci95'], r['truth']) for r in given), len(given))}"
          "   target 0.92-0.98")
    for key, label in (("thickness_ci95", "thickness route"), ("spec_ci95", "thickness spectrum"),
                       ("cycle_ci95", "cycle counting"), ("sway_ci95", "sway")):
        sub = [r for r in cyc if r[key] is not None]
        print(f"    {label:28s}  {_binom(sum(_holds(r[key], r['truth']) for r in sub), len(sub))}")
    wrong = [r for r in given if not _holds(r["ci95"], r["truth"])]
    far = [r for r in wrong if abs(r["estimate"] / r["truth"] - 1) > 0.2]
    print(f"  misses more than 20% off the truth (harmonic or slow variation taken): {len(far)}")
    if given:
        wid = [(r["ci95"][1] - r["ci95"][0]) / r["truth"] for r in given]
        print(f"  median relative width {np.median(wid):.4f}; sway weight in the combination: median "
              f"{np.median([(r['weights'] or {}).get('sway', 0.0) for r in given]):.2f}")
    print("\nseries without an annual cycle:")
    print(f"  FALSE ALARMS (declared annual)  {_binom(sum(r['significant'] for r in null), len(null))}"
          "   target <= 0.05")
    print(f"  tidal cycle reported            {_binom(sum(r['tidal'] for r in null), len(null))}")

    def breakdown(name, key_fn, levels):
        print(f"\nby {name}:")
        for lev in levels:
            g = [r for r in given if key_fn(r) == lev]
            z = [r for r in null if key_fn(r) == lev]
            print(f"  {str(lev):12s} coverage {_binom(sum(_holds(r['ci95'], r['truth']) for r in g), len(g))}")
            print(f"  {'':12s} false al. {_binom(sum(r['significant'] for r in z), len(z))}")

    breakdown("record length (years)", lambda r: "3-5" if r["years"] < 5 else ("5-7.5" if r["years"] < 7.5 else "7.5-10"),
              ["3-5", "5-7.5", "7.5-10"])
    breakdown("noise phi", lambda r: "0.2-0.45" if r["phi"] < 0.45 else ("0.45-0.7" if r["phi"] < 0.7 else "0.7-0.9"),
              ["0.2-0.45", "0.45-0.7", "0.7-0.9"])
    print("\nby annual shape:")
    for shp in ("sine", "skewed", "peaked", "harmonics"):
        g = [r for r in given if r["shape"] == shp]
        c = [r for r in cyc if r["shape"] == shp]
        print(f"  {shp:12s} coverage {_binom(sum(_holds(r['ci95'], r['truth']) for r in g), len(g))}; "
              f"detected {sum(r['significant'] for r in c)}/{len(c)}")
    print("\nby trend (false alarms):")
    for tr in ("none", "linear", "quadratic", "exponential"):
        z = [r for r in null if r["trend"] == tr]
        print(f"  {tr:12s} {_binom(sum(r['significant'] for r in z), len(z))}")
    return recs


if __name__ == "__main__":
    argv = sys.argv[1:]
    if {"-h", "--help"} & set(argv):
        print("usage: python benchmarks/calibration.py [N_SERIES [N_SIM]] [--workers K] [--forward-model | --mesh]")
        sys.exit(0)
    if "--mesh" in argv:
        mesh_case()
        sys.exit(0)
    workers = 1
    if "--workers" in argv:
        k = argv.index("--workers")
        workers = int(argv[k + 1])
        del argv[k:k + 2]
    if "--forward-model" in argv:
        argv.remove("--forward-model")
        sys.exit(main(*[int(a) for a in argv]))
    independent(*[int(a) for a in argv], workers=workers)
    sys.exit(0)
