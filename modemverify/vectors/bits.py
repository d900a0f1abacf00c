"""Uniform random bits from a numpy Generator: the one way every check draws them."""

from __future__ import annotations

import numpy as np

__all__ = ["random_bits"]


def random_bits(rng: np.random.Generator, n: int) -> np.ndarray:
    """``n`` independent, equiprobable bits (uint8 0/1) from ``rng``.

    Drawn as ``ceil(n / 8)`` random bytes unpacked MSB first, so ``n`` bits cost ``n / 8``
    bytes of the stream; the first ``m`` bits of a longer draw equal a draw of ``m`` bits
    rounded up to whole bytes.

    >>> random_bits(np.random.default_rng(7), 10).tolist()
    [1, 0, 0, 0, 1, 0, 1, 1, 0, 1]
    """
    n = int(n)
    if n < 0:
        raise ValueError(f"n={n}: expected a number of bits >= 0")
    return np.unpackbits(np.frombuffer(rng.bytes(-(-n // 8)), dtype=np.uint8))[:n]
