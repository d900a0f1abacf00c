"""Coverage sequences: exhaustive labels and de Bruijn sequences.

de Bruijn sequence, common practice (N. G. de Bruijn 1946, from memory): B(M, n) has length M**n
and contains every ordered n-tuple over M symbols exactly once as a cyclic window.
"""

from __future__ import annotations

import numpy as np
import pytest

from modemverify.errors import ConfigError
from modemverify.schemes.labels import bits_to_labels
from modemverify.vectors.coverage import (
    _de_bruijn_fkm,
    _de_bruijn_pairs,
    de_bruijn,
    de_bruijn_bits,
    de_bruijn_labels,
    exhaustive_bits,
    exhaustive_labels,
)


def windows(seq: np.ndarray, order: int, m: int, cyclic: bool) -> np.ndarray:
    """Every length-``order`` window of ``seq`` as one integer (base ``m``)."""
    ext = np.concatenate((seq, seq[:order - 1])) if cyclic else seq
    w = np.lib.stride_tricks.sliding_window_view(ext, order)
    return w @ (m ** np.arange(order - 1, -1, -1, dtype=np.int64))


def lexicographically_least_de_bruijn(m: int, order: int) -> list[int]:
    """Brute force: depth-first search, symbols tried in increasing order, for a sequence of
    length m**order whose cyclic windows are all distinct. The first one found is the
    lexicographically least de Bruijn sequence; it is independent of the Lyndon-word
    construction under test (which is known to produce exactly this sequence: Fredricksen and
    Maiorana 1978, from memory)."""
    length = m ** order
    seq: list[int] = []
    seen: set[tuple[int, ...]] = set()

    def extend() -> bool:
        if len(seq) == length:
            wrap = [tuple((seq + seq[:order - 1])[i:i + order])
                    for i in range(length - order + 1, length)]
            return len(set(wrap)) == len(wrap) and not (set(wrap) & seen)
        for s in range(m):
            seq.append(s)
            window = tuple(seq[-order:]) if len(seq) >= order else None
            if window is None or window not in seen:
                if window is not None:
                    seen.add(window)
                if extend():
                    return True
                if window is not None:
                    seen.discard(window)
            seq.pop()
        return False

    assert extend()
    return seq


# --------------------------------------------------------------------------------------------
# exhaustive


@pytest.mark.parametrize("k", range(1, 9))
def test_exhaustive_labels_and_bits(k):
    labels = exhaustive_labels(k)
    assert labels.dtype == np.int64
    assert labels.tolist() == list(range(2 ** k))
    # Independent expansion: the label's binary string, most significant (first-fed) bit first.
    expected = [int(c) for label in range(2 ** k) for c in format(label, f"0{k}b")]
    out = exhaustive_bits(k)
    assert out.dtype == np.uint8 and out.tolist() == expected


# --------------------------------------------------------------------------------------------
# de Bruijn


@pytest.mark.parametrize("m", [2, 4, 8, 16, 64, 256])
def test_de_bruijn_pairs_every_ordered_pair_once(m):
    seq = de_bruijn(m)
    assert seq.dtype == np.int64 and seq.size == m * m
    assert seq.min() == 0 and seq.max() == m - 1
    pairs = windows(seq, 2, m, cyclic=True)
    assert np.array_equal(np.sort(pairs), np.arange(m * m))  # each ordered pair exactly once


@pytest.mark.parametrize("m, order", [(2, 3), (2, 6), (3, 3), (4, 3), (4, 4), (16, 3), (2, 12)])
def test_de_bruijn_higher_order_all_windows_distinct(m, order):
    seq = de_bruijn(m, order)
    assert seq.size == m ** order
    assert np.array_equal(np.sort(windows(seq, order, m, cyclic=True)), np.arange(m ** order))


@pytest.mark.parametrize("m, order", [(2, 1), (2, 2), (2, 3), (2, 4), (2, 5), (3, 2), (3, 3),
                                      (4, 2), (5, 2), (6, 2)])
def test_de_bruijn_equals_brute_force_lexicographically_least(m, order):
    assert de_bruijn(m, order).tolist() == lexicographically_least_de_bruijn(m, order)


@pytest.mark.parametrize("m", [2, 3, 5, 16, 256])
def test_order_two_fast_path_equals_general_construction(m):
    assert np.array_equal(_de_bruijn_pairs(m), _de_bruijn_fkm(m, 2))


def test_de_bruijn_trivial_sizes():
    assert de_bruijn(1, 5).tolist() == [0]  # B(1, n): the only tuple 0...0, once
    assert de_bruijn(5, 1).tolist() == [0, 1, 2, 3, 4]


@pytest.mark.parametrize("k, order", [(1, 2), (2, 2), (3, 2), (4, 2), (8, 2), (2, 3), (3, 4)])
def test_de_bruijn_labels_linear_covers_every_tuple_reading_straight_through(k, order):
    m = 2 ** k
    seq = de_bruijn_labels(k, order)
    assert seq.size == m ** order + order - 1
    assert np.array_equal(np.sort(windows(seq, order, m, cyclic=False)), np.arange(m ** order))
    assert np.array_equal(de_bruijn_labels(k, order, linear=False), de_bruijn(m, order))


@pytest.mark.parametrize("k", [1, 2, 4, 6])
def test_de_bruijn_bits_are_the_labels_msb_first(k):
    out = de_bruijn_bits(k)
    assert out.dtype == np.uint8 and out.size == k * (4 ** k + 1)
    assert np.array_equal(bits_to_labels(out, k), de_bruijn_labels(k))
    assert de_bruijn_bits(k, linear=False).size == k * 4 ** k


def test_coverage_argument_errors():
    for bad in (0, 17, 2.0, True, "4", None):
        with pytest.raises(ConfigError) as info:
            exhaustive_labels(bad)
        assert info.value.key == "bits_per_symbol"
    for bad in (0, -2, 1.5):
        with pytest.raises(ConfigError) as info:
            de_bruijn(bad)
        assert info.value.key == "alphabet_size"
        with pytest.raises(ConfigError) as info:
            de_bruijn(4, bad)
        assert info.value.key == "order"
    with pytest.raises(ConfigError) as info:
        de_bruijn_labels(8, order=4)  # 2**32 symbols
    assert info.value.key == "order" and "exceeds" in str(info.value)
