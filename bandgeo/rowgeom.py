"""Row-wise vector helpers shared by the scan and feature stages (hot paths on meshes of millions of faces)."""
from __future__ import annotations

import numpy as np


def cross_rows(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Row-wise cross product of (n, 3) arrays, written out component by component: no temporaries of
    the size of the inputs beyond the result (``np.cross`` makes several)."""
    cross = np.empty_like(a)
    np.multiply(a[:, 1], b[:, 2], out=cross[:, 0])
    cross[:, 0] -= a[:, 2] * b[:, 1]
    np.multiply(a[:, 2], b[:, 0], out=cross[:, 1])
    cross[:, 1] -= a[:, 0] * b[:, 2]
    np.multiply(a[:, 0], b[:, 1], out=cross[:, 2])
    cross[:, 2] -= a[:, 1] * b[:, 0]
    return cross
