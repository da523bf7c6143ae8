"""Read a specimen sheet (TOML): id, units or scale, way-up, north, bedding, age and locality.

The format is described in docs/specimen-sheet.md. Unknown fields are refused (they are usually typos
that would otherwise be silently ignored).
"""
from __future__ import annotations

import os
import re
from pathlib import Path

import numpy as np

from ..constants import UNIT_TO_MM
from ..errors import InputError
from .types import ScaleReference, SpecimenSheet

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib

#: Oldest age accepted, Ma (the Earth is about 4540 Ma old; common knowledge, rounded up).
AGE_MAX_MA = 4600.0
#: Range of a plain scale factor (file units times it give the sheet's units); beyond it, a typo.
SCALE_RANGE = (1e-6, 1e6)

_TEXT = ("specimen_id", "locality", "horizon", "formation", "collector", "notes")
_NUMBERS = ("strike_deg", "dip_deg", "age_ma", "age_err_ma")
_FIELDS = _TEXT + _NUMBERS + ("units", "scale", "up", "north")


def _line_of(text: str, key: str) -> str:
    for lineno, line in enumerate(text.splitlines(), start=1):
        if re.match(rf"\s*{re.escape(key)}\s*=", line) or re.match(rf"\s*\[\s*{re.escape(key)}\s*\]", line):
            return f"line {lineno}"
    return "the sheet"


def _vector(value, where: str, name: str, label: str) -> np.ndarray:
    try:
        vec = np.asarray(value, dtype=float).reshape(-1)
    except (TypeError, ValueError):
        vec = np.zeros(0)
    if vec.shape != (3,) or not np.all(np.isfinite(vec)) or np.linalg.norm(vec) == 0:
        raise InputError(f"'{label}' {where}: {name} must be three numbers like [0.0, 0.0, 1.0] "
                         f"(a non-zero direction in the scan frame) but got {value!r}")
    return vec


def read_sheet(path) -> SpecimenSheet:
    """Read a specimen sheet.

    Parameters
    ----------
    path : str or os.PathLike
        A TOML file (see docs/specimen-sheet.md).

    Returns
    -------
    SpecimenSheet

    Raises
    ------
    bandgeo.errors.InputError
        Missing file, TOML syntax error (with its line), unknown field, or a field of the wrong kind.
    """
    path = Path(os.path.expanduser(os.fspath(path)))
    label = str(path)
    if not path.is_file():
        what = "is a folder" if path.is_dir() else "does not exist"
        raise InputError(f"specimen sheet '{label}' {what}; give the path of a .toml sheet")
    text = path.read_bytes().decode("utf-8", errors="replace")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"specimen sheet '{label}' is not valid TOML ({exc}); fix that line "
                         "(strings need quotes, lists need brackets)")
    unknown = [k for k in data if k not in _FIELDS]
    if unknown:
        raise InputError(f"'{label}' {_line_of(text, unknown[0])}: unknown field {unknown[0]!r}; "
                         f"known fields are {', '.join(_FIELDS)}")
    sheet = SpecimenSheet(path=str(path))
    for key in _TEXT:
        if key in data:
            value = data[key]
            if isinstance(value, (dict, list)):
                raise InputError(f"'{label}' {_line_of(text, key)}: {key} must be text but got {value!r}")
            setattr(sheet, key, str(value))
    for key in _NUMBERS:
        if key in data:
            value = data[key]
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not np.isfinite(value):
                raise InputError(f"'{label}' {_line_of(text, key)}: {key} must be a number but got {value!r}")
            setattr(sheet, key, float(value))
    if (sheet.strike_deg is None) != (sheet.dip_deg is None):
        key = "dip_deg" if sheet.dip_deg is None else "strike_deg"
        raise InputError(f"'{label}': strike_deg and dip_deg go together but {key} is missing; give both "
                         "(right-hand rule) or neither")
    if sheet.strike_deg is not None and not 0 <= sheet.strike_deg <= 360:
        raise InputError(f"'{label}' {_line_of(text, 'strike_deg')}: strike_deg must be 0..360 (azimuth clockwise "
                         f"from north, right-hand rule) but got {sheet.strike_deg:g}; give it within 0..360"
                         + (f" ({sheet.strike_deg % 360:g} is the same direction)" if abs(sheet.strike_deg) < 1e6 else ""))
    if sheet.dip_deg is not None and not 0 <= sheet.dip_deg <= 90:
        raise InputError(f"'{label}' {_line_of(text, 'dip_deg')}: dip_deg must be 0..90 (right-hand rule) but got "
                         f"{sheet.dip_deg:g}")
    if sheet.age_ma is not None and not 0 <= sheet.age_ma <= AGE_MAX_MA:
        raise InputError(f"'{label}' {_line_of(text, 'age_ma')}: age_ma must be 0..{AGE_MAX_MA:g} (millions of "
                         f"years before present; the Earth is about 4540 Ma old) but got {sheet.age_ma:g}")
    if sheet.age_err_ma is not None and not 0 <= sheet.age_err_ma <= AGE_MAX_MA:
        raise InputError(f"'{label}' {_line_of(text, 'age_err_ma')}: age_err_ma must be 0..{AGE_MAX_MA:g} Ma but got "
                         f"{sheet.age_err_ma:g}")
    if "units" in data:
        units = str(data["units"]).strip().lower()
        if units not in UNIT_TO_MM:
            raise InputError(f"'{label}' {_line_of(text, 'units')}: units must be one of "
                             f"{', '.join(UNIT_TO_MM)} but got {data['units']!r}")
        sheet.units = units
    for key in ("up", "north"):
        if key in data:
            setattr(sheet, key, _vector(data[key], _line_of(text, key), key, label))
    if "scale" in data:
        sheet.scale = _scale(data["scale"], _line_of(text, "scale"), label)
    return sheet


def _scale(value, where: str, label: str):
    if isinstance(value, bool):
        value = None
    if isinstance(value, (int, float)):
        if not (np.isfinite(value) and value > 0):
            raise InputError(f"'{label}' {where}: scale must be a positive number but got {value!r}")
        if not SCALE_RANGE[0] <= value <= SCALE_RANGE[1]:
            raise InputError(f"'{label}' {where}: scale must be between {SCALE_RANGE[0]:g} and {SCALE_RANGE[1]:g} "
                             f"(file units times it give the sheet's units) but got {value:g}; set units to the "
                             "file's unit and use scale only for a small correction")
        return float(value)
    if isinstance(value, dict):
        extra = [k for k in value if k not in ("points", "length")]
        points = value.get("points")
        length = value.get("length")
        if not extra and points is not None and length is not None:
            try:
                pts = np.asarray(points, dtype=float)
            except (TypeError, ValueError):
                pts = np.zeros(0)
            if pts.shape == (2, 3) and np.all(np.isfinite(pts)) and isinstance(length, (int, float)) \
                    and not isinstance(length, bool) and np.isfinite(length) and length > 0:
                ref = ScaleReference(p1=pts[0], p2=pts[1], length=float(length))
                if ref.file_distance() == 0:
                    raise InputError(f"'{label}' {where}: the two scale points are the same point; pick the "
                                     "two ends of the scale bar")
                return ref
    raise InputError(f"'{label}' {where}: scale must be a positive number, or "
                     "{ points = [[x1, y1, z1], [x2, y2, z2]], length = L } with L > 0, but got "
                     f"{value!r}")
