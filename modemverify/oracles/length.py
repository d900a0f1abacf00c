"""``length``: output length follows from input length, for every length tried.

``modulate`` must return ``n * samples_per_symbol`` samples for ``n`` labels and ``demodulate``
``n * bits_per_symbol`` bits for ``n`` symbols' worth of samples. Dropped or extra samples (a
filter tail, an off-by-one in a block loop) are caught; the smallest failing length is reported.
"""

from __future__ import annotations

import numpy as np

from ..errors import AdapterError
from ..options import Opt
from ..vectors.prbs import prbs
from ..verdict import Verdict
from .base import Oracle

__all__ = ["DEFAULT_LENGTHS", "LengthOracle", "ORACLE"]

#: symbol counts tried: small ones, powers of two and their neighbours, odd block sizes
DEFAULT_LENGTHS = [1, 2, 3, 4, 5, 7, 8, 9, 15, 16, 17, 31, 32, 33, 63, 64, 65, 100, 127, 128,
                   129, 255, 256, 257, 1000, 1023, 1024, 1025, 4096]


class LengthOracle(Oracle):
    name = "length"
    order = 20
    summary = "output length follows from input length"
    options = {
        "symbols": Opt("list", DEFAULT_LENGTHS, "symbol counts to try (1 to 2^20 each, at "
                       "most 256 of them)",
                       check=lambda v: None if v and len(v) <= 256 and all(
                           isinstance(x, int) and not isinstance(x, bool) and 0 < x <= 1 << 20
                           for x in v)
                       else "expected a list of at most 256 whole numbers from 1 to 2^20"),
    }

    def verdict_names(self, spec):
        return [f"{self.name}.modulate", f"{self.name}.demodulate"]

    def run(self, bench, opts, rng, seed):
        lengths = sorted(set(opts["symbols"]))
        k, sps = bench.k, bench.sps
        declared = bench.spec.scheme.tail_samples
        source = prbs("prbs15", max(lengths) * k)
        for side in ("modulate", "demodulate"):
            if not bench.device.has(side):
                yield Verdict(f"{self.name}.{side}", "skipped", f"the device has no {side}",
                              seed=seed)
                continue
            got_by_n = {}
            try:
                for n in lengths:
                    bits = source[:n * k]
                    if side == "modulate":
                        got_by_n[n] = bench.device.modulate(bits, check_length=False).size
                    else:
                        samples = bench.reference.modulate(bits)
                        got_by_n[n] = bench.device.demodulate(samples, check_length=False).size
            except AdapterError as exc:  # one side broken: the other is still judged
                yield Verdict(f"{self.name}.{side}", "error", f"the device failed: {exc}",
                              seed=seed, details={"call": exc.call, "input": exc.input_summary,
                                                  "stderr": exc.stderr})
                continue
            unit = "samples" if side == "modulate" else "bits"
            if side == "modulate":
                tails = {n: got - n * sps for n, got in got_by_n.items()}
                if declared is not None:
                    tail = declared
                else:  # any constant tail: the most common one is the device's
                    values, counts = np.unique(list(tails.values()), return_counts=True)
                    tail = int(values[np.argmax(counts)])
                want = {n: n * sps + tail for n in lengths}
                rule = (f"{sps} sample{'s' if sps > 1 else ''} per symbol"
                        + (f" + a tail of {tail}" if tail else "")
                        + ("" if declared is not None else " (tail not declared: any constant)"))
            else:
                want = {n: n * k for n in lengths}
                rule = f"{k} bits per symbol"
            problems = [(n, got_by_n[n], want[n]) for n in lengths if got_by_n[n] != want[n]]
            name = f"{self.name}.{side}"
            if not problems:
                yield Verdict(name, "pass",
                              f"{side} output length correct ({rule}) for {len(lengths)} input "
                              f"lengths from {lengths[0]} to {lengths[-1]} symbols",
                              statistic=0.0, limit=0.0, seed=seed)
                continue
            n, got, want_n = problems[0]
            deltas = sorted({g - w for _, g, w in problems})
            pattern = (f"always {deltas[0]:+d} {unit}" if len(deltas) == 1
                       else f"off by {', '.join(f'{d:+d}' for d in deltas[:5])} {unit}")
            yield Verdict(
                name, "fail",
                f"{side} returned the wrong number of {unit} for {len(problems)} of "
                f"{len(lengths)} lengths ({pattern}; expected {rule}); first at {n} symbols: "
                f"{got} instead of {want_n}", statistic=float(len(problems)), limit=0.0,
                unit="lengths wrong",
                counterexample=f"{n} symbols ({n * k} bits) -> {got} {unit}, expected {want_n}",
                seed=seed, details={"wrong": [list(p) for p in problems]})


ORACLE = LengthOracle()
