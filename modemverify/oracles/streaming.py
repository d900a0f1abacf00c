"""``streaming``: a device with state answers a stream in chunks as it answers it whole.

With ``scheme.streaming: true`` the device keeps state between calls (filter memory, a
differential reference, the pi/2-BPSK position counter, a scrambler). The contract it is
judged by:

- ``streaming.reset`` (judged first): after ``reset()`` the same input gives the same output
  as after the first ``reset()``, although calls between the two (of one and of two symbols)
  moved the state. When it fails, the two below are skipped naming it (they need a known start).
- ``streaming.modulate``: from ``reset()``, the samples of ``modulate(b1)``, ``modulate(b2)``,
  ... laid end to end equal those of one ``modulate(b1 + b2 + ...)`` from ``reset()``, and
  ``flush()`` (when the device has it) then gives the same tail after both. Splits are chosen
  by hypothesis (2 to ``max_chunks`` chunks of 1 to ``max_chunk_symbols`` symbols each, whole
  symbols) and a failure is shrunk to the smallest failing split, whose reason names the first
  sample that differs and the chunk boundary before it.
- ``streaming.demodulate``: the reference waveform of the bits, cut at the same symbol
  boundaries (the last chunk keeps the pulse tail), demodulated chunk by chunk from ``reset()``
  gives, end to end, the bits of one call on the whole.

Samples are equal when they differ by at most 1e-6 of the whole waveform's RMS (rounding in a
filter that runs in pieces). A streaming device without ``reset()`` cannot be brought back to
a known state, so these three are skipped, saying so.

Without ``scheme.streaming`` the device declares no state, and ``streaming.repeat`` judges
that: the same bits modulated twice give the same samples, and the same waveform demodulated
twice the same bits (a device that draws dither or keeps state it does not declare fails).

Splits an earlier run kept with its report (``Bench.kept``, :mod:`modemverify.vectors.kept`)
are tried before the search; one that still fails is the counterexample.

A device that misbehaves on a call ends its verdict as an ``error`` naming the call (the
search is not continued: see :mod:`modemverify.oracles._search`).
"""

from __future__ import annotations

import numpy as np
from hypothesis import strategies as st

from ..bench import Bench
from ..errors import AdapterError
from ..options import Opt
from ..spec import DeviceSpec
from ..vectors.bits import random_bits
from ..vectors.strategies import bit_sequences
from ..verdict import Verdict
from ..vectors.kept import bits_of
from ._search import DeviceFailed, bits_text, kept_text, replay_kept, smallest_failure
from .base import Oracle

__all__ = ["StreamingOracle", "ORACLE", "RELATIVE_TOLERANCE", "first_difference", "splits"]

#: samples within this fraction of the whole waveform's RMS are equal
RELATIVE_TOLERANCE = 1e-6
#: symbols of the fixed vectors (reset, repeat);
_FIXED_SYMBOLS = 33  # odd, so a position counter kept between calls changes parity


def first_difference(a: np.ndarray, b: np.ndarray, scale: float = 1.0) -> int | None:
    """The first index where ``a`` and ``b`` differ (by more than ``RELATIVE_TOLERANCE`` of
    ``scale``), the shorter one's length when one is a prefix of the other, else None.

    >>> first_difference(np.array([1, 2, 3]), np.array([1, 2, 4])), first_difference(
    ...     np.array([1, 2]), np.array([1, 2, 3])), first_difference(np.ones(2), np.ones(2))
    (2, 2, None)
    """
    n = min(a.size, b.size)
    tol = RELATIVE_TOLERANCE * (scale if scale > 0 else 1.0)
    bad = np.flatnonzero(np.abs(np.asarray(a[:n], dtype=np.complex128)
                                - np.asarray(b[:n], dtype=np.complex128)) > tol)
    if bad.size:
        return int(bad[0])
    return None if a.size == b.size else n


def _rms(x: np.ndarray) -> float:
    return float(np.sqrt(np.mean(np.abs(x) ** 2))) if x.size else 1.0


def _split_text(sizes) -> str:
    return " + ".join(str(int(s)) for s in sizes)


