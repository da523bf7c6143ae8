"""``bandgeo segment SCAN --out DIR``: find the growth bands of a scan and write the segmentation."""
from __future__ import annotations

from pathlib import Path

import click

from ._common import echo, out_dir_option, seed_option
from ._scan_options import prepare_from_options, scan_options


def summary_line(seg, table) -> str:
    """One line: boundaries, bands, mean thickness (mm) and growth direction (degrees)."""
    import numpy as np

    from ..measure import direction_angles, mean_growth_direction

    if len(table) == 0:
        return f"0 bands ({len(seg.boundaries)} boundaries): nothing to measure"
    g = mean_growth_direction(table)
    inc, az = direction_angles(g[None, :])
    th = np.asarray(table.thickness_axis_mm)
    flagged = sum(1 for f in table.flags if f)
    return (f"{len(table)} bands between {len(seg.boundaries)} boundaries; mean thickness {th.mean():.4f} mm "
            f"(median {np.median(th):.4f} mm); growth direction inclined {inc[0]:.2f} deg toward azimuth "
            f"{az[0]:.1f} deg; {flagged} band(s) flagged")


@click.command("segment")
@click.argument("scan", type=click.Path(path_type=Path))
@out_dir_option()
@scan_options
@seed_option()
@click.option("--classes", "n_classes", default="bic", show_default=True,
              help="Number of curvature classes, or 'bic' to choose it automatically.")
@click.option("--band-spacing", "band_spacing", type=float, default=None,
              help="Expected band spacing in mm (default: estimated from the relief).")
@click.pass_context
def segment(ctx, scan, out, seed, n_classes, band_spacing, **opts):
    """Find the growth bands of SCAN and write segmentation.json, segmentation_labels.npz and bands.csv.

    The folder can be opened with 'bandgeo review' and is reused by 'bandgeo analyze'.
    """
    from .. import progress
    from ..errors import InputError, ParameterError
    from ..features import compute_features
    from ..measure import measure_bands
    from ..segment import BandSegmenter

    if n_classes != "bic":
        try:
            n_classes = int(n_classes)
        except ValueError:
            raise ParameterError(f"--classes must be 'bic' or a whole number but got {n_classes!r}") from None
    if out.exists() and not out.is_dir():
        raise InputError(f"the output {str(out)!r} exists and is not a folder; give a folder for --out")
    with progress.bar("loading") as cb:
        specimen = prepare_from_options(scan, progress=cb, **opts)
    with progress.bar("curvature") as cb:
        feats = compute_features(specimen, band_spacing_mm=band_spacing, progress=cb)
    with progress.bar("segmenting") as cb:
        seg = BandSegmenter(n_classes=n_classes, random_state=seed).fit(specimen, feats, progress=cb).segmentation_
    table = measure_bands(specimen, seg)
    from ..results import RunParams, save_segment_folder  # the specimen cache too: the folder opens in review

    save_segment_folder(out, specimen, seg, RunParams.make(scan=scan, units=opts.get("units"), seed=seed), table)
    echo(ctx, summary_line(seg, table))
    for w in list(specimen.warnings) + list(seg.warnings) + list(table.warnings):
        echo(ctx, f"warning: {w}")
    echo(ctx, f"wrote {Path(out) / 'segmentation.json'}, {Path(out) / 'segmentation_labels.npz'}, "
              f"{Path(out) / 'specimen.npz'} and {Path(out) / 'bands.csv'}")
