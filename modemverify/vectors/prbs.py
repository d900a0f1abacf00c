"""Pseudo-random binary sequences (PRBS) of ITU-T O.150 (05/96), clause 5.

Register model
--------------
O.150 describes each pattern by an ``n``-stage shift register ``Q1 ... Qn``. On every clock the
feedback ``Qk xor Qn`` enters ``Q1``, every stage moves one place on (``Q(i+1) <- Qi``), and the
pattern is read from ``Qn`` (inverted for the patterns O.150 marks as inverted). The generator
polynomial is ``x^n + x^k + 1`` and the period is ``2^n - 1``.

Written as a sequence, the output ``o`` obeys the recurrence::

    o[m] = o[m - k] xor o[m - n]

because ``Qn`` at clock ``m`` is the bit that entered ``Q1`` at clock ``m - n + 1``. We start from
the all-ones register, so the first ``n`` output bits are ones (before any inversion). For the
511-bit pattern this is exactly the phase O.150 5.1 fixes ("the first ONE of 9 consecutive ONEs");
O.150 fixes no phase for the other patterns, and a receiver must synchronise to whatever phase
arrives.

Why the generator is fast
-------------------------
Over GF(2) squaring is linear, so ``p(x)^(2^j) = x^(n 2^j) + x^(k 2^j) + 1`` and the sequence
also obeys ``o[m] = o[m - k 2^j] xor o[m - n 2^j]``. Once ``n 2^j`` bits of history are held,
the next ``k 2^j`` bits are one vectorised XOR of two earlier slices. Starting from the first
``n`` bits, each doubling of the history doubles the chunk size, so a read costs a few numpy
operations per ~10^5 bits, and the working buffer has a fixed size (a few MB at most) whatever
the read length or the period (PRBS31 has period 2^31 - 1).

Starting at an offset jumps ahead without generating the skipped bits: the bit ``o[t + i]`` is the
GF(2) combination of ``o[i .. i + n - 1]`` given by ``x^t mod f(x)``, where
``f(x) = x^n + x^(n-k) + 1`` is the characteristic polynomial of the recurrence.
"""

from __future__ import annotations

from dataclasses import dataclass
from operator import index

import numpy as np

from modemverify.errors import ConfigError, UnknownNameError

__all__ = ["PrbsSpec", "PRBS_PATTERNS", "prbs", "PrbsStream", "prbs_spec"]


@dataclass(frozen=True)
class PrbsSpec:
    """One PRBS pattern: generator ``x^degree + x^tap + 1``.

    Attributes
    ----------
    name : str
        Lowercase key in :data:`PRBS_PATTERNS`, e.g. ``"prbs15"``.
    degree : int
        Number of register stages ``n``.
    tap : int
        The inner feedback stage ``k`` (``Q1 <- Qk xor Qn``).
    inverted : bool
        Whether the transmitted pattern is the complement of the register output.
    period : int
        ``2**degree - 1``.
    clause : str
        The ITU-T O.150 (05/96) clause that defines it, or a note that it is not an O.150 pattern.
    """

    name: str
    degree: int
    tap: int
    inverted: bool
    period: int
    clause: str

    @property
    def polynomial(self) -> str:
        """The generator polynomial as text, e.g. ``"x^9 + x^5 + 1"``."""
        return f"x^{self.degree} + x^{self.tap} + 1"


def _spec(name: str, degree: int, tap: int, inverted: bool, clause: str) -> PrbsSpec:
    return PrbsSpec(name, degree, tap, inverted, (1 << degree) - 1, clause)


#: The known patterns, keyed by lowercase name. O.150 (05/96) clause 5 defines all but PRBS7.
PRBS_PATTERNS: dict[str, PrbsSpec] = {
    s.name: s
    for s in (
        # PRBS7 is widely used (e.g. for short link tests) but is not one of O.150's patterns.
        _spec("prbs7", 7, 6, False, "not in ITU-T O.150 (05/96); common convention"),
        _spec("prbs9", 9, 5, False, "ITU-T O.150 (05/96) 5.1"),
        _spec("prbs11", 11, 9, False, "ITU-T O.150 (05/96) 5.2"),
        _spec("prbs15", 15, 14, True, "ITU-T O.150 (05/96) 5.3"),
        _spec("prbs20", 20, 3, False, "ITU-T O.150 (05/96) 5.4"),
        _spec("prbs23", 23, 18, True, "ITU-T O.150 (05/96) 5.6"),
        _spec("prbs29", 29, 27, True, "ITU-T O.150 (05/96) 5.7"),
        _spec("prbs31", 31, 28, True, "ITU-T O.150 (05/96) 5.8"),
    )
}

