"""PRBS generator against ITU-T O.150 (05/96) clause 5 and the independent package pylfsr.

The clause of O.150 that defines each pattern is named beside each check; computed check values
say how they were computed. PRBS7 is not an O.150 pattern (common convention).
"""

from __future__ import annotations

import numpy as np
import pytest
from pylfsr import LFSR

from modemverify.errors import ConfigError, UnknownNameError
from modemverify.vectors.prbs import PRBS_PATTERNS, PrbsStream, prbs, prbs_spec


def bits(text: str) -> np.ndarray:
    return np.array([int(c) for c in text], dtype=np.uint8)


def raw(name: str, n_bits: int, offset: int = 0) -> np.ndarray:
    """The register output before O.150's inversion."""
    return prbs(name, n_bits, offset=offset) ^ np.uint8(PRBS_PATTERNS[name].inverted)


def cyclic_runs(period_bits: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(values, lengths) of the runs of one period read cyclically."""
    x = period_bits
    change = np.flatnonzero(x != np.roll(x, 1))  # indices where a new run starts (cyclically)
    lengths = np.diff(np.concatenate((change, [change[0] + x.size])))
    return x[change], lengths


def prime_factors(m: int) -> list[int]:
    out, p = [], 2
    while p * p <= m:
        while m % p == 0:
            if p not in out:
                out.append(p)
            m //= p
        p += 1
    if m > 1:
        out.append(m)
    return out


# (name, degree, tap, inverted, clause): ITU-T O.150 (05/96) 5.1-5.8 (polynomial x^n + x^k + 1).
O150_TABLE = [
    ("prbs7", 7, 6, False, None),  # not an O.150 clause-5 pattern (common convention)
    ("prbs9", 9, 5, False, "5.1"),
    ("prbs11", 11, 9, False, "5.2"),
    ("prbs15", 15, 14, True, "5.3"),
    ("prbs20", 20, 3, False, "5.4"),
    ("prbs23", 23, 18, True, "5.6"),
    ("prbs29", 29, 27, True, "5.7"),
    ("prbs31", 31, 28, True, "5.8"),
]


@pytest.mark.parametrize("name, degree, tap, inverted, clause", O150_TABLE)
def test_table_matches_o150(name, degree, tap, inverted, clause):
    # ITU-T O.150 (05/96) 5.1-5.8: polynomial x^n + x^k + 1, period 2^n - 1, inversion.
    spec = PRBS_PATTERNS[name]
    assert (spec.degree, spec.tap, spec.inverted) == (degree, tap, inverted)
    assert spec.period == 2 ** degree - 1
    assert spec.polynomial == f"x^{degree} + x^{tap} + 1"
    if clause is None:
        assert "not in ITU-T O.150" in spec.clause
    else:
        assert spec.clause == f"ITU-T O.150 (05/96) {clause}"


def test_prbs9_first_32_bits():
    # Computed from the O.150 5.1 register model (Q1 <- Q5 xor Q9, output Q9 before the shift)
    # from an all-ones register; O.150 5.1 fixes this phase: the pattern starts at "the first
    # ONE of 9 consecutive ONEs".
    assert np.array_equal(prbs("prbs9", 32), bits("11111111100000111101111100010111"))


def test_prbs9_feedback_tap_phase_is_offset_9():
    # Computed from the same register model with the feedback bit Q5 xor Q9 taken as the output:
    # the same sequence, shifted by 9.
    assert np.array_equal(prbs("prbs9", 32, offset=9), bits("00000111101111100010111001100100"))


def test_prbs15_first_32_bits_inverted_and_not():
    # Computed from the O.150 5.3 register model (Q1..Q15 = 1, feedback Q14 xor Q15 into Q1,
    # output Q15 before the shift); O.150 5.3: PRBS15 is transmitted inverted.
    assert np.array_equal(prbs("prbs15", 32), bits("00000000000000011111111111111011"))
    assert np.array_equal(raw("prbs15", 32), bits("11111111111111100000000000000100"))


@pytest.mark.parametrize("name", sorted(PRBS_PATTERNS))
def test_recurrence_of_generator_polynomial(name):
    # O.150 clause 5 register model (Q1 <- Qk xor Qn, output Qn) implies o[m] = o[m-k] ^ o[m-n];
    # checked over 2^20 bits and across the end of the period (reached by the offset jump).
    spec = PRBS_PATTERNS[name]
    n, k = spec.degree, spec.tap
    wrap = spec.period - min(2500, spec.period // 2)
    for o in (raw(name, 1 << 20), raw(name, 5000, offset=wrap)):
        assert np.array_equal(o[n:], o[n - k:o.size - k] ^ o[:o.size - n])
    # All-ones start: the first n register outputs are ones.
    assert raw(name, n).all()


@pytest.mark.parametrize("name", ["prbs7", "prbs9", "prbs11", "prbs15", "prbs20"])
def test_period_is_exactly_2n_minus_1(name):
    # O.150 5.1-5.4 (PRBS7: common convention): period 2^n - 1.
    spec = PRBS_PATTERNS[name]
    p = spec.period
    x = prbs(name, 2 * p + 100)
    assert np.array_equal(x[p:], x[:x.size - p])
    # Least period: any period divides p, so it suffices that no p/q (q prime, q | p) is one.
    one = x[:p]
    for q in prime_factors(p):
        assert not np.array_equal(one, np.roll(one, p // q)), f"period divides {p // q}"


def _expected_longest(spec):
    # Run-length property of maximal-length sequences (S. W. Golomb, Shift Register Sequences;
    # citation from memory): the register output has one run of n ones and longest zero run n - 1;
    # O.150's inversion swaps them.
    n = spec.degree
    ones, zeros = n, n - 1
    return (zeros, ones) if spec.inverted else (ones, zeros)


@pytest.mark.parametrize("name, clause", [("prbs7", "common convention"),
                                          ("prbs9", "O.150 5.1"), ("prbs11", "O.150 5.2"),
                                          ("prbs15", "O.150 5.3"), ("prbs20", "O.150 5.4"),
                                          ("prbs23", "O.150 5.6")])
def test_balance_and_runs_over_one_period(name, clause):
    spec = PRBS_PATTERNS[name]
    n, p = spec.degree, spec.period
    x = prbs(name, p)
    # Balance (Golomb, Shift Register Sequences, from memory): 2^(n-1) ones vs 2^(n-1) - 1 zeros
    # in the register output; the inverted patterns swap the counts.
    ones = int(x.sum())
    more, fewer = 2 ** (n - 1), 2 ** (n - 1) - 1
    assert (ones, p - ones) == ((fewer, more) if spec.inverted else (more, fewer))
    # Longest runs (O.150 5.1-5.6 with the run property above; e.g. PRBS9: 9 ones / 8 zeros;
    # PRBS15 and PRBS23, inverted: 15 zeros / 14 ones and 23 zeros / 22 ones).
    values, lengths = cyclic_runs(x)
    longest_ones, longest_zeros = _expected_longest(spec)
    assert lengths[values == 1].max() == longest_ones
    assert lengths[values == 0].max() == longest_zeros
    # The longest run is unique in a period, which alone rules out any shorter period.
    top = max(longest_ones, longest_zeros)
    assert np.count_nonzero(lengths == top) == 1
    # Golomb's run property of m-sequences (from memory): 2^(n-1) runs in all, and for
    # 1 <= L <= n - 2 exactly 2^(n-L-2) runs of ones and as many of zeros of length L.
    assert lengths.size == 2 ** (n - 1)
    for length in range(1, n - 1):
        expected = 2 ** (n - length - 2)
        assert np.count_nonzero((lengths == length) & (values == 1)) == expected
        assert np.count_nonzero((lengths == length) & (values == 0)) == expected


@pytest.mark.parametrize("name", ["prbs29", "prbs31"])
def test_long_patterns_start_with_a_run_of_exactly_n_zeros(name):
    # O.150 5.7, 5.8: inverted, longest zero run n (from theory; a full period is not simulated).
    # The all-ones register gives n zeros after inversion, bounded by ones on both sides.
    spec = PRBS_PATTERNS[name]
    n = spec.degree
    assert spec.inverted
    head = prbs(name, n + 1)
    assert not head[:n].any() and head[n] == 1
    assert prbs(name, 1, offset=spec.period - 1)[0] == 1


@pytest.mark.parametrize("name", ["prbs9", "prbs20", "prbs31"])
def test_stream_reads_in_odd_chunks_equal_one_long_read(name):
    sizes = [1, 7, 13, 127, 4099, 65537, 999_983, 3]
    stream = PrbsStream(name)
    parts = []
    total = 0
    while total < 5_000_000:  # crosses several buffer refills for every pattern
        for s in sizes:
            parts.append(stream.read(s))
            total += s
    assert np.array_equal(np.concatenate(parts), prbs(name, total))
    assert stream.position == total % PRBS_PATTERNS[name].period


@pytest.mark.parametrize("name", ["prbs9", "prbs20", "prbs23"])
def test_offset_jump_equals_skipping(name):
    long = prbs(name, 3_000_000)
    for t in (1, 9, 1000, 1_234_567, 2_999_000):
        assert np.array_equal(prbs(name, 1000, offset=t), long[t:t + 1000])
    period = PRBS_PATTERNS[name].period
    assert np.array_equal(prbs(name, 64, offset=3 * period + 5), long[5:69])


def _align(ours: np.ndarray, theirs: np.ndarray, n: int) -> int:
    """Shift s with ours == roll(theirs, -s) over one period (each n-bit window is unique)."""
    weights = 1 << np.arange(n - 1, -1, -1, dtype=np.int64)
    ext = np.concatenate((theirs, theirs[:n - 1])).astype(np.int64)
    words = np.lib.stride_tricks.sliding_window_view(ext, n) @ weights
    hits = np.flatnonzero(words == int(ours[:n].astype(np.int64) @ weights))
    assert hits.size == 1
    return int(hits[0])


@pytest.mark.parametrize("name", ["prbs7", "prbs9", "prbs11", "prbs15"])
def test_against_pylfsr(name):
    # Independent reference: pylfsr's Fibonacci LFSR with feedback polynomial [n, k] and an
    # all-ones start (its output is the non-inverted register output); O.150 clause 5 for 9-15.
    spec = PRBS_PATTERNS[name]
    n, p = spec.degree, spec.period
    theirs = np.asarray(LFSR(fpoly=[n, spec.tap], initstate="ones", verbose=False).runKCycle(p),
                        dtype=np.uint8)
    if spec.inverted:
        theirs = theirs ^ 1  # O.150 5.3: compare the inverted pattern with pylfsr inverted
    ours = prbs(name, p)
    shift = _align(ours, theirs, n)
    assert np.array_equal(ours, np.roll(theirs, -shift))  # phase-agnostic: same cyclic sequence
    # The phase matches too: both start from all ones and emit the last stage before shifting.
    assert shift == 0


def test_names_and_argument_errors():
    assert prbs_spec("PRBS9") is PRBS_PATTERNS["prbs9"]
    with pytest.raises(UnknownNameError) as info:
        prbs("prbs8", 10)
    assert info.value.name == "prbs8" and "prbs9" in info.value.known
    assert "PRBS pattern" in str(info.value)
    assert isinstance(info.value, ConfigError)
    with pytest.raises(UnknownNameError):
        PrbsStream(9)
    for bad in (-1, 2.5, True, "10"):
        with pytest.raises(ConfigError) as info:
            prbs("prbs9", bad)
        assert info.value.key == "n_bits"
    with pytest.raises(ConfigError) as info:
        prbs("prbs9", 4, offset=-3)
    assert info.value.key == "offset"
    empty = prbs("prbs9", 0)
    assert empty.dtype == np.uint8 and empty.size == 0
    assert prbs("prbs9", 10).dtype == np.uint8


def test_package_door_keeps_the_submodule_name_and_reexports_the_rest():
    # ``modemverify.vectors.prbs`` is the submodule, however it is reached (binding the
    # generator function under that name in the package would hide it from ``import ... as``).
    import importlib

    import modemverify.vectors as door
    import modemverify.vectors.prbs as module

    assert module is importlib.import_module("modemverify.vectors.prbs") is door.prbs
    assert module.prbs is prbs
    # the door lists each public name of its submodules once, bound to the same object
    subs = [importlib.import_module(f"modemverify.vectors.{s}")
            for s in ("biasing", "bits", "channels", "coverage", "prbs", "strategies")]
    public = [(m, name) for m in subs for name in m.__all__ if name != "prbs"]
    assert sorted(door.__all__) == sorted(name for _, name in public)
    for m, name in public:
        assert getattr(door, name) is getattr(m, name), name