def _boundary(at: int, starts: np.ndarray, symbols: np.ndarray, unit: str) -> str:
    """Where item ``at`` lies relative to the chunk boundaries (``starts``: the first item of
    chunks 2, 3, ...; ``symbols``: the symbol each of those chunks starts at)."""
    j = int(np.searchsorted(starts, at, side="right"))
    if j == 0:
        return (f"before the first boundary, at {unit} {int(starts[0])}: the first chunk's "
                f"output depends on what follows it")
    after = at - int(starts[j - 1])
    where = f"at {unit} {int(starts[j - 1])}"
    lead = "" if after == 0 else f"{after} {unit}{'s' if after > 1 else ''} after "
    return f"{lead}the boundary after symbol {int(symbols[j - 1])}, {where}"


def splits(k: int, max_chunks: int, max_chunk_symbols: int):
    """(chunk sizes in symbols, bits of their sum): 2 to ``max_chunks`` chunks of 1 to
    ``max_chunk_symbols`` symbols; shrinks towards two chunks of one symbol of label 0."""
    sizes = st.lists(st.integers(1, max_chunk_symbols), min_size=2, max_size=max_chunks)
    return sizes.flatmap(lambda s: st.tuples(st.just(tuple(s)),
                                             bit_sequences(k, sum(s), sum(s))))