# Target size of one vectorised XOR (bytes, one byte per bit): large enough that numpy's per-call
# overhead is negligible, small enough that the working set stays in the L2 cache.
_CHUNK_TARGET = 1 << 17
# The buffer holds the history plus this many fresh bits; moving the history back to the front
# costs one copy of the history per refill, so the refill is made several times larger.
_REFILL_FACTOR = 4
_MIN_REFILL = 1 << 21


def prbs_spec(name: str) -> PrbsSpec:
    """Look up a pattern by name (case-insensitive).

    Raises
    ------
    UnknownNameError
        If ``name`` is not a key of :data:`PRBS_PATTERNS`.
    """
    key = name.lower() if isinstance(name, str) else name
    try:
        return PRBS_PATTERNS[key]
    except (KeyError, TypeError):
        raise UnknownNameError("PRBS pattern", name, PRBS_PATTERNS) from None


def _check_count(value, name: str) -> int:
    if isinstance(value, bool):
        raise ConfigError(f"expected a non-negative integer, got {value!r}", key=name)
    try:
        value = index(value)
    except TypeError:
        raise ConfigError(f"expected a non-negative integer, got {value!r}", key=name) from None
    if value < 0:
        raise ConfigError(f"expected a non-negative integer, got {value!r}", key=name)
    return value


def _x_power_mod(exponent: int, poly: int, degree: int) -> int:
    """``x**exponent mod poly`` over GF(2); polynomials are ints, bit i = coefficient of x^i.

    Square-and-multiply: the Python loop runs over the bits of ``exponent`` (at most 31 after
    reduction modulo the period) and the bits of a degree < 31 polynomial, never over sequence bits.
    """
    top = 1 << degree

    def mulmod(a: int, b: int) -> int:
        result = 0
        while b:
            if b & 1:
                result ^= a
            b >>= 1
            a <<= 1
            if a & top:
                a ^= poly
        return result

    result = 1
    for bit in bin(exponent)[2:]:
        result = mulmod(result, result)
        if bit == "1":
            result <<= 1
            if result & top:
                result ^= poly
    return result


