"""Batch throughput: specimens per minute for 1 and 2 local workers (and a Dask LocalCluster of 2).

Usage:  python benchmarks/bench_batch.py [--specimens N] [--repeats R] [--days-per-year D] [--years Y]

Writes N small forward-model specimens (bandgeo.synth), then runs the real ``bandgeo.pipeline.analyze``
on all of them with ``bandgeo.batch.run_batch`` into fresh folders: 1 local worker, 2 local workers,
1 worker with 2 BLAS threads (to show why the default is one thread per specimen), and 2 Dask
workers. Prints the median wall time over R repeats, specimens per minute, the ratio of
2 workers to 1 measured in the same run, per-specimen seconds, thread counts (threadpoolctl) and
peak memory (psutil, this process and its children).
"""
from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")


def make_specimens(folder: Path, n: int, days_per_year: float, years: float) -> int:
    from bandgeo.synth import SynthParams, simulate, write_specimen

    faces = 0
    for k in range(n):
        spec = simulate(SynthParams(days_per_year=days_per_year, years=years, radius_mm=1.0,
                                    mean_thickness_mm=0.3, rings_per_lamina=3, annual_amplitude=0.35,
                                    noise_cv=0.12, pose="identity", seed=100 + k))
        write_specimen(spec, folder / f"KRB-{k + 1:02d}.ply")
        faces = len(spec.faces) if hasattr(spec, "faces") else faces
    return faces


def peak_rss_mb() -> float:
    import resource

    own = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    kids = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    return max(own, kids) / 1024.0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--specimens", type=int, default=4)
    ap.add_argument("--repeats", type=int, default=1)
    ap.add_argument("--days-per-year", type=float, default=30.0)
    ap.add_argument("--years", type=float, default=4.0)
    ap.add_argument("--no-dask", action="store_true")
    args = ap.parse_args(argv)

    from threadpoolctl import threadpool_info

    from bandgeo.batch import read_manifest, run_batch

    cores = os.cpu_count()
    with tempfile.TemporaryDirectory(prefix="bench_batch_") as tmp:
        tmp = Path(tmp)
        scans = tmp / "scans"
        scans.mkdir()
        faces = make_specimens(scans, args.specimens, args.days_per_year, args.years)
        jobs = read_manifest(scans)
        print(f"{len(jobs)} forward-model specimens, {faces} faces each (last), "
              f"{args.days_per_year:g} days/yr x {args.years:g} yr; {cores} CPU cores; "
              f"OMP_NUM_THREADS={os.environ.get('OMP_NUM_THREADS')}")
        blas = {(i.get('internal_api'), i.get('num_threads')) for i in threadpool_info()}
        print(f"thread pools in this process (api, threads): {sorted(blas)}")
        setups = [("local, 1 worker", dict(workers=1)),
                  ("local, 2 workers", dict(workers=2)),
                  ("local, 1 worker, 2 BLAS threads", dict(workers=1, threads_per_worker=2))]
        cluster = None
        if not args.no_dask:
            from dask.distributed import LocalCluster

            cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                   dashboard_address=None, host="127.0.0.1")
            setups.append(("dask LocalCluster, 2 workers x 1 thread", dict(scheduler=cluster.scheduler_address)))
        medians = {}
        try:
            for label, kw in setups:
                times, per = [], []
                for r in range(args.repeats):
                    out = tmp / f"out_{len(medians)}_{r}"
                    start = time.perf_counter()
                    summary = run_batch(jobs, out, params={"report": False}, **kw)
                    times.append(time.perf_counter() - start)
                    per += [o.seconds for o in summary.outcomes if o.seconds is not None]
                    if summary.n_failed:
                        print(f"  {label}: {summary.n_failed} failed, e.g. {summary.failed[0].error}")
                med = statistics.median(times)
                medians[label] = med
                print(f"{label:<42} median {med:7.1f} s for {len(jobs)} specimens = "
                      f"{60.0 * len(jobs) / med:6.2f} specimens/min; per specimen median "
                      f"{statistics.median(per) if per else float('nan'):.1f} s; threads/worker "
                      f"{summary.threads_per_worker}")
        finally:
            if cluster is not None:
                cluster.close()
        one, two = medians.get("local, 1 worker"), medians.get("local, 2 workers")
        if one and two:
            print(f"speed-up 2 workers / 1 worker (same run): {one / two:.2f}x")
        print(f"peak RSS (largest of this process and one child): {peak_rss_mb():.0f} MB")
        print("load average (1, 5, 15 min) at the end: " + ", ".join(f"{x:.1f}" for x in os.getloadavg())
              + f" on {cores} cores; a load above the core count means other work shared the CPUs")
    return 0


if __name__ == "__main__":
    sys.exit(main())
