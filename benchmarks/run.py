"""Run every benchmark in this folder, one after the other, and print their figures.

Usage:  python benchmarks/run.py [NAME ...] [-- OPTIONS]
        e.g.  python benchmarks/run.py load segment
              python benchmarks/run.py pipeline -- --sizes 0.5,2,10 --repeat 3   (options go to each script)

``bench_pipeline.py`` measures the whole pipeline stage by stage beside its anchors (issue 16). Alias
scripts (a line ``# alias of bench_...`` in their text, e.g. ``bench_analyze.py``) run only when named.
Each benchmark is a script ``bench_NAME.py`` that prints its own medians, ratios, peak memory and
thread counts. Figures on this 2-core machine vary between runs: compare ratios measured in one run.
"""
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def _is_alias(script: Path) -> bool:
    return "# alias of bench_" in script.read_text(encoding="utf-8", errors="replace")


def main(names, options=()):
    scripts = sorted(HERE.glob("bench_*.py"))
    if names:
        scripts = [s for s in scripts if s.stem.removeprefix("bench_") in names]
    else:
        scripts = [s for s in scripts if not _is_alias(s)]
    failed = []
    for script in scripts:
        print(f"\n=== {script.stem} ===", flush=True)
        start = time.perf_counter()
        proc = subprocess.run([sys.executable, str(script), *options], cwd=HERE.parent)
        print(f"--- {script.stem}: {time.perf_counter() - start:.1f} s wall, exit {proc.returncode}", flush=True)
        if proc.returncode:
            failed.append(script.stem)
    if failed:
        print("failed: " + ", ".join(failed))
        return 1
    return 0


if __name__ == "__main__":
    argv = sys.argv[1:]
    cut = argv.index("--") if "--" in argv else len(argv)
    sys.exit(main(argv[:cut], argv[cut + 1:]))
