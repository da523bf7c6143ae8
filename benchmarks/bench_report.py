"""Benchmark: build the whole report (HTML, PDF, CSV, PLY) of a 2-million-face specimen.

Target (issue 14): at most 5 s, excluding the analysis. The specimen is a banded cylinder built by
the report tests' fixture builder (tests/test_report_fixtures.py); the analysis state around it is
synthetic, so only report building is timed. Prints the median of the repeats for each output, the
peak memory and the thread count.

    python benchmarks/bench_report.py [--faces 2000000] [--repeats 3]
"""
from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "2")
sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

TARGET_S = 5.0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--faces", type=int, default=2_000_000)
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args(argv)

    import psutil
    from threadpoolctl import threadpool_info

    from bandgeo.report.build import build_report
    from test_report_fixtures import make_state

    n_cols = 500
    n_rows = args.faces // (2 * n_cols) + 1
    with tempfile.TemporaryDirectory() as tmp:
        state = make_state(Path(tmp), n_rows=n_rows, n_cols=n_cols)
        print(f"specimen: {len(state.specimen.faces):,} faces, {len(state.specimen.vertices_mm):,} vertices, "
              f"{len(state.segmentation.boundaries)} boundaries")
        totals, cpus, parts = [], [], {}
        proc = psutil.Process()
        load = os.getloadavg()[0]
        for _ in range(args.repeats):
            t0, c0 = time.perf_counter(), time.process_time()
            _, seconds = build_report(state)
            totals.append(time.perf_counter() - t0)
            cpus.append(time.process_time() - c0)
            for k, v in seconds.items():
                parts.setdefault(k, []).append(v)
        threads = sorted({(i.get("internal_api"), i.get("num_threads")) for i in threadpool_info()})
        print(f"threads (threadpoolctl): {threads}; OMP_NUM_THREADS={os.environ.get('OMP_NUM_THREADS')}")
        for k, v in parts.items():
            print(f"  {k:8s} median {statistics.median(v):6.2f} s")
        med = statistics.median(totals)
        print(f"total: median {med:.2f} s wall, {statistics.median(cpus):.2f} s CPU, over {args.repeats} runs "
              f"(target <= {TARGET_S:.0f} s): {'OK' if med <= TARGET_S else 'SLOWER THAN TARGET'}")
        print(f"machine load average at the start: {load:.1f} on {os.cpu_count()} cores "
              f"(wall times stretch with load; CPU time does not)")
        import resource

        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
        print(f"peak resident memory: {peak:.0f} MiB (includes the synthetic specimen); "
              f"now {proc.memory_info().rss / 2**20:.0f} MiB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
