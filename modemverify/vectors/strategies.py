"""Hypothesis strategies for modem inputs.

Like hypothesis' own strategies these are lowercase plurals, but their arguments are checked when
the function is called (hypothesis defers validation to the first draw), so a bad device file fails
before any test runs, with :class:`~modemverify.errors.ConfigError`.

Both strategies shrink towards short, all-zero input: hypothesis shrinks the drawn length first
and every element towards 0, so the minimal counterexample for "any bit is 1" is one label
``0...01``.
"""

from __future__ import annotations

import os
from functools import partial

import numpy as np

# hypothesis keeps a cache folder (".hypothesis") in the working folder by default: a user's
# checkout is not ours to write into, so it goes to the user's cache unless they chose a place
os.environ.setdefault("HYPOTHESIS_STORAGE_DIRECTORY", os.path.join(
    os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache"),
    "modemverify", "hypothesis"))

from hypothesis import strategies as st  # noqa: E402
from hypothesis.extra.numpy import arrays  # noqa: E402

from modemverify.options import whole_number as _check_int
from modemverify.schemes.labels import labels_to_bits
from modemverify.vectors.coverage import _check_bits_per_symbol

__all__ = ["bit_sequences", "label_sequences"]

# By default ``arrays`` draws one shared "fill" value plus a few explicit elements; that fill value
# does not shrink to 0 (a minimal "contains a 1" example then ends at all ones). Drawing every
# element on its own keeps shrinking exact; with one choice per label it stays cheap.
_NO_FILL = st.nothing()


def _check_lengths(min_symbols, max_symbols) -> tuple[int, int]:
    lo = _check_int(min_symbols, "min_symbols", 0)
    hi = _check_int(max_symbols, "max_symbols", lo)
    return lo, hi


def bit_sequences(bits_per_symbol: int, min_symbols: int = 0,
                  max_symbols: int = 64) -> st.SearchStrategy[np.ndarray]:
    """Bit arrays holding a whole number of labels.

    Parameters
    ----------
    bits_per_symbol : int
        ``k``; every drawn array has a length that is a multiple of ``k``.
    min_symbols, max_symbols : int, optional
        Bounds on the number of labels (inclusive); ``0 <= min_symbols <= max_symbols``.

    Returns
    -------
    hypothesis.strategies.SearchStrategy
        Draws 1-D ``uint8`` arrays of 0/1 values.

    Raises
    ------
    ConfigError
        Immediately, for a bad argument.

    Notes
    -----
    Each label is one hypothesis choice (an integer, expanded to its bits first-fed bit first),
    not ``k`` separate bit choices: hypothesis' cost per choice is high enough that arrays of
    64 ten-bit labels drawn bit by bit took tens of seconds to shrink (measured up to 34 s),
    against under a second this way. Shrinking a label towards 0 then shrinks its bits towards
    ``0...01``.

    Examples
    --------
    >>> from hypothesis import find
    >>> find(bit_sequences(4), lambda bits: bits.any()).tolist()
    [0, 0, 0, 1]
    """
    k = _check_bits_per_symbol(bits_per_symbol)
    lo, hi = _check_lengths(min_symbols, max_symbols)
    return _labels(k, lo, hi).map(partial(labels_to_bits, bits_per_symbol=k))


def label_sequences(bits_per_symbol: int, min_symbols: int = 0,
                    max_symbols: int = 64) -> st.SearchStrategy[np.ndarray]:
    """Label arrays with values in ``0 .. 2**bits_per_symbol - 1``.

    Parameters
    ----------
    bits_per_symbol : int
        ``k``.
    min_symbols, max_symbols : int, optional
        Bounds on the number of labels (inclusive).

    Returns
    -------
    hypothesis.strategies.SearchStrategy
        Draws 1-D ``int64`` arrays.

    Raises
    ------
    ConfigError
        Immediately, for a bad argument.

    Examples
    --------
    >>> from hypothesis import find
    >>> find(label_sequences(3), lambda labels: (labels == 5).any()).tolist()
    [5]
    """
    k = _check_bits_per_symbol(bits_per_symbol)
    lo, hi = _check_lengths(min_symbols, max_symbols)
    return _labels(k, lo, hi)


def _labels(k: int, lo: int, hi: int) -> st.SearchStrategy[np.ndarray]:
    return arrays(np.int64, st.integers(lo, hi).map(lambda n: (n,)),
                  elements=st.integers(0, (1 << k) - 1), fill=_NO_FILL)
