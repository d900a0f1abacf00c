"""Geometry of a constellation: minimum distance and nearest-neighbour pairs."""

from __future__ import annotations

import numpy as np

__all__ = [
    "DISTANCE_RTOL", "MEASURED_RTOL", "all_distinct", "distance_matrix", "minimum_distance",
    "nearest_neighbour_pairs", "rotational_symmetry_deg",
]

#: relative slack when deciding that two distances are "the same" (float32 devices, rounding)
DISTANCE_RTOL = 1e-3
#: the same for measured tables (filter truncation, fixed point): the next distance in every
#: bundled constellation is at least 1.3 x the minimum (common practice for QAM: sqrt 2)
MEASURED_RTOL = 0.05


def all_distinct(points: np.ndarray) -> bool:
    """True when every point is finite and no two coincide (to 9 decimals): a table that can
    carry every label unambiguously."""
    p = np.asarray(points, dtype=np.complex128)
    return bool(np.all(np.isfinite(p))) and len(np.unique(np.round(p, 9))) == len(p)


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


def rotational_symmetry_deg(points: np.ndarray, rtol: float = DISTANCE_RTOL) -> float:
    """Smallest rotation (degrees) that maps the point set onto itself: 90 for square QAM,
    360/M for M-PSK, 180 for BPSK, 360 when there is none."""
    p = np.asarray(points, dtype=np.complex128)
    tol = rtol * minimum_distance(p) if len(p) > 1 else rtol
    for m in range(len(p), 1, -1):
        if 360 % m and m > 8:
            continue
        rotated = p * np.exp(2j * np.pi / m)
        d = np.abs(rotated[:, None] - p[None, :]).min(axis=1)
        if np.all(d <= max(tol, 1e-9)):
            return 360.0 / m
    return 360.0
