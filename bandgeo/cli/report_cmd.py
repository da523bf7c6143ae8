"""``bandgeo report DIR``: rebuild the report of an analysed specimen folder from its saved state."""
from __future__ import annotations

from pathlib import Path

import click

from ._common import echo

_FORMATS = ("html", "pdf", "csv", "ply")


@click.command("report")
@click.argument("folder", type=click.Path(path_type=Path))
@click.option("--format", "formats", type=click.Choice(_FORMATS, case_sensitive=False), multiple=True,
              help="Write only these outputs (repeat the option); default: all of html, pdf, csv, ply.")
@click.pass_context
def report(ctx, folder, formats):
    """Rebuild report.html, report.pdf, bands.csv, spectra.csv and labelled_mesh.ply in FOLDER.

    FOLDER is a result folder written by 'bandgeo analyze'. The saved segmentation (with any review
    edits) is measured and tested again with the saved parameters and seed, then result.json and the
    report are rewritten so that they agree. The scan and the review file are not modified.
    """
    from .. import progress
    from ..errors import InputError
    from ..atomic import write_json
    from ..pipeline import load_state
    from ..report import write_report

    folder = Path(folder).expanduser()
    if not folder.is_dir():
        raise InputError(f"{str(folder)!r} is not a folder; give the result folder written by "
                         f"'bandgeo analyze SCAN --out FOLDER'")
    with progress.bar("loading the saved analysis") as cb:
        state = load_state(folder, progress=cb)
    with progress.bar("writing the report") as cb:
        paths = write_report(state, folder, formats=tuple(f.lower() for f in formats) or _FORMATS,
                             progress=cb)
    write_json(folder / "result.json", state.result)
    echo(ctx, f"wrote {folder / 'result.json'}")
    for name, path in paths.items():
        echo(ctx, f"wrote {path}")
