"""Load, clean, scale and orient a specimen scan.

- :func:`load_scan` - read PLY, OBJ, STL, OFF or glTF/GLB into a :class:`Scan` (file frame and units).
- :func:`read_sheet` - read a specimen sheet (TOML) into a :class:`SpecimenSheet`.
- :func:`prepare` - clean, scale to mm, orient (way-up, north, bedding) into a :class:`Specimen`.
- :func:`inspect_scan` - the JSON-safe summary behind ``bandgeo inspect``.
"""
from .types import Scan, ScaleReference, Specimen, SpecimenSheet
from .readers import load_scan
from .sheet import read_sheet
from .prepare import prepare
from .inspect import inspect_scan

__all__ = ["Scan", "ScaleReference", "Specimen", "SpecimenSheet", "load_scan", "read_sheet", "prepare",
           "inspect_scan"]
