"""Hypothesis strategies: shapes, value ranges, shrinking, eager argument checks.

The shrinking checks use ``hypothesis.find``, which returns the minimal example hypothesis'
shrinker reaches (shortlex order on the underlying choices: shorter first, then smaller values).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, find, given, settings

from modemverify.errors import ConfigError
from modemverify.vectors.strategies import bit_sequences, label_sequences

# derandomize: the same search every run, so the run time (and any failure) is reproducible.
FIND = settings(database=None, derandomize=True, suppress_health_check=list(HealthCheck))


@pytest.mark.parametrize("k", [1, 4, 10, 16])
def test_bit_sequences_shrink_to_one_label_ending_in_one(k):
    # Smallest input containing a 1: one label, all zeros but the last bit.
    found = find(bit_sequences(k), lambda b: b.any(), settings=FIND)
    assert found.dtype == np.uint8
    assert found.tolist() == [0] * (k - 1) + [1]


def test_bit_sequences_shrink_length_and_values():
    # Smallest with a 1 in each of two labels: two labels 0001.
    assert find(bit_sequences(4), lambda b: b.size >= 8 and b[:4].any() and b[4:].any(),
                settings=FIND).tolist() == [0, 0, 0, 1] * 2
    # Smallest with at least 10 bits: three labels of zeros.
    assert find(bit_sequences(4), lambda b: b.size >= 10, settings=FIND).tolist() == [0] * 12
    # With min_symbols the minimum is that many all-zero labels.
    assert find(bit_sequences(3, min_symbols=2), lambda b: True,
                settings=FIND).tolist() == [0] * 6


def test_label_sequences_shrink():
    assert find(label_sequences(3), lambda x: (x == 5).any(), settings=FIND).tolist() == [5]
    found = find(label_sequences(4), lambda x: x.size >= 3 and x[2] > 0, settings=FIND)
    assert found.dtype == np.int64 and found.tolist() == [0, 0, 1]


@settings(max_examples=200, database=None)
@given(data=bit_sequences(3, min_symbols=1, max_symbols=9))
def test_bit_sequences_shape_and_values(data):
    assert data.ndim == 1 and data.dtype == np.uint8
    assert data.size % 3 == 0 and 3 <= data.size <= 27
    assert set(np.unique(data).tolist()) <= {0, 1}


@settings(max_examples=200, database=None)
@given(data=label_sequences(5, min_symbols=2, max_symbols=7))
def test_label_sequences_shape_and_values(data):
    assert data.ndim == 1 and data.dtype == np.int64
    assert 2 <= data.size <= 7
    assert data.min() >= 0 and data.max() <= 31


def test_all_labels_reachable():
    # The value range reaches both extremes (find raises if no example satisfies the condition).
    assert find(label_sequences(4), lambda x: (x == 15).any(), settings=FIND).tolist() == [15]
    assert find(bit_sequences(2, max_symbols=2), lambda b: b.size == 4 and b.all(),
                settings=FIND).tolist() == [1, 1, 1, 1]


@pytest.mark.parametrize("strategy", [bit_sequences, label_sequences])
@pytest.mark.parametrize("kwargs, key", [
    ({"bits_per_symbol": 0}, "bits_per_symbol"),
    ({"bits_per_symbol": 17}, "bits_per_symbol"),
    ({"bits_per_symbol": 2.0}, "bits_per_symbol"),
    ({"bits_per_symbol": True}, "bits_per_symbol"),
    ({"bits_per_symbol": 2, "min_symbols": -1}, "min_symbols"),
    ({"bits_per_symbol": 2, "min_symbols": 1.5}, "min_symbols"),
    ({"bits_per_symbol": 2, "min_symbols": 5, "max_symbols": 4}, "max_symbols"),
    ({"bits_per_symbol": 2, "max_symbols": "64"}, "max_symbols"),
])
def test_invalid_arguments_raise_config_error_when_called(strategy, kwargs, key):
    # Raised by the call itself, before any draw (hypothesis would defer it to the first draw).
    with pytest.raises(ConfigError) as info:
        strategy(**kwargs)
    assert info.value.key == key
    assert repr(kwargs[key]) in str(info.value)