class PrbsStream:
    """An endless PRBS, read in pieces.

    Successive :meth:`read` calls continue the sequence exactly where the last one stopped, so
    ``s.read(3)`` followed by ``s.read(5)`` equals ``prbs(name, 8)``. Working memory is a fixed
    buffer (at most a few MB) that does not grow with the read length or the period.

    Parameters
    ----------
    name : str
        A key of :data:`PRBS_PATTERNS` (case-insensitive), e.g. ``"prbs23"``.
    offset : int, optional
        Start this many bits into the pattern (taken modulo the period); the jump costs
        ``O(log offset)``, no bits are generated for it.

    Examples
    --------
    >>> s = PrbsStream("prbs9")
    >>> "".join(map(str, s.read(12))), "".join(map(str, s.read(8)))
    ('111111111000', '00111101')
    """

    def __init__(self, name: str, *, offset: int = 0):
        self.spec = prbs_spec(name)
        offset = _check_count(offset, "offset")
        n, k = self.spec.degree, self.spec.tap
        self._n, self._k = n, k
        # j_max: the largest doubling level used; chunks are k * 2**j_max bits.
        self._jmax = max(0, (_CHUNK_TARGET // k).bit_length() - 1)
        self._hist = n << self._jmax
        refill = max(_REFILL_FACTOR * self._hist, _MIN_REFILL)
        self._buf = np.empty(self._hist + refill, dtype=np.uint8)
        self._start = 0  # first valid bit in the buffer
        self._end = 0  # one past the last generated bit
        self._pos = 0  # next bit to hand out
        self._position = offset % self.spec.period
        self._buf[:n] = self._register_at(self._position)
        self._end = n

    @property
    def position(self) -> int:
        """Index (modulo the period) of the next bit :meth:`read` returns."""
        return self._position

    def _register_at(self, t: int) -> np.ndarray:
        """The ``n`` non-inverted output bits starting at index ``t``."""
        n, k = self._n, self._k
        if t == 0:
            return np.ones(n, dtype=np.uint8)
        # o[t + i] = sum_l r_l o[l + i], where r(x) = x^t mod f(x): needs o[0 .. 2n - 2].
        head = PrbsStream(self.spec.name)._raw(2 * n - 1)
        f = (1 << n) | (1 << (n - k)) | 1
        r = _x_power_mod(t, f, n)
        coeffs = ((r >> np.arange(n)) & 1).astype(np.int64)
        windows = np.lib.stride_tricks.sliding_window_view(head, n).astype(np.int64)
        return ((windows @ coeffs) & 1).astype(np.uint8)

    def _fill(self, upto: int) -> None:
        """Generate bits until ``self._end >= upto`` (``upto`` within the buffer)."""
        buf, n, k = self._buf, self._n, self._k
        end, held = self._end, self._end - self._start
        while end < upto:
            # Largest level j with n * 2**j bits of history available (capped at j_max).
            j = min(self._jmax, (held // n).bit_length() - 1)
            near, far = k << j, n << j
            c = min(near, upto - end)
            np.bitwise_xor(buf[end - near:end - near + c], buf[end - far:end - far + c],
                           out=buf[end:end + c])
            end += c
            held += c
        self._end = end

    def _next_block(self, want: int) -> np.ndarray:
        """A view of up to ``want`` fresh (non-inverted) bits; advances the read position."""
        if self._pos == self._end:
            if self._end == self._buf.size:
                # Keep only the history the recurrence needs, at the front of the buffer.
                keep = min(self._hist, self._end - self._start)
                self._buf[:keep] = self._buf[self._end - keep:self._end]
                self._start, self._end, self._pos = 0, keep, keep
            self._fill(min(self._buf.size, self._end + want))
        c = min(want, self._end - self._pos)
        block = self._buf[self._pos:self._pos + c]
        self._pos += c
        return block

    def _raw(self, n_bits: int, out: np.ndarray | None = None, invert: bool = False) -> np.ndarray:
        if out is None:
            out = np.empty(n_bits, dtype=np.uint8)
        done = 0
        while done < n_bits:
            block = self._next_block(n_bits - done)
            if invert:
                np.bitwise_xor(block, 1, out=out[done:done + block.size])
            else:
                out[done:done + block.size] = block
            done += block.size
        self._position = (self._position + n_bits) % self.spec.period
        return out

    def read(self, n_bits: int) -> np.ndarray:
        """The next ``n_bits`` bits of the pattern (inverted where the pattern is inverted).

        Parameters
        ----------
        n_bits : int
            How many bits to return (0 is allowed).

        Returns
        -------
        numpy.ndarray
            ``uint8`` array of 0/1 values, a new array owned by the caller.
        """
        n_bits = _check_count(n_bits, "n_bits")
        return self._raw(n_bits, invert=self.spec.inverted)

    def __repr__(self) -> str:
        return f"PrbsStream({self.spec.name!r}, offset={self._position})"


def prbs(name: str, n_bits: int, *, offset: int = 0) -> np.ndarray:
    """``n_bits`` bits of a PRBS, starting ``offset`` bits after the all-ones register state.

    Parameters
    ----------
    name : str
        A key of :data:`PRBS_PATTERNS` (case-insensitive): ``prbs7``, ``prbs9``, ``prbs11``,
        ``prbs15``, ``prbs20``, ``prbs23``, ``prbs29``, ``prbs31``.
    n_bits : int
        Number of bits to return.
    offset : int, optional
        Index of the first bit returned (modulo the period).

    Returns
    -------
    numpy.ndarray
        ``uint8`` 0/1 array. Patterns that O.150 marks as inverted are returned inverted.

    Raises
    ------
    UnknownNameError
        For an unknown pattern name.
    ConfigError
        For a negative or non-integer ``n_bits`` or ``offset``.

    Examples
    --------
    >>> "".join(map(str, prbs("prbs9", 16)))
    '1111111110000011'
    >>> "".join(map(str, prbs("prbs15", 20)))   # O.150 5.3: inverted
    '00000000000000011111'
    """
    return PrbsStream(name, offset=offset).read(n_bits)
