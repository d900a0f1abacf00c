"""Importance sampling for the ``ber`` check (``method: importance``): the sequential weighted
decision of one point, and the guard that must pass before any deep point is trusted.

The noise is drawn from a mixture biased toward the claimed constellation's decision
boundaries (:mod:`modemverify.vectors.biasing`); each symbol's bit errors are weighted by the
likelihood ratio of the noise drawn (:mod:`modemverify.stats.weighted`). That estimate is
unbiased for a **memoryless, symbol-by-symbol** demodulator only, and its own variance
estimate can be badly wrong when the weights are heavy-tailed. So importance sampling never
passes on its own word:

1. **The guard** (:func:`run_guard`, verdict ``ber.importance_guard``), once per check, before
   the deep points: at the Eb/N0 where theory gives ``guard_ber`` (plain sampling is
   affordable there), the same biasing and plain sampling both estimate the device's BER; they
   must agree (a two-sample z test at :data:`GUARD_ALPHA`), the weights must pass the
   diagnostics (:func:`~modemverify.stats.weighted.diagnose`), and the neighbour test must find
   no dependence on the adjacent symbols' noise. Otherwise every point is inconclusive, with
   the reason.
2. **Each deep point** (:func:`run_weighted`) looks after every block whose weights pass the
   diagnostics, at the risk :func:`~modemverify.stats.weighted.look_risk` of that look, and
   decides pass (interval below the limit) or fail (above it); a decision stands only if the
   neighbour test on the point's own symbols finds no dependence; otherwise the point is
   inconclusive, with the reason.
"""

from __future__ import annotations

import math
from typing import Callable, NamedTuple

import numpy as np
from scipy import stats as _st

from ..blocks import BlockJob, Engine, block_schedule
from ..schemes.theory import ebn0_for_ber
from ..stats import (
    WeightedTally,
    clopper_pearson,
    diagnose,
    look_risk,
    neighbour_test,
    weighted_interval,
)

__all__ = ["NOT_REPEATABLE", "GUARD_ALPHA", "GUARD_ERRORS", "GUARD_MAX_BITS", "GUARD_REL_WIDTH", "WeightedRun",
           "run_weighted", "GuardResult", "run_guard"]

#: why a demodulator that answers the same samples differently is not judged by importance
#: sampling
NOT_REPEATABLE = ("the demodulator gave different bits for the same samples: it draws noise "
                  "of its own or keeps state between calls, and the weights account only for "
                  "the noise the harness drew, so the estimate's variance is not what it "
                  "seems (use method: plain)")

#: level of the guard's agreement test: a valid device is called invalid this often
GUARD_ALPHA = 1e-3
#: plain sampling at the guard point stops after this many bit errors ...
GUARD_ERRORS = 1000
#: ... or this many bits
GUARD_MAX_BITS = 4e7
#: importance sampling at the guard point stops when its 1 - GUARD_ALPHA interval's half-width
#: is below this fraction of the estimate (or at GUARD_MAX_BITS)
GUARD_REL_WIDTH = 0.05


class WeightedRun(NamedTuple):
    """What a weighted point measured and decided."""

    #: pass, fail or inconclusive
    outcome: str
    tally: WeightedTally
    bits: int
    errors: int
    blocks: int
    #: looks taken (blocks whose weights passed the diagnostics)
    looks: int
    #: bits when the decision was taken (all bits when undecided)
    decided_bits: int
    #: why the point is inconclusive ("" otherwise)
    why: str


def run_weighted(engine: Engine, jobs, p1: float, risk: float, *, state: dict | None = None,
                 save: Callable[[dict], None] = lambda s: None,
                 progress: Callable[[int, int], None] = lambda bits, errors: None
                 ) -> WeightedRun:
    """Feed the weighted blocks of one point to the sequential rule (see the module text).

    ``jobs`` are the point's importance-sampling jobs from block ``state["blocks"]`` on;
    ``state`` is what ``save`` was last given (a resumed campaign).
    """
    tally, bits, errors, done, looks = WeightedTally(), 0, 0, 0, 0
    if state:
        tally = WeightedTally.from_json(state["tally"])
        bits, errors, done, looks = state["bits"], state["errors"], state["blocks"], state["looks"]
    outcome = None
    repeatable = state.get("repeatable", True) if state else True
    results = engine.results(jobs)
    try:
        for res in results:
            tally = tally.add(res.tally)
            bits += res.bits
            errors += res.errors.size
            done = res.index + 1
            if res.repeatable is False:
                repeatable = False
                break
            if not diagnose(tally):
                looks += 1
                ci = weighted_interval(tally, 1 - 2 * look_risk(risk, looks))
                if ci.high < p1:
                    outcome = "pass"
                elif ci.low > p1:
                    outcome = "fail"
            progress(bits, errors)
            if outcome is not None:
                break
            save({"blocks": done, "bits": bits, "errors": errors, "looks": looks,
                  "tally": tally.to_json(), "repeatable": repeatable})
    finally:
        results.close()
    why = ""
    if outcome is None:
        outcome = "inconclusive"
        why = diagnose(tally)
    dep = neighbour_test(tally).dependent()
    if dep:
        outcome = "inconclusive"
        why = (f"{dep}: the device's decisions have memory across symbols, for which the "
               f"per-symbol weights of importance sampling are wrong (use method: plain)")
    if not repeatable:
        outcome = "inconclusive"
        why = NOT_REPEATABLE
    return WeightedRun(outcome, tally, bits, errors, done, looks, bits, why)