class StreamingOracle(Oracle):
    name = "streaming"
    order = 75
    fresh_vectors = True
    summary = ("a device with state: chunks equal the whole, reset() restores the initial "
               "state; a device without: the same input gives the same output")
    options = {
        "max_examples": Opt("int", 100, "hypothesis splits searched per call (1 to 10000)",
                            minimum=1, maximum=10_000),
        "max_chunks": Opt("int", 6, "most chunks in a split (2 to 64)", minimum=2, maximum=64),
        "max_chunk_symbols": Opt("int", 16, "longest chunk, in symbols (1 to 4096)",
                                 minimum=1, maximum=4096),
    }

    def verdict_names(self, spec: DeviceSpec) -> list[str]:
        if spec.scheme.streaming:
            return [f"{self.name}.{part}" for part in ("reset", "modulate", "demodulate")]
        return [f"{self.name}.repeat"]

    def run(self, bench: Bench, opts, rng, seed):
        if not bench.spec.scheme.streaming:
            yield self._repeat(bench, rng, seed)
            return
        dev = bench.device
        if not dev.has("reset"):
            why = ("the device file says scheme.streaming: true but the device has no reset(), "
                   "so it cannot be brought back to a known state to compare chunks with the "
                   "whole")
            for name in self.verdict_names(bench.spec):
                yield Verdict(name, "skipped", why, seed=seed)
            return
        reset = self._reset(bench, rng, seed)
        yield reset
        for call in ("modulate", "demodulate"):
            name = f"{self.name}.{call}"
            if not dev.has(call):
                yield Verdict(name, "skipped", f"the device has no {call}", seed=seed)
            elif reset.outcome == "fail":
                yield Verdict(name, "skipped",
                              f"not judged because {reset.name} failed: chunks and the whole "
                              f"cannot be started from the same state", seed=seed)
            else:
                yield self._chunks(bench, call, opts, seed)

    # -- chunks against the whole ---------------------------------------------------------
    def _chunks(self, bench: Bench, call: str, opts, seed) -> Verdict:
        dev, k, sps = bench.device, bench.k, bench.sps
        name = f"{self.name}.{call}"
        flush = call == "modulate" and dev.has("flush")

        def pieces(sizes, bits):
            ends = np.cumsum(sizes)
            return [bits[a * k:b * k] for a, b in zip(np.r_[0, ends[:-1]], ends)]

        def modulate_problem(example) -> str | None:
            sizes, bits = example
            dev.reset()
            whole = dev.modulate(bits, burst=False, check_length=False)
            whole_tail = dev.flush() if flush else None
            dev.reset()
            parts = [dev.modulate(p, burst=False, check_length=False)
                     for p in pieces(sizes, bits)]
            tail = dev.flush() if flush else None
            got = np.concatenate(parts)
            split = f"chunks of {_split_text(sizes)} symbols"
            scale = _rms(whole)
            at = first_difference(got, whole, scale)
            if at is not None:
                if got.size != whole.size and at == min(got.size, whole.size):
                    return (f"{split} give {_split_text(p.size for p in parts)} samples, "
                            f"{got.size} in all; the whole gives {whole.size} (each call must "
                            f"continue the stream, not end it)")
                starts = np.cumsum([p.size for p in parts])[:-1]
                return (f"{split} differ from the whole from sample {at} "
                        f"({_boundary(at, starts, np.cumsum(sizes)[:-1], 'sample')})")
            if flush:
                at = first_difference(tail, whole_tail, scale)
                if at is not None:
                    return (f"after {split} flush() gives another tail than after the whole, "
                            f"from its sample {at} (the state after the last chunk is not the "
                            f"state after the whole)")
            return None

        def demodulate_problem(example) -> str | None:
            sizes, bits = example
            wave = bench.reference.modulate(bits)
            bounds = np.cumsum(sizes)[:-1] * sps
            dev.reset()
            whole = dev.demodulate(wave.copy(), burst=False, check_length=False)
            dev.reset()
            parts = [dev.demodulate(p, burst=False, check_length=False)
                     for p in np.split(wave, bounds)]
            got = np.concatenate(parts)
            split = f"chunks of {_split_text(sizes)} symbols"
            at = first_difference(got, whole)
            if at is None:
                return None
            if got.size != whole.size and at == min(got.size, whole.size):
                return (f"{split} give {_split_text(p.size for p in parts)} bits, {got.size} "
                        f"in all; the whole gives {whole.size}")
            cuts = np.cumsum(sizes)[:-1]
            return (f"{split} demodulate to other bits than the whole from bit {at}, symbol "
                    f"{at // k} ({_boundary(at // k, cuts, cuts, 'symbol')})")

        problem = modulate_problem if call == "modulate" else demodulate_problem
        strategy = splits(k, opts["max_chunks"], opts["max_chunk_symbols"])
        minimal, extra, note = None, {}, ""
        try:
            # the splits an earlier run kept (vectors.kept) first; one that still fails is
            # the counterexample, with no new search
            kept, still = replay_kept(
                bench.kept.get(name, ()),
                lambda rec: (tuple(rec["chunks"]), bits_of(rec["bits"])), problem)
            if kept:
                extra["kept"] = {"tried": len(kept), "failing": still}
                note = kept_text(len(kept), still)
            minimal = (min((kept[i] for i in still), key=lambda ex: (ex[1].size, len(ex[0])))
                       if still else
                       smallest_failure(strategy, problem, max_examples=opts["max_examples"],
                                        seed=seed))
            if minimal is None:
                return Verdict(name, "pass",
                               f"{opts['max_examples']} hypothesis splits of up to "
                               f"{opts['max_chunks']} chunks of 1 to "
                               f"{opts['max_chunk_symbols']} symbols: {call} in chunks equals "
                               f"{call} of the whole" + (", flushed tail included" if flush
                                                         else "") + note,
                               statistic=0.0, limit=0.0, seed=seed, details=extra)
            reason = problem(minimal) or "failed once, passed when rerun"
        except DeviceFailed as stop:
            return self._device_error(name, stop.error, seed, stop.example, k)
        except AdapterError as exc:
            return self._device_error(name, exc, seed, minimal, k)
        sizes, bits = minimal
        ce = f"chunks={list(map(int, sizes))} bits={bits_text(bits, k)}"
        extra["counterexample"] = {"verdict": name, "bits": "".join(map(str, bits.tolist())),
                                   "chunks": [int(c) for c in sizes]}
        return Verdict(name, "fail",
                       f"{call} in chunks is not {call} of the whole: {reason}{note}",
                       counterexample=ce, seed=seed, details=extra)

    def _device_error(self, name, exc: AdapterError, seed, example, k) -> Verdict:
        ce = None
        if example is not None:
            sizes, bits = example
            ce = f"chunks={list(map(int, sizes))} bits={bits_text(np.asarray(bits), k)}: {exc}"
        return Verdict(name, "error", f"the device failed on a call in chunks: {exc}",
                       counterexample=ce, seed=seed,
                       details={"call": exc.call, "input": exc.input_summary,
                                "stderr": exc.stderr})

    # -- reset ------------------------------------------------------------------------------
    def _reset(self, bench: Bench, rng, seed) -> Verdict:
        dev, k = bench.device, bench.k
        name = f"{self.name}.reset"
        bits = random_bits(rng, _FIXED_SYMBOLS * k)
        # calls between the two resets that move a counter (odd and even lengths), a phase
        # (two different net turns, one of which is not a whole turn) and a filter's memory
        last = np.zeros(k, dtype=np.uint8)
        last[-1] = 1
        nudges = (np.ones(k, dtype=np.uint8), np.concatenate([np.ones(k, np.uint8), last]))
        wave = bench.reference.modulate(bits)
        problems = []
        try:
            for nudge in nudges:
                between = f"a call of {nudge.size // k} symbol{'s' if nudge.size > k else ''}"
                if dev.has("modulate"):
                    first = dev.modulate(bits, check_length=False)  # a burst: reset() first
                    dev.modulate(nudge, burst=False, check_length=False)
                    again = dev.modulate(bits, check_length=False)
                    at = first_difference(again, first, _rms(first))
                    if at is not None:
                        problems.append(f"after {between}, modulate gives another waveform "
                                        f"from sample {at}")
                if dev.has("demodulate"):
                    first = dev.demodulate(wave.copy(), check_length=False)
                    dev.demodulate(bench.reference.modulate(nudge), burst=False,
                                   check_length=False)
                    again = dev.demodulate(wave.copy(), check_length=False)
                    at = first_difference(again, first)
                    if at is not None:
                        problems.append(f"after {between}, demodulate gives other bits from "
                                        f"bit {at}")
                if problems:
                    break
        except AdapterError as exc:
            return Verdict(name, "error", f"the device failed around reset(): {exc}",
                           seed=seed, details={"call": exc.call, "input": exc.input_summary,
                                               "stderr": exc.stderr})
        if problems:
            return Verdict(name, "fail",
                           f"reset() does not restore the initial state: the same "
                           f"{_FIXED_SYMBOLS} symbols after reset() twice, with a call between: "
                           f"{'; '.join(problems)}",
                           counterexample=f"bits={bits_text(bits, k)}, between the two: "
                                          f"bits={bits_text(nudge, k)}", seed=seed)
        return Verdict(name, "pass",
                       f"after reset() the same {_FIXED_SYMBOLS} symbols give the same output, "
                       f"whatever was sent before", statistic=0.0, limit=0.0, seed=seed)

    # -- a device without state ------------------------------------------------------------
    def _repeat(self, bench: Bench, rng, seed) -> Verdict:
        dev, k = bench.device, bench.k
        name = f"{self.name}.repeat"
        bits = random_bits(rng, _FIXED_SYMBOLS * k)
        problems = []
        try:
            if dev.has("modulate"):
                first = dev.modulate(bits, check_length=False)
                again = dev.modulate(bits, check_length=False)
                at = first_difference(again, first, _rms(first))
                if at is not None:
                    problems.append(f"modulate gave another waveform the second time, from "
                                    f"sample {at}")
            if dev.has("demodulate"):
                wave = bench.reference.modulate(bits)
                first = dev.demodulate(wave.copy(), check_length=False)
                again = dev.demodulate(wave, check_length=False)
                at = first_difference(again, first)
                if at is not None:
                    problems.append(f"demodulate gave other bits the second time, from bit "
                                    f"{at}")
        except AdapterError as exc:
            return Verdict(name, "error", f"the device failed on a repeated call: {exc}",
                           seed=seed, details={"call": exc.call, "input": exc.input_summary,
                                               "stderr": exc.stderr})
        if problems:
            return Verdict(name, "fail",
                           f"the same {_FIXED_SYMBOLS} symbols twice: {'; '.join(problems)}. A "
                           f"device without state must answer the same input the same way; "
                           f"one that keeps state declares scheme.streaming: true",
                           counterexample=f"bits={bits_text(bits, k)}", seed=seed)
        return Verdict(name, "pass",
                       f"the same {_FIXED_SYMBOLS} symbols twice give the same output",
                       statistic=0.0, limit=0.0, seed=seed)


ORACLE = StreamingOracle()
