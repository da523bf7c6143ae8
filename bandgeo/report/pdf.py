"""The PDF report: the same HTML page as report.html, typeset by WeasyPrint with the page's print CSS
(A4 pages, running header, page numbers, figures scaled to the text width, plots kept as vector SVG)."""
from __future__ import annotations

from pathlib import Path

from ..atomic import atomic_path


def pdf_bytes(html: str, title: str | None = None) -> bytes:
    """Typeset ``html`` (a self-contained page, figures as data URIs) into PDF bytes."""
    import logging

    import weasyprint

    # WeasyPrint logs every CSS property it ignores (screen-only rules); the report does not need them.
    logging.getLogger("weasyprint").setLevel(logging.ERROR)
    logging.getLogger("fontTools").setLevel(logging.ERROR)
    doc = weasyprint.HTML(string=html, base_url=None).render()
    if title:
        doc.metadata.title = title
    doc.metadata.generator = "bandgeo (WeasyPrint)"
    return doc.write_pdf()


def write_pdf(html: str, path, title: str | None = None) -> Path:
    """Write the PDF of ``html`` to ``path`` atomically."""
    data = pdf_bytes(html, title=title)
    with atomic_path(Path(path)) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(data)
    return Path(path)
