"""Option types and helpers shared by every subcommand, so that all of them accept the same input."""
from __future__ import annotations

import os
from pathlib import Path

import click
import numpy as np


class VectorType(click.ParamType):
    """Three comma-separated numbers, e.g. ``--up -0.3,0.1,0.95`` (negative components welcome)."""

    name = "X,Y,Z"

    def convert(self, value, param, ctx):
        if isinstance(value, np.ndarray):
            return value
        parts = [p for p in str(value).replace(";", ",").replace(" ", ",").split(",") if p != ""]
        try:
            vec = np.array([float(p) for p in parts], dtype=float)
        except ValueError:
            self.fail(f"expected three numbers like -0.3,0.1,0.95 but got {value!r}", param, ctx)
        if vec.shape != (3,) or not np.all(np.isfinite(vec)):
            self.fail(f"expected three finite numbers like -0.3,0.1,0.95 but got {value!r}", param, ctx)
        if np.linalg.norm(vec) == 0:
            self.fail(f"the vector {value!r} has zero length; give a direction", param, ctx)
        return vec


VECTOR = VectorType()

UNITS = click.Choice(["um", "mm", "cm", "m", "in"], case_sensitive=False)


def existing_path(ctx, param, value):
    """Callback: a path that must exist (file or folder); spaces and any case of extension are fine."""
    if value is None:
        return None
    path = Path(os.path.expanduser(value))
    if not path.exists():
        raise click.BadParameter(f"{value!r} does not exist; check the path (quote it if it has spaces)",
                                 ctx=ctx, param=param)
    return path


def out_dir_option(required=True):
    return click.option("--out", "out", type=click.Path(file_okay=False, path_type=Path), required=required,
                        help="Folder for the outputs (created if missing).")


def seed_option():
    from ..constants import DEFAULT_SEED

    return click.option("--seed", type=int, default=DEFAULT_SEED, show_default=True,
                        help="Random seed: the same inputs and seed give the same outputs.")


def echo(ctx, message: str) -> None:
    """Print informational output unless ``--quiet``."""
    root = ctx.find_root()
    if not (root.obj or {}).get("quiet"):
        click.echo(message)


def simulations_options(default: int = 1000, minimum: int = 100, maximum: int = 100000,
                        help_text: str = "Monte Carlo replicates for significance and intervals.") -> list:
    """``--simulations N`` (the one name across commands), with the older ``--n-sim`` kept as a hidden
    alias. Both fill the parameter ``n_sim``; ``--simulations`` wins when both are given."""
    kind = click.IntRange(minimum, maximum)

    def remember_alias(ctx, param, value):
        if value is not None:
            ctx.meta["bandgeo.n_sim_alias"] = value

    def resolve(ctx, param, value):
        if value is not None:
            return value
        return ctx.meta.get("bandgeo.n_sim_alias", default)

    return [click.option("--simulations", "n_sim", type=kind, default=None, callback=resolve,
                         help=f"{help_text}  [default: {default}]"),
            click.option("--n-sim", "n_sim_alias", type=kind, default=None, hidden=True, expose_value=False,
                         callback=remember_alias, is_eager=True)]


def analysis_options(func):
    """The options of the analysis itself, shared by ``analyze`` and ``batch``: the searched annual band,
    the Monte Carlo size and what to do with an existing review."""
    options = [
        click.option("--min-period", "min_period", type=float, default=None,
                     help="Shortest annual period searched, in bands (default: a few bands)."),
        click.option("--max-period", "max_period", type=float, default=None,
                     help="Longest annual period searched, in bands (default: about a third of the record)."),
        *simulations_options(default=1000, minimum=99),  # the same range as the periodicity command
        click.option("--discard-review", is_flag=True,
                     help="Start from the automatic segmentation: an existing review.json is renamed aside."),
    ]
    for option in reversed(options):
        func = option(func)
    return func
