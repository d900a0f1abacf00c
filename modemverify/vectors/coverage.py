"""Coverage sequences: every label once, and every ordered tuple of labels once.

A mapper is a table of ``M = 2**bits_per_symbol`` entries, so :func:`exhaustive_labels` visits it
completely. Demodulators with memory (filters, differential decoding, equalisers) can also fail on
particular *transitions*; a de Bruijn sequence ``B(M, order)`` contains every ordered
``order``-tuple of labels exactly once (cyclically) in the shortest possible length ``M**order``
(de Bruijn sequence, common practice; N. G. de Bruijn 1946, from memory).

Labels follow :mod:`modemverify.schemes.labels`: the first bit fed is the most significant.
"""

from __future__ import annotations

import numpy as np

from modemverify.errors import ConfigError
from modemverify.options import whole_number
from modemverify.schemes.labels import labels_to_bits

__all__ = [
    "MAX_BITS_PER_SYMBOL", "MAX_DE_BRUIJN_LENGTH", "exhaustive_labels", "exhaustive_bits",
    "de_bruijn", "de_bruijn_labels", "de_bruijn_bits",
]

#: Largest bits_per_symbol accepted by the vector sources. The bundled schemes stop at 10
#: (1024QAM); 16 (65 536 labels) leaves room without letting a typo allocate gigabytes.
MAX_BITS_PER_SYMBOL = 16

#: Longest de Bruijn sequence built (M**order symbols): 2**24 int64 labels = 128 MiB.
MAX_DE_BRUIJN_LENGTH = 1 << 24


def _check_bits_per_symbol(value) -> int:
    return whole_number(value, "bits_per_symbol", 1, MAX_BITS_PER_SYMBOL)


def exhaustive_labels(bits_per_symbol: int) -> np.ndarray:
    """Every label ``0 .. M-1`` once, in increasing order.

    Parameters
    ----------
    bits_per_symbol : int
        ``k``; there are ``M = 2**k`` labels.

    Returns
    -------
    numpy.ndarray
        ``int64`` array ``[0, 1, ..., M-1]``.

    Examples
    --------
    >>> exhaustive_labels(2).tolist()
    [0, 1, 2, 3]
    """
    k = _check_bits_per_symbol(bits_per_symbol)
    return np.arange(1 << k, dtype=np.int64)


def exhaustive_bits(bits_per_symbol: int) -> np.ndarray:
    """The bits of :func:`exhaustive_labels`, first-fed (most significant) bit first.

    Examples
    --------
    >>> exhaustive_bits(2).tolist()
    [0, 0, 0, 1, 1, 0, 1, 1]
    """
    k = _check_bits_per_symbol(bits_per_symbol)
    return labels_to_bits(exhaustive_labels(k), k)


def de_bruijn(alphabet_size: int, order: int = 2) -> np.ndarray:
    """The cyclic de Bruijn sequence ``B(alphabet_size, order)``.

    Every ordered ``order``-tuple over ``0 .. alphabet_size-1`` occurs exactly once as a window of
    the sequence read cyclically. Built as the lexicographically least such sequence: the
    concatenation, in lexicographic order, of the Lyndon words whose length divides ``order``
    (the Fredricksen-Kessler-Maiorana construction, common practice).

    Parameters
    ----------
    alphabet_size : int
        ``M >= 1``.
    order : int, optional
        Tuple length ``>= 1`` (default 2: every ordered pair of symbols).

    Returns
    -------
    numpy.ndarray
        ``int64`` array of length ``alphabet_size**order``.

    Raises
    ------
    ConfigError
        For a bad argument or a sequence longer than :data:`MAX_DE_BRUIJN_LENGTH`.

    Examples
    --------
    >>> de_bruijn(2, 3).tolist()
    [0, 0, 0, 1, 0, 1, 1, 1]
    >>> de_bruijn(3).tolist()
    [0, 0, 1, 0, 2, 1, 1, 2, 2]
    """
    m = whole_number(alphabet_size, "alphabet_size", 1)
    n = whole_number(order, "order", 1)
    if m ** n > MAX_DE_BRUIJN_LENGTH:
        raise ConfigError(f"alphabet_size**order = {m}**{n} = {m ** n} symbols exceeds the limit "
                          f"of {MAX_DE_BRUIJN_LENGTH}; lower the order", key="order")
    if m == 1:
        return np.zeros(1, dtype=np.int64)
    if n == 1:
        return np.arange(m, dtype=np.int64)
    if n == 2:
        return _de_bruijn_pairs(m)
    return _de_bruijn_fkm(m, n)


def _de_bruijn_pairs(m: int) -> np.ndarray:
    """Order-2 FKM sequence built with numpy (the general loop would visit ~M**2/2 words).

    The Lyndon words of length 1 or 2, in lexicographic order, are ``a`` followed by the pairs
    ``(a, b)`` for ``b > a``: block ``a`` is ``a, a, a+1, a, a+2, ..., a, M-1``, of length
    ``2(M - a) - 1``.
    """
    a = np.arange(m, dtype=np.int64)
    block_len = 2 * (m - a) - 1
    starts = np.concatenate(([0], np.cumsum(block_len)[:-1]))
    owner = np.repeat(a, block_len)  # the block each position belongs to
    within = np.arange(m * m, dtype=np.int64) - starts[owner]
    # Inside block a, odd places hold a (first letter of each pair) and even place 2i holds a + i
    # (place 0 is the one-letter word a itself).
    return np.where(within % 2 == 1, owner, owner + within // 2)


def _de_bruijn_fkm(m: int, n: int) -> np.ndarray:
    """General FKM construction (iterative Lyndon-word successor, Duval's algorithm)."""
    out: list[int] = []
    word = [-1]
    while word:
        # word is the next Lyndon word (prefix of the running string) after incrementing.
        word[-1] += 1
        if n % len(word) == 0:
            out.extend(word)
        # Extend periodically to length n, then strip trailing maximal symbols.
        size = len(word)
        while len(word) < n:
            word.append(word[len(word) - size])
        while word and word[-1] == m - 1:
            word.pop()
    return np.asarray(out, dtype=np.int64)


def de_bruijn_labels(bits_per_symbol: int, order: int = 2, linear: bool = True) -> np.ndarray:
    """A de Bruijn sequence over the ``2**bits_per_symbol`` labels.

    Parameters
    ----------
    bits_per_symbol : int
        ``k``; the alphabet is the ``M = 2**k`` labels.
    order : int, optional
        Tuple length (default 2: every label-to-label transition).
    linear : bool, optional
        If true (default), the first ``order - 1`` labels are appended so that every ordered
        tuple occurs in the sequence read *once, from start to end* (length
        ``M**order + order - 1``); if false, the cyclic sequence of length ``M**order`` is
        returned.

    Returns
    -------
    numpy.ndarray
        ``int64`` labels.

    Examples
    --------
    >>> de_bruijn_labels(1).tolist()
    [0, 0, 1, 1, 0]
    """
    k = _check_bits_per_symbol(bits_per_symbol)
    seq = de_bruijn(1 << k, order)
    if linear:
        seq = np.concatenate((seq, seq[:whole_number(order, "order", 1) - 1]))
    return seq


def de_bruijn_bits(bits_per_symbol: int, order: int = 2, linear: bool = True) -> np.ndarray:
    """The bits of :func:`de_bruijn_labels`, each label first-fed (most significant) bit first.

    Examples
    --------
    >>> de_bruijn_bits(2, linear=False).size
    32
    """
    k = _check_bits_per_symbol(bits_per_symbol)
    return labels_to_bits(de_bruijn_labels(k, order, linear), k)
