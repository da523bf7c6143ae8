"""Removal of variation slower than the searched band, so that a trend or a slow drift of growth rate
cannot pass for a cycle.

A straight line is not enough: a curved rise or a drift of growth rate leaves a hump whose spectrum
peaks at the long-period end of the searched band. The series is therefore projected off a small
smooth basis: a constant, a straight line and the cosines ``cos(pi k (t + 1/2) / n)``, ``k = 1..K``,
of the discrete cosine transform (type II), whose periods ``2 n / k`` are all longer than twice the
longest searched period (``K = floor(n f_low)``). A cycle inside the searched band is nearly orthogonal
to that basis (its period is at most half the basis' shortest), so it is barely touched; the same
projection is applied to every Monte Carlo replicate, so that what it removes is part of the null.

References
----------
Ahmed, N., Natarajan, T. & Rao, K. R. (1974) Discrete cosine transform. IEEE Trans. Comput. C-23:90-93.
Percival, D. B. & Walden, A. T. (1993) Spectral Analysis for Physical Applications, CUP, sec. 9.2
(prewhitening and removing low-frequency components before spectral estimation).
"""
from __future__ import annotations

import functools

import numpy as np

#: Most cosines in the slow basis (beyond, only periods longer than 2 n / MAX_COSINES are removed).
MAX_COSINES = 48


def n_cosines(n: int, f_low: float) -> int:
    """Number of DCT cosines removed for a series of ``n`` bands searched down to ``f_low``."""
    return int(np.clip(np.floor(n * float(f_low) + 1e-9), 0, MAX_COSINES))


@functools.lru_cache(maxsize=32)
def slow_basis(n: int, k: int) -> np.ndarray:
    """Orthonormal (n, k + 2) basis: constant, line and ``k`` DCT-II cosines (cached)."""
    t = np.arange(n, dtype=float)
    cols = [np.ones(n), t - 0.5 * (n - 1)]
    cols += [np.cos(np.pi * j * (t + 0.5) / n) for j in range(1, k + 1)]
    q, _ = np.linalg.qr(np.column_stack(cols))
    q.setflags(write=False)
    return q


def remove_slow(x: np.ndarray, basis: np.ndarray) -> np.ndarray:
    """``x`` minus its least-squares projection on ``basis`` (batched over leading axes)."""
    x = np.asarray(x)
    q = basis.astype(x.dtype, copy=False) if x.dtype == np.float32 else basis
    return x - (x @ q) @ q.T
