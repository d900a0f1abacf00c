"""``finite``: the modulator never emits NaN or Inf; a failure names the label that did."""

from __future__ import annotations

import numpy as np

from ..schemes.labels import label_string
from ..vectors.coverage import exhaustive_bits
from ..verdict import Verdict
from .base import Oracle

__all__ = ["FiniteOracle", "ORACLE"]


class FiniteOracle(Oracle):
    name = "finite"
    order = 10
    requires = ("modulate",)
    summary = "no NaN or Inf in the modulator's output for any label"

    def run(self, bench, opts, rng, seed):
        k = bench.k
        m = 1 << k
        bits = exhaustive_bits(k)
        out = bench.device.modulate(bits, check_finite=False)
        if np.all(np.isfinite(out)):
            return [Verdict(self.name, "pass", f"all {m} labels give finite samples",
                            statistic=0.0, limit=0.0, seed=seed)]
        if not bench.spec.scheme.shaped and out.size == m:
            bad = np.nonzero(~np.isfinite(out))[0]
            shown = {int(l): out[l] for l in bad}
        else:  # a waveform mixes neighbouring symbols: ask each label on its own
            shown = {}
            for label in range(m):
                one = bench.device.modulate(np.tile(bits[label * k:(label + 1) * k], 8),
                                            check_finite=False, check_length=False)
                if not np.all(np.isfinite(one)):
                    shown[label] = one[np.argmin(np.isfinite(one))]
            bad = np.array(sorted(shown), dtype=int)
        if len(bad) == 0:
            return [Verdict(self.name, "fail",
                            "the modulator returned non-finite samples for the sequence of all "
                            "labels, but for no label on its own: the fault depends on the "
                            "sequence", counterexample=f"bits={bits.tolist()}", seed=seed)]
        listed = ", ".join(f"{label_string(l, k)} -> {shown[l]}" for l in bad[:6])
        return [Verdict(self.name, "fail",
                        f"{len(bad)} label{'s give' if len(bad) > 1 else ' gives'} non-finite "
                        f"samples: {listed}", statistic=float(len(bad)), limit=0.0,
                        unit="labels",
                        counterexample=f"bits={list(map(int, label_string(bad[0], k)))}",
                        seed=seed, details={"labels": [label_string(l, k) for l in bad]})]


ORACLE = FiniteOracle()
