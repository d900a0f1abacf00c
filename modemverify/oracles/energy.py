"""``energy``: the average symbol energy equals the convention's normalisation.

Every bundled convention has unit average energy over equiprobable labels (3GPP TS 38.211 5.1;
IEEE 802.11 K_MOD; EN 302 307 rho^2 = 1). A device that forgets the normalisation factor is a
classic porting bug: the reason says so when the ratio matches it.
"""

from __future__ import annotations

import numpy as np

from ..options import Opt
from ..verdict import Verdict
from ._table import measure_table
from .base import Oracle

__all__ = ["EnergyOracle", "ORACLE"]


class EnergyOracle(Oracle):
    name = "energy"
    order = 40
    requires = ("modulate",)
    summary = ("energy per symbol (sum of |x|^2 over the waveform, per symbol) equals the "
               "convention's normalisation")
    options = {
        "tolerance_db": Opt("number", 0.1, "allowed deviation in dB", minimum=0),
        "nominal": Opt("number", 1.0, "expected average symbol energy", minimum=0,
                       exclusive_minimum=True),
    }

    def run(self, bench, opts, rng, seed):
        table = measure_table(bench)
        es = table.energy_per_symbol
        nominal = opts["nominal"]
        if es <= 0:
            return [Verdict(self.name, "fail", "the device's average symbol energy is zero",
                            statistic=0.0, limit=nominal, seed=seed)]
        db = 10 * np.log10(es / nominal)
        tol = opts["tolerance_db"]
        details = {"es": es, "nominal": nominal, "deviation_db": float(db)}
        if abs(db) <= tol:
            return [Verdict(self.name, "pass",
                            f"average symbol energy {es:.4g} ({db + 0.0:+.3f} dB from {nominal:g})",
                            statistic=float(db), limit=tol, unit="dB", seed=seed,
                            details=details)]
        reason = (f"average symbol energy {es:.4g} is {db:+.2f} dB from the nominal {nominal:g} "
                  f"(tolerance {tol:g} dB)")
        norm = bench.convention.normalisation
        if norm != 1 and abs(es * norm ** 2 / nominal - 1) < 0.02:
            reason += (f": the {bench.convention.name} normalisation factor "
                       f"1/sqrt({1 / norm ** 2:.0f}) looks missing")
        return [Verdict(self.name, "fail", reason, statistic=float(db), limit=tol, unit="dB",
                        seed=seed, details=details)]


ORACLE = EnergyOracle()
