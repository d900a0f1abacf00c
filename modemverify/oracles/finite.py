"""``finite``: the modulator never emits NaN or Inf; a failure names the label that did."""

from __future__ import annotations

import numpy as np

from ..dsp.sampling import integrate_dump
from ..schemes.labels import label_string
from ..vectors.coverage import exhaustive_bits
from ..verdict import Verdict
from .base import Oracle


class FiniteOracle(Oracle):
    name = "finite"
    summary = "no NaN or Inf in the modulator's output for any label"

    def applies(self, bench):
        return None if bench.device.has("modulate") else "the device has no modulate"

    def run(self, bench, opts, rng, seed):
        k = bench.k
        bits = exhaustive_bits(k)
        out = bench.device.modulate(bits, check_finite=False)
        finite = np.isfinite(out).reshape(-1, bench.sps).all(axis=1)
        bad = np.nonzero(~finite)[0]
        if len(bad) == 0:
            return [Verdict(self.name, "pass", f"all {1 << k} labels give finite samples",
                            statistic=0.0, limit=0.0, seed=seed)]
        sym = integrate_dump(out, bench.sps)
        listed = ", ".join(f"{label_string(l, k)} -> {sym[l]}" for l in bad[:6])
        return [Verdict(self.name, "fail",
                        f"{len(bad)} label{'s' if len(bad) > 1 else ''} give non-finite "
                        f"samples: {listed}", statistic=float(len(bad)), limit=0.0,
                        unit="labels", counterexample=f"bits={list(map(int, label_string(bad[0], k)))}",
                        seed=seed, details={"labels": [label_string(l, k) for l in bad]})]


ORACLE = FiniteOracle()
