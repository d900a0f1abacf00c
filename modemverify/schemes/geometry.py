"""Geometry of a constellation: minimum distance and nearest-neighbour pairs."""

from __future__ import annotations

import numpy as np

#: relative slack when deciding that two distances are "the same" (float32 devices, rounding)
DISTANCE_RTOL = 1e-3


def distance_matrix(points: np.ndarray) -> np.ndarray:
    p = np.asarray(points, dtype=np.complex128)
    return np.abs(p[:, None] - p[None, :])


def minimum_distance(points: np.ndarray) -> float:
    d = distance_matrix(points)
    np.fill_diagonal(d, np.inf)
    return float(d.min())


def nearest_neighbour_pairs(points: np.ndarray, rtol: float = DISTANCE_RTOL):
    """Index pairs (i < j) of points at the minimum distance, within ``rtol``.

    Returns two int arrays ``(i, j)``. For square QAM these are the horizontal and vertical
    neighbours; for PSK, the neighbours around the circle.
    """
    d = distance_matrix(points)
    np.fill_diagonal(d, np.inf)
    dmin = d.min()
    i, j = np.nonzero(np.triu(d <= dmin * (1 + rtol), k=1))
    return i, j
