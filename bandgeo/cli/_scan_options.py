"""The scan options every scan-reading subcommand accepts (inspect, segment, analyze, batch), in one place.

Use ``@scan_options`` on a click command, then ``prepare_from_options(path, **kwargs)`` (unknown keys are
ignored, so a command can pass its whole ``**kwargs``) or ``prepare_kwargs(**kwargs)`` for the keyword
arguments of :func:`bandgeo.scan.prepare`.
"""
from __future__ import annotations

import click
import numpy as np

from ..errors import ParameterError
from ._common import UNITS, VECTOR

#: Keyword names the decorator adds to a command's parameters.
SCAN_OPTION_NAMES = ("units", "up", "north", "strike_dip", "strike", "dip", "sheet", "scale_points",
                     "scale_length")


class NumbersType(click.ParamType):
    """``count`` comma-separated finite numbers, e.g. ``--strike-dip 40,25``."""

    def __init__(self, count: int, example: str):
        self.count = count
        self.example = example
        self.name = example

    def convert(self, value, param, ctx):
        if isinstance(value, (tuple, list, np.ndarray)):
            return tuple(float(v) for v in value)
        parts = [p for p in str(value).replace(";", ",").replace(" ", ",").split(",") if p != ""]
        try:
            nums = tuple(float(p) for p in parts)
        except ValueError:
            self.fail(f"expected {self.count} numbers like {self.example} but got {value!r}", param, ctx)
        if len(nums) != self.count or not all(np.isfinite(nums)):
            self.fail(f"expected {self.count} finite numbers like {self.example} but got {value!r}", param, ctx)
        return nums


STRIKE_DIP = NumbersType(2, "40,25")
POINT_PAIR = NumbersType(6, "0,0,0,50,0,0")


def scan_options(func):
    """Click decorator adding --units, --up, --north, --strike-dip/--strike/--dip, --sheet, --scale-*."""
    options = [
        click.option("--units", type=UNITS, default=None,
                     help="Unit of the scan's coordinates (default: the sheet's, a 'units' comment in the file, "
                          "else guessed from the size with a warning)."),
        click.option("--up", type=VECTOR, default=None,
                     help="Way-up marked on the specimen (field vertical), scan frame, e.g. 0,0,1. "
                          "Default: the sheet's, else estimated from the shape."),
        click.option("--north", type=VECTOR, default=None,
                     help="North mark, scan frame, e.g. 0,1,0 (gives azimuths)."),
        click.option("--strike-dip", "strike_dip", type=STRIKE_DIP, default=None,
                     help="Bedding strike and dip in degrees, right-hand rule (dip direction = strike + 90), "
                          "e.g. 40,25. Needs --up and --north."),
        click.option("--strike", type=float, default=None, help="Bedding strike, degrees (with --dip)."),
        click.option("--dip", type=float, default=None, help="Bedding dip, degrees 0..90 (with --strike)."),
        click.option("--sheet", type=click.Path(dir_okay=False), default=None,
                     help="Specimen sheet (TOML: id, units, scale, up, north, strike/dip, age, locality)."),
        click.option("--scale-points", "scale_points", type=POINT_PAIR, default=None,
                     help="Two points on the scan (scan frame) a known distance apart, e.g. the ends of a "
                          "scale bar: X1,Y1,Z1,X2,Y2,Z2 (with --scale-length)."),
        click.option("--scale-length", "scale_length", type=float, default=None,
                     help="True distance between the --scale-points, in --units (mm if not given)."),
    ]
    for option in reversed(options):
        func = option(func)
    return func


def prepare_kwargs(**opts) -> dict:
    """Keyword arguments for :func:`bandgeo.scan.prepare` from the decorator's values (others ignored)."""
    strike_dip = opts.get("strike_dip")
    strike, dip = opts.get("strike"), opts.get("dip")
    if (strike is None) != (dip is None):
        raise ParameterError("--strike and --dip go together; give both (right-hand rule) or neither")
    if strike is not None:
        if strike_dip is not None:
            raise ParameterError("give the bedding once: either --strike-dip S,D or --strike S --dip D")
        strike_dip = (strike, dip)
    points, length = opts.get("scale_points"), opts.get("scale_length")
    if (points is None) != (length is None):
        raise ParameterError("--scale-points and --scale-length go together; give both or neither")
    scale = None
    if points is not None:
        if not length > 0:
            raise ParameterError(f"--scale-length must be positive but got {length:g}")
        scale = (np.asarray(points[:3], float), np.asarray(points[3:], float), float(length))
        if np.allclose(scale[0], scale[1]):
            raise ParameterError("the two --scale-points are the same point; give the two ends of the scale bar")
    out = {"units": opts.get("units"), "up": opts.get("up"), "north": opts.get("north"), "strike_dip": strike_dip,
           "sheet": opts.get("sheet"), "scale": scale}
    if opts.get("progress") is not None:
        out["progress"] = opts["progress"]
    return out


def prepare_from_options(path, **opts):
    """Load ``path`` and prepare it with the scan options; returns a :class:`bandgeo.scan.Specimen`."""
    from ..scan import load_scan, prepare

    kwargs = prepare_kwargs(**opts)
    return prepare(load_scan(path), **kwargs)

