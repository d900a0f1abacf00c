"""BER blocks: the unit of work of a BER campaign, the same on one core, N workers or a cluster.

A point of the ``ber`` check sends bits in blocks. What a block is does not depend on who
computes it:

* **The schedule** (:func:`block_schedule`) is fixed by the point alone: the first block is
  ``first`` bits, each next one twice as long up to ``largest``, the last one cut at the
  budget, every block a whole number of ``unit`` bits.
* **The random stream** of block ``i`` of point ``P`` of check ``C`` (its bits, its impairments'
  draws and its noise) is ``SeedSequence(seed, spawn_key=(crc32(C), crc32(P), i))``
  (:func:`block_seed`): no stream is shared between blocks, so any worker can compute any block
  and get the same bits and the same noise.
* **The answer** (:func:`run_block`) is the positions of the bit errors in the block: all the
  sequential test and the over-dispersion test need, at the exact bit.

The consumer (the ``ber`` check) takes the answers in block order from an :class:`Engine` and
stops at the exact deciding bit; the verdict is therefore identical whatever engine computed
the blocks. :class:`InProcess` is the embedded default (the check's own bench, one block at a
time, nothing computed ahead); :mod:`modemverify.execution` has the worker pool and the Dask
engine, which compute a few blocks ahead and drop (and cancel) those past the decision.

A :class:`Journal` keeps a point's state after every block so that an interrupted campaign can
resume; the default keeps nothing (:mod:`modemverify.execution.campaign` has the file).
"""

from __future__ import annotations

import base64
import math
import zlib
from dataclasses import dataclass
from typing import Iterator

import numpy as np
from scipy.linalg import solve_banded

from .bench import Bench
from .errors import AdapterError
from .schemes.labels import bits_to_labels
from .stats.weighted import WeightedTally
from .vectors.biasing import KIND_TRUE, NoiseMixture
from .vectors.bits import random_bits
from .vectors.channels import Awgn, channel_from_config

__all__ = [
    "BlockJob", "BlockResult", "block_seed", "block_schedule", "run_block", "Engine",
    "InProcess", "Unavailable", "Journal", "bench_state", "apply_bench_state", "pack_counts",
    "unpack_counts", "importance_delay",
]


def block_seed(seed: int, check: str, point: str, index: int) -> np.random.SeedSequence:
    """The seed sequence of block ``index`` of ``point`` in ``check``.

    >>> a = np.random.default_rng(block_seed(7, "ber", "ber.ebn0=6dB", 3)).integers(1 << 30)
    >>> b = np.random.default_rng(block_seed(7, "ber", "ber.ebn0=6dB", 3)).integers(1 << 30)
    >>> bool(a == b), int(a) != int(np.random.default_rng(block_seed(7, "ber", "ber.ebn0=6dB",
    ...                                                                4)).integers(1 << 30))
    (True, True)
    """
    return np.random.SeedSequence(int(seed), spawn_key=(zlib.crc32(check.encode()),
                                                        zlib.crc32(point.encode()), int(index)))


def block_schedule(first: int, largest: int, max_bits: int, unit: int
                   ) -> Iterator[tuple[int, int, int]]:
    """``(index, offset, bits)`` of every block of a point, in order.

    ``first`` and ``largest`` are multiples of ``unit``; blocks double from ``first`` to
    ``largest``; the last one is cut to the budget (to whole ``unit`` bits).

    >>> list(block_schedule(8, 32, 100, 4))
    [(0, 0, 8), (1, 8, 16), (2, 24, 32), (3, 56, 32), (4, 88, 12)]
    """
    index = offset = 0
    block = first
    while offset < max_bits:
        n = min(block, max_bits - offset)
        n -= n % unit
        if n <= 0:
            return
        yield index, offset, n
        index += 1
        offset += n
        block = min(largest, 2 * block)


@dataclass(frozen=True)
class BlockJob:
    """One block of one BER point: everything a worker needs besides the open device."""

    check: str
    point: str
    index: int
    offset: int
    bits: int
    seed: int
    ebn0_db: float
    energy: str = "nominal"
    impairments: tuple = ()
    precision: str = "float64"
    #: ``plain`` (the true noise) or ``importance`` (biased noise and weights,
    #: :mod:`modemverify.vectors.biasing`)
    method: str = "plain"

    def rng(self) -> np.random.Generator:
        return np.random.default_rng(block_seed(self.seed, self.check, self.point, self.index))


@dataclass(frozen=True)
class BlockResult:
    """The bit errors of one block (positions within it, increasing); with importance
    sampling also the weighted errors' tally."""

    index: int
    bits: int
    errors: np.ndarray
    tally: WeightedTally | None = None
    #: importance sampling, first block of a point: whether the demodulator gave the same bits
    #: when given the same samples twice (None where not tried)
    repeatable: bool | None = None


_BUFFER = "blocks.buffer"
_MIXTURE = "blocks.mixture"
_GRAM = "blocks.gram"


