"""Benchmark: simulate and write a forward-model specimen of 2 M faces (and 10 M with --full).

Usage:  python benchmarks/bench_synth.py [--full] [--repeats 3]

For each size: median time of ``simulate`` and of ``write_specimen`` (binary PLY + truth JSON), their
sum (target: about a minute for 10 M faces), the file size, and the peak memory of the whole step
(tracemalloc: numpy allocations) as a ratio to the written mesh's size. Also the time of
``simulate_laminae`` for 4000 laminae (target: about 1 ms) and the BLAS/OpenMP threads in use.
"""
from __future__ import annotations

import argparse
import math
import statistics
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from bandgeo.synth import SynthParams, simulate, simulate_laminae, write_specimen  # noqa: E402


def params_for_faces(n_faces: float, seed: int = 1) -> SynthParams:
    """Default parameters with the record length chosen to give about ``n_faces`` faces.

    Isotropic wall: rings every T/r along the axis, edge 2/sqrt(3) of that around, two faces per
    vertex: faces ~ 2 * (N r) * (pi R sqrt(3) r / T) with N laminae.
    """
    base = SynthParams(seed=seed)
    r, t, radius = base.rings_per_lamina, base.mean_thickness_mm, base.radius_mm
    per_lamina = 2 * r * (math.pi * radius * math.sqrt(3) * r / t)
    years = n_faces / per_lamina / base.days_per_year
    return base.replace(years=years)


def run(n_faces: float, repeats: int, folder: Path) -> None:
    p = params_for_faces(n_faces)
    t_sim, t_write = [], []
    peak = 0
    for k in range(repeats):
        tracemalloc.start()
        t0 = time.perf_counter()
        spec = simulate(p)
        t1 = time.perf_counter()
        out = write_specimen(spec, folder / f"bench_{int(n_faces)}.ply")
        t2 = time.perf_counter()
        peak = max(peak, tracemalloc.get_traced_memory()[1])
        tracemalloc.stop()
        t_sim.append(t1 - t0)
        t_write.append(t2 - t1)
        faces, verts, size = spec.n_faces, spec.n_vertices, out["mesh_bytes"]
        del spec
    sim, wr = statistics.median(t_sim), statistics.median(t_write)
    print(f"{faces / 1e6:6.2f} M faces ({verts / 1e6:.2f} M vertices, {p.years:.2f} years at "
          f"{p.days_per_year:g} d/yr): simulate {sim:6.2f} s, write {wr:5.2f} s, total {sim + wr:6.2f} s "
          f"(median of {repeats}); PLY {size / 2**20:.0f} MB; peak memory {peak / 2**20:.0f} MB "
          f"= {peak / size:.1f}x the file")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--full", action="store_true", help="also run the 10 M-face specimen")
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args(argv)
    try:
        from threadpoolctl import threadpool_info
        threads = ", ".join(f"{i['internal_api']}={i['num_threads']}" for i in threadpool_info())
    except ImportError:  # pragma: no cover
        threads = "threadpoolctl not installed"
    print(f"threads: {threads or 'none loaded'}")
    p = SynthParams(days_per_year=400, years=10)
    simulate_laminae(p)
    times = []
    for seed in range(200):
        t0 = time.perf_counter()
        simulate_laminae(p, rng=seed)
        times.append(time.perf_counter() - t0)
    print(f"simulate_laminae, {p.n_nominal} laminae: median {statistics.median(times) * 1e3:.2f} ms "
          f"(200 calls)")
    with tempfile.TemporaryDirectory() as tmp:
        run(2e6, args.repeats, Path(tmp))
        if args.full:
            run(10e6, max(1, min(args.repeats, 2)), Path(tmp))
    return 0


if __name__ == "__main__":
    sys.exit(main())
