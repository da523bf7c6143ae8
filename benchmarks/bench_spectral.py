"""Benchmark of the periodicity test: a series of 1e5 bands with 1000 Monte Carlo replicates (target: a
few seconds), the batched null against one astropy call per replicate, and peak memory.

Usage:  python benchmarks/bench_spectral.py [N_BANDS] [N_SIM]
"""
from __future__ import annotations

import sys
import time
import tracemalloc

import numpy as np


def _threads():
    from threadpoolctl import threadpool_info

    return sorted({i.get("num_threads") for i in threadpool_info()})


def main(n: int = 100_000, n_sim: int = 1000) -> int:
    from bandgeo.series import series_from_thickness
    from bandgeo.spectral import test_periodicity
    from bandgeo.spectral.lomb_scargle import fft_frequencies, n_fft_for
    from bandgeo.spectral.significance import band_mask, max_ratio_null
    from bandgeo.synth import SynthParams, simulate_laminae

    print(f"BLAS/OpenMP threads: {_threads()}")
    rec = simulate_laminae(SynthParams(days_per_year=400, years=n / 400, annual_amplitude=0.2,
                                       noise_cv=0.3, sway_amplitude_deg=2, seed=1))
    rng = np.random.default_rng(0)
    inc = rec.inclination_deg + rng.normal(0, 0.5, rec.n_laminae)
    s = series_from_thickness(rec.thickness_mm, inc, rec.azimuth_deg)
    import os

    print(f"load average before: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    times = []
    for rep in range(3):
        t0 = time.perf_counter()
        res = test_periodicity(s, n_sim=n_sim, seed=rep, methods=("spectrum", "cycle_count"))
        times.append(time.perf_counter() - t0)
    print(f"test_periodicity, {len(s)} bands, n_sim {n_sim}, thickness only (one null and one interval Monte "
          f"Carlo of {n_sim} series each): median {np.median(times):.2f} s over 3 runs "
          f"(min {min(times):.2f}, max {max(times):.2f})")
    t0 = time.perf_counter()
    res = test_periodicity(s, n_sim=n_sim, seed=0)
    full = time.perf_counter() - t0
    d = res.days_per_year
    print(f"test_periodicity with the sway series too (two nulls, two interval Monte Carlos): {full:.2f} s; "
          f"ratio to thickness only {full / np.median(times):.2f}")
    print(f"  estimate {d['estimate']:.3f} bands, 95% interval {d['ci95'][0]:.3f}-{d['ci95'][1]:.3f} "
          f"(truth 400)")

    tracemalloc.start()
    test_periodicity(s, n_sim=n_sim, seed=9)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    print(f"  peak traced memory {peak / 1e6:.0f} MB; load average after: {os.getloadavg()[0]:.1f}")

    # Batched null against one astropy call per replicate, on 2000-band series (PERF-NOTES setting).
    from astropy.timeseries import LombScargle

    m = 2000
    n_fft = n_fft_for(m)
    fr = fft_frequencies(n_fft)
    mask = band_mask(fr, 3 / m, 0.25)
    t0 = time.perf_counter()
    max_ratio_null(m, 0.5, 1.0, mask, n_fft, 1000, np.random.default_rng(1))
    batched = time.perf_counter() - t0
    t0 = time.perf_counter()
    k = 50
    tt = np.arange(m)
    for _ in range(k):
        y = rng.standard_normal(m)
        LombScargle(tt, y, normalization="psd").power(fr[1:], method="fast")
    loop = (time.perf_counter() - t0) * 1000 / k
    print(f"1000 red-noise periodograms of {m} bands (with background re-fit): batched {batched:.2f} s; "
          f"one astropy call each (extrapolated from {k}): {loop:.2f} s; ratio {loop / batched:.1f}x")
    return 0


if __name__ == "__main__":
    sys.exit(main(*[int(a) for a in sys.argv[1:]]))