def pack_counts(counts: np.ndarray) -> str:
    """Error counts per sub-block as compact text (zlib over int64, base64) for a campaign file.

    >>> unpack_counts(pack_counts(np.array([0, 3, 1]))).tolist()
    [0, 3, 1]
    """
    return base64.b64encode(zlib.compress(np.asarray(counts, dtype="<i8").tobytes(), 6)
                            ).decode("ascii")


def unpack_counts(text: str) -> np.ndarray:
    return np.frombuffer(zlib.decompress(base64.b64decode(text)), dtype="<i8").astype(np.int64)


def run_block(bench: Bench, job: BlockJob) -> BlockResult:
    """Send one block through the bench's modulator, the channel and its demodulator.

    Draws, in this order, from the block's own stream: the bits, the impairments' randomness,
    the noise (for importance sampling: each symbol's mixture component, then the normals).
    Raises what the device raises (AdapterError through the guard).
    """
    rng = job.rng()
    k, sps = bench.k, bench.sps
    bits = random_bits(rng, job.bits)
    tx = bench.transmit(bits)
    if job.impairments:
        impair = channel_from_config(list(job.impairments), bits_per_symbol=k,
                                     samples_per_symbol=sps)
        tx = impair.apply(tx, rng)
    # unit-energy pulses carry unit-energy symbols: Es = 1 (see vectors.channels.Awgn)
    awgn = Awgn(job.ebn0_db, k, sps, energy=job.energy, nominal_es=1.0,
                precision=job.precision)
    # one buffer per bench, reused block after block (the device's own output is never
    # written to: a device may hand out an array it keeps)
    buf = bench.cache.get(_BUFFER)
    if buf is None or buf.size != tx.size:
        buf = bench.cache[_BUFFER] = np.empty(tx.size, dtype=np.complex128)
    if job.method == "importance":
        return _importance_block(bench, job, rng, bits, tx, awgn, buf)
    rx = bench.receive(awgn.apply(tx, rng, out=buf), job.bits // k)
    errors = np.flatnonzero(rx != bits)
    return BlockResult(job.index, job.bits, errors)


def importance_delay(bench: Bench) -> tuple[int, str]:
    """The whole-sample delay of the device's symbols against the reference's, and why
    importance sampling cannot bias this device's waveform ("" when it can).

    At one sample per symbol the delay is 0. A waveform's noise is biased along each symbol's
    pulse, at the device's own timing, so the measured alignment may only move it by whole
    samples (no fractional delay, no frequency offset).
    """
    applied = bench.alignment() if bench.sps > 1 else None
    if applied is None:
        return 0, ""
    c = applied.correction
    d = float(c.delay_samples)
    if abs(d - round(d)) > 0.05:
        return 0, (f"the device's symbols are {d:.2f} samples late, a fractional delay, and "
                   f"importance sampling biases the noise along each symbol's pulse at whole-"
                   f"sample positions")
    if abs(c.freq_offset) > 1e-9:  # under 0.01 degree of drift over a million samples
        return 0, (f"the device's waveform has a frequency offset of {c.freq_offset:.3g} "
                   f"cycles per sample, and importance sampling biases the noise along each "
                   f"symbol's pulse at a fixed phase")
    return int(round(d)), ""


def _window(x: np.ndarray, start: int, length: int) -> np.ndarray:
    """``x[start : start + length]``, with zeros where that runs outside ``x``."""
    out = np.zeros(length, dtype=np.complex128)
    lo, hi = max(start, 0), min(start + length, x.size)
    if hi > lo:
        out[lo - start:hi - start] = x[lo:hi]
    return out


def _gram_bands(pulse) -> np.ndarray:
    """The pulse's autocorrelation at whole-symbol lags after the matched filter, as the bands
    of a symmetric banded matrix (``scipy.linalg.solve_banded``'s layout): entry ``(i, j)`` is
    the matched-filter output at symbol ``i`` for a unit symbol at ``j``."""
    half = max(1, -(-pulse.tail // pulse.sps))  # symbols a pulse reaches beyond its own
    n = 2 * half + 1
    probe = np.zeros(n, dtype=np.complex128)
    probe[half] = 1.0
    r = pulse.matched_filter(pulse.shape_symbols(probe), n)  # r[half + k]: lag k
    bands = np.zeros((n, 1), dtype=np.complex128)
    bands[:, 0] = r  # row half + k holds lag k = i - j
    return bands


def _along_pulses(pulse, bands: np.ndarray, change: np.ndarray) -> np.ndarray:
    """The waveform whose matched-filter projections are ``change`` exactly: ``change`` in the
    dual basis of the symbols' pulses (their Gram matrix inverted), then shaped. For an rrc
    pulse whose truncated taps leak a little into the neighbouring symbols this keeps each
    symbol's biased noise its own: the change meant for one symbol does not reach another."""
    half = (bands.shape[0] - 1) // 2
    n = change.size
    if half == 0 or n == 1:
        coef = change / bands[0, 0].real
    else:
        ab = np.repeat(bands, n, axis=1)
        coef = solve_banded((half, half), ab, change, check_finite=False)
    return pulse.shape_symbols(coef)


def _importance_block(bench: Bench, job: BlockJob, rng, bits, tx, awgn: Awgn, buf):
    """A block with the noise drawn from the biasing mixture of the claimed constellation.

    At one sample per symbol the noise of each sample is drawn from the mixture. For a pulse
    (rrc, rectangular: a matched-filter pair, so the symbols' pulses are orthonormal) the
    white noise of the waveform is drawn first; its matched-filter projection on each symbol's
    pulse, at the device's timing (:func:`importance_delay`), is that symbol's true noise,
    which the mixture changes; the change is added along the symbol's pulse. The weights
    follow from the projections as at one sample per symbol (exactly so for orthonormal
    pulses; for truncated rrc taps the change is put in the pulses' dual basis, so that each
    symbol's projection changes by its own component only, :func:`_along_pulses`).
    """
    k = bench.k
    mixture = bench.cache.get(_MIXTURE)
    if mixture is None:
        mixture = bench.cache[_MIXTURE] = NoiseMixture(bench.convention.points,
                                                       bench.convention.rule)
    labels = bits_to_labels(bits, k)
    n0 = awgn.noise_variance(tx)
    if bench.sps == 1:
        if tx.size != labels.size:
            raise AdapterError(f"importance sampling needs one sample per symbol; the "
                               f"modulator gave {tx.size} samples for {labels.size} symbols",
                               call="modulate")
        drawn = mixture.draw(labels, n0, rng)
        np.add(tx, drawn.noise, out=buf)
    else:
        pulse = bench.reference.pulse
        delay, why = importance_delay(bench)
        if why:
            raise AdapterError(f"importance sampling cannot bias this waveform: {why}")
        white = rng.standard_normal(2 * tx.size).view(np.complex128) * math.sqrt(n0 / 2)
        length = pulse.output_length(labels.size)
        z = pulse.matched_filter(_window(white, delay, length), labels.size)
        drawn = mixture.draw(labels, n0, rng, base=z)
        bands = bench.cache.get(_GRAM)
        if bands is None:
            bands = bench.cache[_GRAM] = _gram_bands(pulse)
        change = _window(_along_pulses(pulse, bands, drawn.noise - z), -delay, tx.size)
        np.add(tx, white, out=buf)
        buf += change
    repeatable = None
    if job.index == 0:
        # the weights account for the harness's noise only: a demodulator that draws noise of
        # its own (or keeps state between calls) is not a function of the samples it is given
        again = buf.copy()
        rx = bench.receive(buf, labels.size)
        repeatable = bool(np.array_equal(bench.receive(again, labels.size), rx))
    else:
        rx = bench.receive(buf, labels.size)
    wrong = rx != bits
    per_symbol = wrong.reshape(-1, k).sum(axis=1)
    x = drawn.weights * per_symbol / k
    return BlockResult(job.index, job.bits, np.flatnonzero(wrong),
                       WeightedTally.of(x, drawn.kind == KIND_TRUE), repeatable)


class Engine:
    """Computes blocks and hands their results back in block order.

    :meth:`results` takes the jobs of one point (an iterator, consumed lazily) and yields
    their results in the same order; closing the generator (the consumer has decided) drops
    and cancels whatever was computed or started ahead. ``workers`` is how many blocks run at
    once.
    """

    workers: int = 1

    def results(self, jobs: Iterator[BlockJob]) -> Iterator[BlockResult]:
        raise NotImplementedError

    def warm(self) -> None:
        """Start the workers and open their devices ahead of the first block (no wait)."""

    def close(self) -> None:
        """Stop the engine's workers (idempotent)."""


@dataclass
class InProcess(Engine):
    """The embedded default: the check's own bench computes one block when it is asked for."""

    bench: Bench

    def results(self, jobs):
        for job in jobs:
            yield run_block(self.bench, job)


@dataclass
class Unavailable(Engine):
    """The engine asked for could not start: every block raises AdapterError with why."""

    reason: str

    def results(self, jobs):
        raise AdapterError(self.reason)
        yield  # a generator, like every engine's results


class Journal:
    """Where a campaign keeps each point's state; this one keeps nothing.

    ``load(device, point)`` returns what was saved (``{"state": ...}`` for a point in progress,
    ``{"verdict": ...}`` for a decided one) or None; ``save`` and ``decided`` record them.
    """

    def load(self, device: str, point: str) -> dict | None:
        return None

    def save(self, device: str, point: str, state: dict) -> None:
        """The state of a point after a block (the file journal writes it atomically)."""

    def decided(self, device: str, point: str, verdict) -> None:
        """A point's verdict: a resumed run takes it as it is."""


def bench_state(bench: Bench) -> dict:
    """What a worker's bench must share with the run's: the measured alignment and scale.

    Measured once on the run's own bench (so the worker does not measure them again, and
    could not measure them differently), then handed to every worker.
    """
    state = {}
    if bench.device.has("modulate"):
        state["alignment"] = bench.alignment()
        state["scale"] = bench.scale()
    return state


def apply_bench_state(bench: Bench, state: dict) -> Bench:
    bench.cache.update(state)
    return bench