class GuardResult(NamedTuple):
    """The guard's finding: ``why`` is "" when importance sampling may be trusted."""

    ebn0_db: float
    theory_ber: float
    plain_ber: float
    plain_interval: tuple[float, float]
    plain_bits: int
    importance_ber: float
    importance_interval: tuple[float, float]
    importance_bits: int
    ess: float
    max_share: float
    z: float
    p_value: float
    why: str

    def describe(self) -> str:
        return (f"at {self.ebn0_db:.3g} dB (theory {self.theory_ber:.3g}) importance sampling "
                f"gives {self.importance_ber:.3g} [{self.importance_interval[0]:.3g}, "
                f"{self.importance_interval[1]:.3g}] in {self.importance_bits:.3g} bits (effective "
                f"sample size {self.ess:.3g}, largest weight share {100 * self.max_share:.2g} %) "
                f"and plain sampling {self.plain_ber:.3g} [{self.plain_interval[0]:.3g}, "
                f"{self.plain_interval[1]:.3g}] in {self.plain_bits:.3g} bits (z = "
                f"{self.z:+.2f}, p = {self.p_value:.2g})")


def _jobs(make: Callable[..., BlockJob], point: str, method: str, sizes, max_bits: int):
    return (make(point, i, offset, n, method)
            for i, offset, n in block_schedule(sizes.first, sizes.largest, max_bits, sizes.unit))


def run_guard(engine: Engine, make: Callable[..., BlockJob], name: str, modulation: str,
              guard_ber: float, ring_ratio, sizes_plain, sizes_weighted,
              budget: int) -> GuardResult:
    """Estimate the BER at the guard point both ways and judge whether they agree.

    ``ring_ratio``: APSK's rings (None otherwise). ``make(point, index, offset, bits, method)``
    builds a job at the guard's Eb/N0; the two
    estimates use their own streams (points ``<name>/plain`` and ``<name>/importance``).
    """
    ebn0 = float(ebn0_for_ber(modulation, guard_ber, ring_ratio=ring_ratio))
    budget = int(min(budget, GUARD_MAX_BITS))
    # plain sampling until GUARD_ERRORS errors
    bits = errors = 0
    results = engine.results(_jobs(lambda *a: make(ebn0, *a), f"{name}/plain", "plain",
                                   sizes_plain, budget))
    try:
        for res in results:
            bits += res.bits
            errors += res.errors.size
            if errors >= GUARD_ERRORS:
                break
    finally:
        results.close()
    p_plain = errors / bits if bits else math.nan
    ci_plain = clopper_pearson(errors, bits, 1 - GUARD_ALPHA)
    # importance sampling until its interval is narrow
    tally, wbits, repeatable = WeightedTally(), 0, True
    results = engine.results(_jobs(lambda *a: make(ebn0, *a), f"{name}/importance",
                                   "importance", sizes_weighted, budget))
    try:
        for res in results:
            repeatable = repeatable and res.repeatable is not False
            tally = tally.add(res.tally)
            wbits += res.bits
            ci = weighted_interval(tally, 1 - GUARD_ALPHA)
            if not diagnose(tally) and ci.high - ci.low <= 2 * GUARD_REL_WIDTH * tally.mean:
                break
    finally:
        results.close()
    ci_w = weighted_interval(tally, 1 - GUARD_ALPHA)
    var = tally.variance_of_mean + (p_plain * (1 - p_plain) / bits if bits else math.inf)
    z = (tally.mean - p_plain) / math.sqrt(var) if var > 0 else 0.0
    pv = float(2 * _st.norm.sf(abs(z))) if np.isfinite(z) else 0.0
    whys = [] if repeatable else [NOT_REPEATABLE]
    diag = diagnose(tally)
    if diag:
        whys.append(f"the weights fail the diagnostics: {diag}")
    if pv < GUARD_ALPHA:
        whys.append(f"importance and plain sampling disagree (p = {max(pv, 1e-300):.2g} < "
                    f"{GUARD_ALPHA:g})")
    dep = neighbour_test(tally).dependent()
    if dep:
        whys.append(dep)
    return GuardResult(ebn0, float(guard_ber), p_plain, (float(ci_plain.low),
                       float(ci_plain.high)), bits, tally.mean, (float(ci_w.low),
                       float(ci_w.high)), wbits, tally.ess, tally.max_share, z, pv,
                       "; ".join(whys))
