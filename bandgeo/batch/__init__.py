"""Many specimens: batch runs (local or Dask), a compilation across specimens, and power analysis.

Public API::

    read_manifest(path) -> list[SpecimenJob]          folder of scans or CSV manifest
    run_batch(jobs, out_dir, ...) -> BatchSummary     analyse each specimen, resumable
    compile_results(out_dir) -> Compilation           table, HTML and figures across specimens
    power_analysis(...) -> PowerTable                 detection probability against years of record

Heavy parts (Dask, matplotlib, the pipeline) are imported only when used.
"""
from __future__ import annotations

import importlib

_EXPORTS = {
    "SpecimenJob": "manifest", "read_manifest": "manifest",
    "run_batch": "runner", "job_key": "runner",
    "BatchSummary": "summary", "SpecimenOutcome": "summary",
    "compile_results": "compile", "Compilation": "compile",
    "power_analysis": "power", "PowerTable": "power",
}

__all__ = sorted(_EXPORTS)


def __getattr__(name):
    if name in _EXPORTS:
        module = importlib.import_module(f".{_EXPORTS[name]}", __name__)
        return getattr(module, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return __all__
