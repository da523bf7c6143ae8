"""Older home of the saved-state helpers; everything now lives in :mod:`bandgeo.results`, the one module
that reads and writes a result folder. These names are kept so that existing callers keep working."""
from __future__ import annotations

from pathlib import Path

from .results import ResultFolder, load_specimen, save_specimen

__all__ = ["save_specimen", "load_specimen", "read_result"]


def read_result(folder: Path) -> dict:
    """``result.json`` of a result folder (one-line InputError when missing or corrupt)."""
    return ResultFolder(folder).read_result()
