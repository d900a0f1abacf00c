"""Fixed bit patterns: constant, alternating, label sweeps and a walking one.

These are the deterministic stimuli that expose stuck bits, swapped bit positions and DC or
polarity faults quickly (common practice). All return ``uint8`` 0/1 arrays whose length is a whole
number of ``bits_per_symbol``-bit labels; a label's first bit is its most significant
(:mod:`modemverify.schemes.labels`).

:data:`PATTERNS` maps each name to a function ``(bits_per_symbol, n_symbols) -> bits``; use the
front door :func:`pattern` when the name comes from a device file.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from modemverify.errors import UnknownNameError
from modemverify.schemes.labels import labels_to_bits
from modemverify._checks import whole_number as _check_int
from modemverify.vectors.coverage import _check_bits_per_symbol

__all__ = [
    "all_zeros",
    "all_ones",
    "alternating",
    "each_label_repeated",
    "walking_one",
    "PATTERNS",
    "pattern",
]


def all_zeros(bits_per_symbol: int, n_symbols: int) -> np.ndarray:
    """``n_symbols`` labels of all zeros.

    Examples
    --------
    >>> all_zeros(2, 3).tolist()
    [0, 0, 0, 0, 0, 0]
    """
    k = _check_bits_per_symbol(bits_per_symbol)
    return np.zeros(k * _check_int(n_symbols, "n_symbols", 0), dtype=np.uint8)


def all_ones(bits_per_symbol: int, n_symbols: int) -> np.ndarray:
    """``n_symbols`` labels of all ones (label ``M - 1``).

    Examples
    --------
    >>> all_ones(3, 1).tolist()
    [1, 1, 1]
    """
    k = _check_bits_per_symbol(bits_per_symbol)
    return np.ones(k * _check_int(n_symbols, "n_symbols", 0), dtype=np.uint8)


def alternating(bits_per_symbol: int, n_symbols: int) -> np.ndarray:
    """The bit stream ``0, 1, 0, 1, ...`` cut into ``n_symbols`` labels.

    With an even ``bits_per_symbol`` every label is the same (``01...01``); with an odd one the
    labels alternate between ``010...`` and ``101...``.

    Examples
    --------
    >>> alternating(3, 2).tolist()
    [0, 1, 0, 1, 0, 1]
    """
    k = _check_bits_per_symbol(bits_per_symbol)
    n = k * _check_int(n_symbols, "n_symbols", 0)
    return (np.arange(n) & 1).astype(np.uint8)


def each_label_repeated(bits_per_symbol: int, repeats: int = 1) -> np.ndarray:
    """Label 0 ``repeats`` times, then label 1 ``repeats`` times, ..., up to label ``M - 1``.

    Parameters
    ----------
    bits_per_symbol : int
        ``k``; ``M = 2**k``.
    repeats : int, optional
        How many consecutive copies of each label (``>= 1``).

    Returns
    -------
    numpy.ndarray
        ``M * repeats * k`` bits.

    Examples
    --------
    >>> each_label_repeated(1, 2).tolist()
    [0, 0, 1, 1]
    """
    k = _check_bits_per_symbol(bits_per_symbol)
    r = _check_int(repeats, "repeats", 1)
    return labels_to_bits(np.repeat(np.arange(1 << k, dtype=np.int64), r), k)


def walking_one(bits_per_symbol: int) -> np.ndarray:
    """A single 1 bit walking through a label of zeros, from the first bit to the last and back.

    One period of the walk: the 1 sits on bit ``0, 1, ..., k-1`` and then on ``k-2, ..., 1``
    (``2k - 2`` labels; the next period starts again at bit 0, so repeating the array continues
    the walk without a stutter). For ``k = 1`` the period is the single label ``1``.

    Examples
    --------
    >>> walking_one(3).reshape(-1, 3).tolist()
    [[1, 0, 0], [0, 1, 0], [0, 0, 1], [0, 1, 0]]
    """
    k = _check_bits_per_symbol(bits_per_symbol)
    positions = np.concatenate((np.arange(k), np.arange(k - 2, 0, -1)))
    return labels_to_bits(np.int64(1) << (k - 1 - positions), k)


def _tiled(bits: np.ndarray, bits_per_symbol: int, n_symbols: int) -> np.ndarray:
    """Repeat a pattern cyclically and cut it to ``n_symbols`` labels."""
    n = bits_per_symbol * n_symbols
    return np.resize(bits, n) if n else np.zeros(0, dtype=np.uint8)


def _each_label_repeated_n(bits_per_symbol: int, n_symbols: int) -> np.ndarray:
    # Spend the length on the longest runs that still reach every label: repeats = n // M.
    k = _check_bits_per_symbol(bits_per_symbol)
    n = _check_int(n_symbols, "n_symbols", 0)
    repeats = max(1, n >> k)
    return _tiled(each_label_repeated(k, repeats), k, n)


def _walking_one_n(bits_per_symbol: int, n_symbols: int) -> np.ndarray:
    k = _check_bits_per_symbol(bits_per_symbol)
    return _tiled(walking_one(k), k, _check_int(n_symbols, "n_symbols", 0))


#: name -> function(bits_per_symbol, n_symbols) -> bits. Patterns with a natural length of their
#: own (``each_label_repeated``, ``walking_one``) are repeated cyclically and cut to n_symbols;
#: ``each_label_repeated`` uses ``repeats = max(1, n_symbols // M)``.
PATTERNS: dict[str, Callable[[int, int], np.ndarray]] = {
    "all_zeros": all_zeros,
    "all_ones": all_ones,
    "alternating": alternating,
    "each_label_repeated": _each_label_repeated_n,
    "walking_one": _walking_one_n,
}


def pattern(name: str, bits_per_symbol: int, n_symbols: int) -> np.ndarray:
    """The named fixed pattern, ``n_symbols`` labels long.

    Parameters
    ----------
    name : str
        A key of :data:`PATTERNS`.
    bits_per_symbol : int
        ``k``.
    n_symbols : int
        Number of labels; the result has ``k * n_symbols`` bits.

    Raises
    ------
    UnknownNameError
        If ``name`` is not a key of :data:`PATTERNS`.

    Examples
    --------
    >>> pattern("walking_one", 2, 3).tolist()
    [1, 0, 0, 1, 1, 0]
    """
    try:
        make = PATTERNS[name]
    except (KeyError, TypeError):
        raise UnknownNameError("pattern", name, PATTERNS) from None
    return make(bits_per_symbol, n_symbols)
