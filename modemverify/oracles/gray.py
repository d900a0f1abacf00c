"""``gray``: every nearest-neighbour pair of the device's points differs in exactly one bit.

Gray labelling is what makes one symbol error cost one bit error at high SNR; the BER theory of
the bundled conventions assumes it (common practice).
"""

from __future__ import annotations

import numpy as np

from ..schemes.geometry import MEASURED_RTOL, all_distinct, nearest_neighbour_pairs
from ..schemes.labels import hamming, label_string
from ..verdict import Verdict
from ._table import measure_table
from .base import Oracle

__all__ = ["GrayOracle", "ORACLE"]


class GrayOracle(Oracle):
    name = "gray"
    order = 60
    summary = "nearest neighbours differ in exactly one bit"

    def applies(self, bench):
        if not bench.convention.is_gray:
            return f"the claimed convention {bench.convention.name!r} is not a Gray labelling"
        if bench.k == 1:
            return "BPSK has one bit per symbol: every labelling is Gray"
        return None

    def run(self, bench, opts, rng, seed):
        table = measure_table(bench)
        pts = table.points
        k = bench.k
        if not all_distinct(pts):
            return [Verdict(self.name, "error",
                            "the device's table has coincident or non-finite points, so "
                            "neighbours are undefined (see the mapping and finite checks)",
                            seed=seed)]
        i, j = nearest_neighbour_pairs(pts, MEASURED_RTOL)
        h = hamming(i, j)
        mean = float(h.mean())
        bad = np.nonzero(h != 1)[0]
        details = {"pairs": int(len(i)), "mean_hamming": mean,
                   "violations": [[label_string(i[b], k), label_string(j[b], k), int(h[b])]
                                  for b in bad[:64]]}
        if len(bad) == 0:
            return [Verdict(self.name, "pass",
                            f"all {len(i)} nearest-neighbour pairs differ in one bit",
                            statistic=mean, limit=1.0, unit="mean Hamming distance",
                            seed=seed, details=details)]
        b = bad[0]
        listed = ", ".join(f"{label_string(i[x], k)}-{label_string(j[x], k)}" for x in bad[:6])
        return [Verdict(
            self.name, "fail",
            f"{len(bad)} of {len(i)} nearest-neighbour pairs differ in more than one bit "
            f"({listed}{' ...' if len(bad) > 6 else ''}); mean Hamming distance {mean:.3f}, "
            f"Gray allows 1", statistic=mean, limit=1.0, unit="mean Hamming distance",
            counterexample=(f"neighbours {label_string(i[b], k)} and {label_string(j[b], k)} "
                            f"differ in {h[b]} bits"), seed=seed, details=details)]


ORACLE = GrayOracle()
