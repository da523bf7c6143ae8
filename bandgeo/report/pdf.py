"""Vector PDF report: text pages (summary, cautions, provenance) and the figures, via PdfPages."""
from __future__ import annotations

import textwrap

from matplotlib.figure import Figure

A4 = (8.27, 11.69)
_LINE_H = 0.0165          # fraction of the page height per line of body text
_WRAP = 100               # characters per line of body text


def text_pages(sections: list[tuple[str, list]], title: str | None = None) -> list[Figure]:
    """Lay out sections of text on A4 pages.

    Parameters
    ----------
    sections : list of (heading, items)
        Each item is a paragraph (str) or a ``(label, value)`` row.
    title : str, optional
        Large title on the first page.

    Returns
    -------
    list of Figure
        One figure per page.
    """
    pages: list[Figure] = []
    state = {"fig": None, "y": 0.0}

    def new_page():
        fig = Figure(figsize=A4)
        pages.append(fig)
        state["fig"], state["y"] = fig, 0.95

    def line(text, size=8.5, weight="normal", x=0.07, color="black", family="sans-serif"):
        if state["fig"] is None or state["y"] < 0.05:
            new_page()
        state["fig"].text(x, state["y"], text, fontsize=size, weight=weight, color=color, va="top",
                          family=family)
        state["y"] -= _LINE_H * size / 8.5

    new_page()
    if title:
        for part in textwrap.wrap(title, 60):
            line(part, size=15, weight="bold")
        state["y"] -= 0.01
    for heading, items in sections:
        if state["y"] < 0.15:
            new_page()
        state["y"] -= 0.008
        line(heading, size=11, weight="bold", color="#0b3c5d")
        for item in items:
            if isinstance(item, tuple):
                label, value = item
                if state["y"] < 0.05:
                    new_page()
                state["fig"].text(0.07, state["y"], textwrap.shorten(str(label), 48, placeholder="..."),
                                  fontsize=8, va="top", color="#333333")
                for part in textwrap.wrap(str(value), 62) or [""]:
                    line(part, size=8, x=0.45)
            else:
                for part in textwrap.wrap(str(item), _WRAP) or [""]:
                    line(part)
                state["y"] -= 0.004
    return pages
