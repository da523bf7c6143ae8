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
    from ..pipeline import load_state, write_analysis_report
    from ..results import ResultFolder

    folder = ResultFolder(Path(folder).expanduser()).require()
    for line in folder.recover():
        echo(ctx, f"note: {line}")
    with progress.bar("loading the saved analysis") as cb:
        analysis = load_state(folder.path, progress=cb)
    with progress.bar("writing the report") as cb:
        paths = write_analysis_report(analysis, folder.path,
                                      formats=tuple(f.lower() for f in formats) or _FORMATS, progress=cb)
    echo(ctx, f"wrote {folder.file('result.json')}")
    for name, path in paths.items():
        if name != "result.json":
            echo(ctx, f"wrote {path}")
