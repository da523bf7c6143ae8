"""Benchmark: ``analyze`` end to end (load to result.json) on a forward-model scan, with each stage's share.

Target (issue 5): a 2-million-face scan in at most 40 s on this 2-core machine.
Usage: python benchmarks/bench_analyze.py [--faces 2000000] [--repeat 1] [--report]
"""
import argparse
import json
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np


def make_scan(folder: Path, faces: int):
    from bandgeo.synth import SynthParams, simulate, write_specimen

    # Three years of record (so that an annual cycle is testable: the search runs to a third of the
    # record), with the vertices per ring chosen to give about the requested number of faces.
    probe = simulate(SynthParams(years=3.0, ring_vertices=32, seed=1))
    ring_vertices = max(16, int(round(32 * faces / len(probe.faces))))
    spec = simulate(SynthParams(years=3.0, ring_vertices=ring_vertices, seed=1))
    path = folder / "bench.ply"
    write_specimen(spec, path)
    truth = json.loads((folder / "bench.truth.json").read_text())
    return path, truth, len(spec.faces)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--faces", type=int, default=2_000_000)
    ap.add_argument("--repeat", type=int, default=1)
    ap.add_argument("--report", action="store_true", help="include report building")
    args = ap.parse_args(argv)
    from threadpoolctl import threadpool_info

    from bandgeo import pipeline

    threads = sorted({i.get("num_threads") for i in threadpool_info()})
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        t0 = time.perf_counter()
        path, truth, nf = make_scan(tmp, args.faces)
        print(f"scan: {nf:,} faces, {path.stat().st_size / 1e6:.1f} MB, made in {time.perf_counter() - t0:.1f} s")
        up = np.asarray(truth["frames"]["paleo_up_file"])
        totals, shares = [], []
        for r in range(args.repeat):
            start = time.perf_counter()
            state = pipeline.analyze(path, tmp / f"out{r}", up=up, units=truth.get("units"),
                                     report=args.report)
            totals.append(time.perf_counter() - start)
            shares.append(state.result["provenance"]["stage_seconds"])
        total = statistics.median(totals)
        print(f"analyze end to end: median {total:.1f} s over {len(totals)} run(s) (target <= 40 s); "
              f"BLAS/OpenMP threads {threads}")
        stage = shares[-1]
        for name, sec in stage.items():
            print(f"  {name:12s} {sec:7.2f} s  {100 * sec / total:5.1f} %")
        dpy = state.result["days_per_year"]
        print(f"days per year: {dpy.get('estimate')} ci95 {dpy.get('ci95')} (truth "
              f"{truth['laminae']['recorded_laminae_per_year']})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
