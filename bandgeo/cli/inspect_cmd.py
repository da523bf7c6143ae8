"""``bandgeo inspect SCAN``: load, clean and orient a scan and print what was found (or JSON)."""
from __future__ import annotations

import json

import click

from ._scan_options import prepare_kwargs, scan_options


@click.command("inspect")
@click.argument("scan", type=click.Path(path_type=str))
@click.option("--json", "as_json", is_flag=True, help="Print the summary as JSON instead of text.")
@scan_options
@click.pass_context
def inspect(ctx, scan, as_json, **opts):
    """Load SCAN (PLY, OBJ, STL, OFF, GLB/glTF) and report its size, units, up vector and problems.

    Nothing is written; the scan file is never modified.
    """
    from .. import progress
    from ..scan import inspect_scan
    from ..scan.inspect import format_inspection

    kwargs = prepare_kwargs(**opts)
    with progress.bar("inspecting") as cb:
        info = inspect_scan(scan, progress=cb, **kwargs)
    info["resolvable_lamina"] = __import__("bandgeo.segment.resolution", fromlist=["x"]).inspect_summary(info, scan, kwargs)
    if as_json:
        click.echo(json.dumps(info, indent=2, allow_nan=False))
    else:
        click.echo(format_inspection(info) + "\n" + info["resolvable_lamina"]["line"])
