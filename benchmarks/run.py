"""Run every benchmark in this folder, one after the other, and print their figures.

Usage:  python benchmarks/run.py [NAME ...]     e.g.  python benchmarks/run.py load segment

Each benchmark is a script ``bench_NAME.py`` that prints its own medians, ratios, peak memory and
thread counts. Figures on this 2-core machine vary between runs: compare ratios measured in one run.
"""
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def main(names):
    scripts = sorted(HERE.glob("bench_*.py"))
    if names:
        scripts = [s for s in scripts if s.stem.removeprefix("bench_") in names]
    failed = []
    for script in scripts:
        print(f"\n=== {script.stem} ===", flush=True)
        start = time.perf_counter()
        proc = subprocess.run([sys.executable, str(script)], cwd=HERE.parent)
        print(f"--- {script.stem}: {time.perf_counter() - start:.1f} s wall, exit {proc.returncode}", flush=True)
        if proc.returncode:
            failed.append(script.stem)
    if failed:
        print("failed: " + ", ".join(failed))
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
