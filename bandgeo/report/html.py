"""Self-contained HTML: the template in ``templates/report.html.j2`` with every figure inlined as a
data URI (SVG for plots, PNG for the mesh views), no external scripts, styles or fonts."""
from __future__ import annotations

import base64
import io

import jinja2

_ENV = None


def _env() -> jinja2.Environment:
    global _ENV
    if _ENV is None:
        _ENV = jinja2.Environment(loader=jinja2.PackageLoader("bandgeo.report", "templates"),
                                  autoescape=jinja2.select_autoescape(["html", "j2"]),
                                  trim_blocks=True, lstrip_blocks=True, undefined=jinja2.StrictUndefined)
    return _ENV


def figure_data_uri(fig, raster: bool = False, dpi: int = 110, tight: bool = True) -> str:
    """Encode a matplotlib figure as a ``data:`` URI (SVG with text as text, or PNG).

    ``tight=False`` keeps the figure's own size for a PNG: a figure laid out with fixed margins needs no
    cropping, and the tight box costs a whole extra drawing pass.
    """
    buf = io.BytesIO()
    if raster:
        extra = {"bbox_inches": "tight", "pad_inches": 0.08} if tight else {}
        # zlib level 3: a few per cent larger than the default 6 and half the time (WeasyPrint re-compresses)
        fig.savefig(buf, format="png", dpi=dpi, pil_kwargs={"compress_level": 3}, **extra)
        mime = "image/png"
    else:
        import matplotlib

        # text stays text (smaller files, quicker to typeset, selectable in the PDF); fonts are DejaVu,
        # matplotlib's default, which the page's CSS names too
        with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "bandgeo", "font.family": "DejaVu Sans"}):
            fig.savefig(buf, format="svg", dpi=dpi, metadata={"Date": None})   # same input, same bytes
        mime = "image/svg+xml"
    return f"data:{mime};base64,{base64.b64encode(buf.getvalue()).decode('ascii')}"


def render_html(context: dict) -> str:
    """Fill the report template with ``context`` (see :func:`bandgeo.report.build.report_context`)."""
    return _env().get_template("report.html.j2").render(**context)
