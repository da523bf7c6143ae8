"""Benchmark: simulate forward-model specimens of each mesh kind at about 0.5 M and 2 M faces.

Usage:  python benchmarks/bench_synth.py [--sizes 0.5e6,2e6] [--kinds photogrammetric,ct,rings]
                                         [--repeats 1] [--full]

Each (kind, size) runs in its own Python process, so that the reported peak memory is that run's own
peak resident set (``resource.getrusage(RUSAGE_CHILDREN).ru_maxrss`` of the child; the interpreter and
imports are included, about 150 MB). For each: faces built, seconds of ``simulate`` (median of the
repeats) and of ``write_specimen`` (binary PLY + truth JSON), and the peak memory. Targets (issue 11):
2 M faces well under a minute and under 2 GB on 2 cores. ``--full`` adds 10 M faces. Also the time of
``simulate_laminae`` for 4000 laminae (target: about 1 ms) and the BLAS/OpenMP threads in use.
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

CHILD = r"""
import json, resource, sys, tempfile, time
from pathlib import Path
sys.path.insert(0, {root!r})
from bandgeo.synth import SynthParams, simulate, simulate_laminae, write_specimen
simulate_laminae(SynthParams(years=0.01))  # import scipy.signal outside the timing
kind, faces, repeats = {kind!r}, {faces!r}, {repeats!r}
p = SynthParams(mesh_kind=kind, seed=1)
p = p.replace(years=p.years * faces / p.estimated_faces)
spec = simulate(p)  # calibrate the length on the built face count
p = p.replace(years=p.years * faces / spec.n_faces)
t_sim, t_write = [], []
for _ in range(repeats):
    del spec
    t0 = time.perf_counter(); spec = simulate(p); t1 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        out = write_specimen(spec, Path(tmp) / "bench.ply")
    t2 = time.perf_counter()
    t_sim.append(t1 - t0); t_write.append(t2 - t1)
print(json.dumps({{"faces": spec.n_faces, "vertices": spec.n_vertices, "years": p.years,
                  "simulate_s": sorted(t_sim)[len(t_sim) // 2], "write_s": sorted(t_write)[len(t_write) // 2],
                  "ply_mb": out["mesh_bytes"] / 2**20, "info": {{k: v for k, v in spec.truth["mesh"].items()
                  if k in ("triangulation", "chunks", "seam_vertices_unmatched", "edge_length_mm_mean")}},
                  "peak_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}}))
"""


def run(kind: str, faces: float, repeats: int) -> dict:
    code = CHILD.format(root=str(ROOT), kind=kind, faces=float(faces), repeats=int(repeats))
    env = dict(os.environ, OMP_NUM_THREADS=os.environ.get("OMP_NUM_THREADS", "2"))
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env)
    if proc.returncode != 0:
        return {"error": proc.stderr.strip().splitlines()[-1] if proc.stderr.strip() else "failed"}
    return json.loads(proc.stdout.strip().splitlines()[-1])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="0.5e6,2e6", help="face counts, comma-separated")
    ap.add_argument("--kinds", default="photogrammetric,ct,rings")
    ap.add_argument("--repeats", type=int, default=1)
    ap.add_argument("--full", action="store_true", help="also 10 M faces")
    args = ap.parse_args(argv)
    try:
        from threadpoolctl import threadpool_info
        threads = ", ".join(f"{i['internal_api']}={i['num_threads']}" for i in threadpool_info())
    except ImportError:  # pragma: no cover
        threads = "threadpoolctl not installed"
    print(f"threads: {threads or 'none loaded'}; OMP_NUM_THREADS={os.environ.get('OMP_NUM_THREADS', '2')}")
    from bandgeo.synth import SynthParams, simulate_laminae

    p = SynthParams(days_per_year=400, years=10)
    simulate_laminae(p)
    times = []
    for seed in range(200):
        t0 = time.perf_counter()
        simulate_laminae(p, rng=seed)
        times.append(time.perf_counter() - t0)
    print(f"simulate_laminae, {p.n_nominal} laminae: median {statistics.median(times) * 1e3:.2f} ms (200 calls)")
    sizes = [float(x) for x in args.sizes.split(",")] + ([10e6] if args.full else [])
    for kind in args.kinds.split(","):
        for size in sizes:
            r = run(kind.strip(), size, args.repeats)
            if "error" in r:
                print(f"{kind:16s} {size / 1e6:5.1f} M: ERROR {r['error']}")
                continue
            print(f"{kind:16s} {r['faces'] / 1e6:5.2f} M faces ({r['vertices'] / 1e6:.2f} M vertices, "
                  f"{r['years']:.2f} years of the default column): simulate {r['simulate_s']:6.1f} s, write "
                  f"{r['write_s']:5.1f} s (median of {args.repeats}); PLY {r['ply_mb']:.0f} MB; peak RSS "
                  f"{r['peak_rss_mb']:.0f} MB  {r['info']}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
