"""Colour-blind-safe colours for bands, lines and images, shared by figures and the labelled mesh.

The band colours are the seven chromatic colours of the Okabe & Ito (2008) palette ("Color Universal
Design"), ordered so that neighbouring bands differ strongly in lightness as well as hue. Bands
outside the banded stretch (index -1) are light grey.
"""
from __future__ import annotations

import numpy as np

#: Okabe-Ito colours as 0-255 RGB, ordered so that consecutive entries contrast in lightness.
BAND_RGB = np.array([
    (230, 159, 0),     # orange
    (0, 114, 178),     # blue
    (240, 228, 66),    # yellow
    (0, 158, 115),     # bluish green
    (213, 94, 0),      # vermillion
    (86, 180, 233),    # sky blue
    (204, 121, 167),   # reddish purple
], dtype=np.uint8)

#: Colour of vertices that belong to no band.
UNASSIGNED_RGB = np.array((190, 190, 190), dtype=np.uint8)

#: Named line colours for figures (hex, Okabe-Ito).
LINE = {
    "data": "#0072B2",
    "fit": "#D55E00",
    "background": "#555555",
    "level95": "#E69F00",
    "level99": "#CC79A7",
    "search": "#56B4E9",
    "estimate": "#D55E00",
    "reference": "#009E73",
    "hiatus": "#999999",
}

#: Sequential colour map for images (perceptually uniform, designed for colour-vision deficiency).
IMAGE_CMAP = "cividis"


def band_colors(band_index: np.ndarray) -> np.ndarray:
    """Colour per band index.

    Parameters
    ----------
    band_index : (n,) int
        Band index per element; -1 means outside the banded stretch.

    Returns
    -------
    (n, 3) uint8
        RGB colour per element: band ``i`` gets ``BAND_RGB[i % 7]``, -1 gets ``UNASSIGNED_RGB``.
    """
    idx = np.asarray(band_index).astype(np.int64, copy=False)
    out = BAND_RGB[np.mod(idx, len(BAND_RGB))]
    out[idx < 0] = UNASSIGNED_RGB
    return out
