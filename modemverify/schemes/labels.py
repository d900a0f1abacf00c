"""Labels: the k bits that select one constellation point, as an integer.

Throughout modemverify a label's integer value has the **first bit fed to ``modulate`` as its most
significant bit**. The label string ``"0010"`` therefore lists the bits in the order they are fed
and equals the integer 2. This is the reading order of the published mapping tables (3GPP TS
38.211 5.1 writes b(4i) first; IEEE 802.11 writes b0 first).
"""

from __future__ import annotations

import numpy as np

__all__ = ["bits_to_labels", "labels_to_bits", "label_string", "hamming", "gray_code"]


def bits_to_labels(bits: np.ndarray, bits_per_symbol: int) -> np.ndarray:
    """Group a 0/1 array into labels, first bit of each group most significant.

    >>> bits_to_labels(np.array([0, 0, 1, 0, 1, 1, 1, 1], dtype=np.uint8), 4).tolist()
    [2, 15]
    """
    bits = np.asarray(bits, dtype=np.uint8)
    k = int(bits_per_symbol)
    if bits.size % k:
        raise ValueError(f"{bits.size} bits is not a whole number of {k}-bit labels")
    weights = (1 << np.arange(k - 1, -1, -1)).astype(np.int64)
    return bits.reshape(-1, k).astype(np.int64) @ weights


def labels_to_bits(labels: np.ndarray, bits_per_symbol: int) -> np.ndarray:
    """Expand labels into bits, most significant (first-fed) bit first.

    >>> labels_to_bits(np.array([2, 15]), 4).tolist()
    [0, 0, 1, 0, 1, 1, 1, 1]
    """
    labels = np.asarray(labels, dtype=np.int64).reshape(-1)
    k = int(bits_per_symbol)
    shifts = np.arange(k - 1, -1, -1, dtype=np.int64)
    return ((labels[:, None] >> shifts) & 1).astype(np.uint8).reshape(-1)


def label_string(label: int, bits_per_symbol: int) -> str:
    """``label_string(2, 4) == "0010"``: the bits in the order they are fed."""
    return format(int(label), f"0{int(bits_per_symbol)}b")


def hamming(a, b) -> np.ndarray:
    """Number of differing bits between labels (element-wise, broadcasting)."""
    x = np.bitwise_xor(np.asarray(a, dtype=np.int64), np.asarray(b, dtype=np.int64))
    count = np.zeros(x.shape, dtype=np.int64)
    while np.any(x):
        count += x & 1
        x = x >> 1
    return count


def gray_code(n: np.ndarray | int) -> np.ndarray:
    """Binary-reflected Gray code of ``n``: ``n ^ (n >> 1)``."""
    n = np.asarray(n, dtype=np.int64)
    return n ^ (n >> 1)
