"""``roundtrip``: noiseless ``demodulate(modulate(bits)) == bits`` for many lengths.

Fixed vectors first (a de Bruijn sequence of labels, PRBS blocks of several lengths), then
hypothesis searches bit sequences of varied length for a failure and shrinks it to the smallest
one, which is what the verdict shows. A device that offers one side only is paired with the
reference modem on the other side.
"""

from __future__ import annotations

import random

import numpy as np
from hypothesis import HealthCheck, Phase, find, settings
from hypothesis.errors import NoSuchExample

from ..bench import Bench
from ..errors import AdapterError
from ..options import Opt
from ..schemes.labels import labels_to_bits
from ..vectors.coverage import de_bruijn_labels
from ..vectors.prbs import PRBS_PATTERNS, prbs
from ..vectors.strategies import bit_sequences
from ..verdict import Verdict
from .base import Oracle

__all__ = ["RoundtripOracle", "ORACLE"]


def _bits_text(bits: np.ndarray, k: int) -> str:
    s = "".join(map(str, bits.tolist()))
    groups = " ".join(s[i:i + k] for i in range(0, len(s), k))
    return f"[{groups}]"


class RoundtripOracle(Oracle):
    name = "roundtrip"
    order = 70
    fresh_vectors = True
    summary = "noiseless demodulate(modulate(bits)) returns the bits"
    options = {
        "max_examples": Opt("int", 200, "hypothesis examples searched", minimum=1),
        "max_symbols": Opt("int", 64, "longest hypothesis sequence, in symbols", minimum=1),
        "prbs": Opt("choice", "prbs15", "PRBS pattern for the fixed vectors (ITU-T O.150)",
                    choices=tuple(PRBS_PATTERNS)),
    }

    def run(self, bench: Bench, opts, rng, seed):
        k = bench.k

        def outcome(bits: np.ndarray) -> tuple[str, str] | None:
            """None when the round trip holds, else ("fail" or "error", what went wrong)."""
            try:
                got = bench.receive(bench.transmit(bits), bits.size // k)
            except AdapterError as exc:
                return "error", str(exc)
            if got.size != bits.size:
                return "fail", f"returned {got.size} bits for {bits.size}"
            if not np.array_equal(got, bits):
                first = int(np.argmax(got != bits))
                sym = first // k
                got_sym = _bits_text(got[sym * k:sym * k + k], k)
                return "fail", (f"returned {got_sym} for symbol {sym} "
                        f"{_bits_text(bits[sym * k:sym * k + k], k)} "
                        f"({int(np.count_nonzero(got != bits))} bit errors)")
            return None

        fixed = [("de Bruijn labels", labels_to_bits(de_bruijn_labels(k, order=2), k))]
        stream = prbs(opts["prbs"], 8191 * k)
        for n in (1, 2, 3, 7, 64, 255, 1000, 8191):
            fixed.append((f"{opts['prbs']} x {n} symbols", stream[:n * k]))
        first_failure = None
        for label, bits in fixed:
            problem = outcome(bits)
            if problem:
                first_failure = (label, bits, problem)
                break

        # hypothesis: find the smallest failing sequence (always searched, so a failure that
        # only short or odd-length inputs trigger is found too)
        hyp_settings = settings(max_examples=opts["max_examples"], database=None,
                                deadline=None, derandomize=False,
                                suppress_health_check=list(HealthCheck),
                                phases=[Phase.generate, Phase.shrink])
        minimal = None
        try:
            minimal = find(bit_sequences(k, min_symbols=1, max_symbols=opts["max_symbols"]),
                           lambda b: outcome(b) is not None, settings=hyp_settings,
                           random=random.Random(seed))
        except NoSuchExample:
            pass
        if minimal is None and first_failure is not None and first_failure[1].size <= 64 * k:
            minimal = first_failure[1]

        n_tried = sum(b.size for _, b in fixed)
        if first_failure is None and minimal is None:
            return [Verdict(self.name, "pass",
                            f"{bench.sides()}: {n_tried} fixed bits and "
                            f"{opts['max_examples']} generated sequences round-trip",
                            statistic=0.0, limit=0.0, seed=seed,
                            details={"sides": bench.sides()})]
        if minimal is not None:
            minimal = np.asarray(minimal, dtype=np.uint8)
            kind, problem = outcome(minimal) or ("fail", "failed once, passed when rerun")
            ce = f"bits={_bits_text(minimal, k)}: {problem}"
            where = "generated" if first_failure is None else first_failure[0]
        else:
            label, bits, (kind, problem) = first_failure
            ce = f"{label} ({bits.size} bits): {problem}"
            where = label
        return [Verdict(self.name, kind,
                        f"{bench.sides()} does not return the bits sent (first seen on {where})",
                        counterexample=ce, seed=seed, details={"sides": bench.sides()})]


ORACLE = RoundtripOracle()
