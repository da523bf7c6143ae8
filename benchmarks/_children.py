"""Shared by the benchmarks that run each measurement in a fresh process (bench_pipeline, bench_report).

A child re-runs its own script with ``--child NAME ...`` and prints one line ``MARK + json``; the parent
reads the last such line (peak memory and cold imports are then per measurement).
"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

MARK = "BENCH-JSON "
ROOT = Path(__file__).resolve().parent.parent


def emit(data: dict) -> None:
    """Child side: print the measurement for the parent."""
    print(MARK + json.dumps(data), flush=True)


def run_child(script: str, args: list[str], env: dict, timeout: float) -> dict:
    """Parent side: run ``script --child *args`` and return its measurement, or ``{"failed": why}``."""
    proc = subprocess.run([sys.executable, str(Path(script).resolve()), "--child", *args], env=env,
                          cwd=ROOT, capture_output=True, text=True, timeout=timeout)
    lines = [ln for ln in proc.stdout.splitlines() if ln.startswith(MARK)]
    if proc.returncode or not lines:
        tail = (proc.stderr or proc.stdout).strip().splitlines()[-3:]
        return {"failed": f"exit {proc.returncode}: " + " | ".join(tail)}
    return json.loads(lines[-1][len(MARK):])
