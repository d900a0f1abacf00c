"""``roundtrip``: noiseless ``demodulate(modulate(bits)) == bits`` for many lengths.

Fixed vectors first (a de Bruijn sequence of labels, PRBS blocks of several lengths), then
hypothesis searches bit sequences of varied length for a failure and shrinks it to the smallest
one, which is what the verdict shows. A device that offers one side only is paired with the
reference modem on the other side.

Counterexamples an earlier run kept with its report (``Bench.kept``, see
:mod:`modemverify.vectors.kept`) are tried before anything else; when one still fails it is
the verdict's counterexample and no new search is made, and the reason says how they fared.

Wrong bits are a ``fail``. A device that misbehaves on a call (it crashes, times out, breaks
the protocol, returns the wrong length: an AdapterError) ends the check at once as an
``error`` quoting that error and the input: on a fixed vector the search does not start, and
during the search the error stops it (it is not shrunk: shrinking would call a crashing or
hanging device hundreds of times, and a failure that does not recur would turn into a
"fail").
"""

from __future__ import annotations

import numpy as np

from ..bench import Bench
from ..errors import AdapterError
from ..options import Opt
from ..schemes.labels import labels_to_bits
from ..vectors.coverage import de_bruijn_labels
from ..vectors.prbs import PRBS_PATTERNS, prbs
from ..vectors.strategies import bit_sequences
from ..verdict import Verdict
from ..vectors.kept import bits_of
from ._search import DeviceFailed, kept_text, replay_kept, smallest_failure
from ._search import bits_text as _bits_text
from .base import Oracle

__all__ = ["RoundtripOracle", "ORACLE"]


class RoundtripOracle(Oracle):
    name = "roundtrip"
    order = 70
    fresh_vectors = True
    summary = "noiseless demodulate(modulate(bits)) returns the bits"
    options = {
        "max_examples": Opt("int", 200, "hypothesis examples searched (1 to 10000)", minimum=1,
                            maximum=10_000),
        "max_symbols": Opt("int", 64, "longest hypothesis sequence, in symbols (1 to 4096)",
                           minimum=1, maximum=4096),
        "prbs": Opt("choice", "prbs15", "PRBS pattern for the fixed vectors (ITU-T O.150)",
                    choices=tuple(PRBS_PATTERNS)),
    }

    def run(self, bench: Bench, opts, rng, seed):
        k = bench.k

        def outcome(bits: np.ndarray) -> str | None:
            """None when the round trip holds, else what the wrong bits were (an AdapterError
            from the device propagates)."""
            got = bench.receive(bench.transmit(bits), bits.size // k)
            if got.size != bits.size:
                return f"returned {got.size} bits for {bits.size}"
            if not np.array_equal(got, bits):
                first = int(np.argmax(got != bits))
                sym = first // k
                got_sym = _bits_text(got[sym * k:sym * k + k], k)
                return (f"returned {got_sym} for symbol {sym} "
                        f"{_bits_text(bits[sym * k:sym * k + k], k)} "
                        f"({int(np.count_nonzero(got != bits))} bit errors)")
            return None

        def device_failed(where: str, ce: str, exc: AdapterError) -> list[Verdict]:
            return [Verdict(self.name, "error",
                            f"{bench.sides()}: the device failed on {where}: {exc}",
                            counterexample=f"{ce}: {exc}", seed=seed,
                            details={"sides": bench.sides(), "call": exc.call,
                                     "input": exc.input_summary, "stderr": exc.stderr})]

        # the counterexamples an earlier run kept (vectors.kept) are tried first
        try:
            kept, still = replay_kept(bench.kept.get(self.name, ()),
                                      lambda rec: bits_of(rec["bits"]), outcome)
        except DeviceFailed as stop:
            return device_failed("a kept counterexample",
                                 f"bits={_bits_text(stop.example, k)}", stop.error)
        extra = {"kept": {"tried": len(kept), "failing": still}} if kept else {}
        note = kept_text(len(kept), still)

        fixed = [("de Bruijn labels", labels_to_bits(de_bruijn_labels(k, order=2), k))]
        stream = prbs(opts["prbs"], 8191 * k)
        for n in (1, 2, 3, 7, 64, 255, 1000, 8191):
            fixed.append((f"{opts['prbs']} x {n} symbols", stream[:n * k]))
        first_failure = None
        if still:  # a kept counterexample fails again: no new search needed
            fixed = [("a kept counterexample", min((kept[i] for i in still), key=len))]
        for label, bits in fixed:
            try:
                problem = outcome(bits)
            except AdapterError as exc:
                return device_failed(label, f"{label} ({bits.size} bits)", exc)
            if problem:
                first_failure = (label, bits, problem)
                break

        # hypothesis: find the smallest failing sequence (always searched, so a failure that
        # only short or odd-length inputs trigger is found too)
        try:
            minimal = None if still else smallest_failure(
                bit_sequences(k, min_symbols=1, max_symbols=opts["max_symbols"]), outcome,
                max_examples=opts["max_examples"], seed=seed)
        except DeviceFailed as stop:
            bits = np.asarray(stop.example, dtype=np.uint8)
            return device_failed("a generated sequence", f"bits={_bits_text(bits, k)}",
                                 stop.error)
        if minimal is None and first_failure is not None and first_failure[1].size <= 64 * k:
            minimal = first_failure[1]

        n_tried = sum(b.size for _, b in fixed)
        if first_failure is None and minimal is None:
            return [Verdict(self.name, "pass",
                            f"{bench.sides()}: {n_tried} fixed bits and "
                            f"{opts['max_examples']} generated sequences round-trip{note}",
                            statistic=0.0, limit=0.0, seed=seed,
                            details={"sides": bench.sides(), **extra})]
        if minimal is not None:
            minimal = np.asarray(minimal, dtype=np.uint8)
            ce = f"bits={_bits_text(minimal, k)}"
            try:
                problem = outcome(minimal) or "failed once, passed when rerun"
            except AdapterError as exc:  # the rerun of the smallest failure crashed instead
                return device_failed("the smallest failing sequence, rerun", ce, exc)
            ce = f"{ce}: {problem}"
            where = "generated" if first_failure is None else first_failure[0]
            found = minimal
        else:
            label, bits, problem = first_failure
            ce = f"{label} ({bits.size} bits): {problem}"
            where, found = label, None  # too long to keep
        if found is not None:
            extra["counterexample"] = {"verdict": self.name,
                                       "bits": "".join(map(str, found.tolist()))}
        return [Verdict(self.name, "fail",
                        f"{bench.sides()} does not return the bits sent (first seen on "
                        f"{where}){note}",
                        counterexample=ce, seed=seed,
                        details={"sides": bench.sides(), **extra})]


ORACLE = RoundtripOracle()
