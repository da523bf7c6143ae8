"""``bandgeo review DIR``: serve the review page of an analysed specimen folder on this computer only."""
from __future__ import annotations

import click

from ._common import echo, existing_path


@click.command("review")
@click.argument("folder", callback=existing_path, metavar="DIR")
@click.option("--port", type=click.IntRange(0, 65535), default=0, show_default=True,
              help="Port on 127.0.0.1 (0 picks a free one).")
@click.option("--no-browser", is_flag=True, help="Print the address but do not open a browser.")
@click.pass_context
def review(ctx, folder, port, no_browser):
    """Review and correct the segmentation of DIR (a folder written by 'bandgeo analyze') in a web page.

    The page is served on 127.0.0.1 only, behind a one-time token in the printed address. Saving writes
    DIR/review.json (with a history of edits) and re-runs the analysis from the edited boundaries.
    Ctrl-C stops the server.
    """
    from ..errors import ReviewError
    from ..review import run

    if not folder.is_dir():
        raise ReviewError(f"{str(folder)!r} is a file; give the folder written by 'bandgeo analyze'")
    # The address is printed even with --quiet: without it the page cannot be opened.
    run(folder, port=port, open_browser=not no_browser,
        echo=lambda line: click.echo(line) if "http://" in line else echo(ctx, line))
