"""Benchmark alias: ``analyze`` end to end is now measured by ``bench_pipeline.py`` (stage by stage,
beside open3d's read and one libigl curvature call, at several sizes, with peak memory and targets).

# alias of bench_pipeline (benchmarks/run.py runs it only when named)
Usage: python benchmarks/bench_analyze.py [--faces 2000000] [--repeat 1] [bench_pipeline options]
The old ``--faces N`` becomes ``--sizes N/1e6``; ``--report`` is accepted and ignored (the report is
always part of the whole pipeline now).
"""
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import bench_pipeline  # noqa: E402


def translate(argv):
    out, it = [], iter(argv)
    for arg in it:
        if arg == "--faces":
            out += ["--sizes", f"{float(next(it)) / 1e6:g}"]
        elif arg.startswith("--faces="):
            out += ["--sizes", f"{float(arg.split('=', 1)[1]) / 1e6:g}"]
        elif arg == "--report":
            continue
        else:
            out.append(arg)
    if "--sizes" not in out:
        out += ["--sizes", "2"]
    return out


if __name__ == "__main__":
    sys.exit(bench_pipeline.main(translate(sys.argv[1:])))
