"""The per-specimen report: self-contained HTML, vector PDF, CSV tables and a band-labelled PLY mesh.

Public API::

    write_report(state, folder=None, formats=("html", "pdf", "csv", "ply"), progress=None)
        -> dict[str, Path]

Modules: ``build`` (orchestration), ``content`` (what the page says: headline, tables), ``labels``
(plain labels and units of result keys), ``cautions`` (warnings once, cautions for this result), ``numbers`` (rounding to the uncertainty, p-values at the Monte Carlo floor), ``tilt``
(sway plane, sway amplitude, mean lean), ``figures``, ``comparison`` and ``specimen_view`` (figures),
``spectra`` (reading the saved spectra), ``references`` (published reference points), ``html`` (the
page), ``pdf`` (the same page typeset by WeasyPrint), ``exports`` (CSV, PLY) and ``palette``
(colour-blind-safe colours), ``typeset`` (forked helpers: the PDF is typeset, and the vector plots
drawn, in child processes while this one draws the specimen figure; ``BANDGEO_REPORT_FORK=0`` keeps
everything in-process). ``unroll`` and ``render3d`` are older helpers kept for callers. Matplotlib, jinja2 and WeasyPrint are imported only when a report is built.
"""
from __future__ import annotations

from pathlib import Path

__all__ = ["write_report"]


def write_report(state, folder=None, formats=("html", "pdf", "csv", "ply"), progress=None) -> dict[str, Path]:
    """Write the report of one analysed specimen into its folder, every file atomically.

    Parameters
    ----------
    state : bandgeo.pipeline.AnalysisState
        ``folder``, ``result`` (result.json content), ``specimen``, ``segmentation``, ``band_table``,
        ``series``, ``periodicity``.
    folder : path, optional
        Where to write; defaults to ``state.folder``.
    formats : sequence of {"html", "pdf", "csv", "ply"}
        ``html`` -> report.html, ``pdf`` -> report.pdf (the same page on A4), ``csv`` -> bands.csv and
        spectra.csv,
        ``ply`` -> labelled_mesh.ply (per-vertex ``band`` property and one colour per band).
    progress : callable, optional
        ``progress(description, done, total)``.

    Returns
    -------
    dict of str to Path
        Output file name -> path written.

    Raises
    ------
    bandgeo.errors.InputError
        The state lacks the result or, for the mesh, the specimen or segmentation.
    bandgeo.errors.ParameterError
        An unknown format or no folder.
    """
    from .build import build_report

    paths, _ = build_report(state, folder, formats, progress)
    return paths
