"""``ber``: bit error rate against theory, decided with stated statistical confidence.

For each Eb/N0 point the device's BER is held against the limit ``theory(Eb/N0 - margin_db)``:
a device whose demodulator loses more than ``margin_db`` fails, one within it passes. The
decision is Wald's sequential probability ratio test between H0 "the device meets theory"
(``p0 = theory(Eb/N0)``) and H1 "the device is at the limit" (``p1 = theory(Eb/N0 - margin)``),
evaluated at the exact bit where it becomes decidable, with risks alpha = beta = 1 - confidence
(split over the points when ``familywise``). Bits are sent in blocks until it decides or
``max_bits`` is spent, which is reported as *inconclusive*, never as a pass.

Wald's test assumes independent bit errors. A demodulator with memory (a tracking loop, an
equaliser) makes errors in bursts, and a binomial interval or an SPRT then claims far more
certainty than the data carry. So the per-sub-block error counts are tested for over-dispersion
(Pearson's chi-square); when they are over-dispersed the SPRT decision is set aside and the
decision comes from the Clopper-Pearson interval widened by the measured dispersion (the design
effect): pass when its upper end is below the limit, fail when its lower end is above.

Every verdict reports the measured BER, its interval, the bits and errors used, and the
implementation loss in dB (the theory curve inverted at the BER and at the interval's ends).

No pass better than theory: the theory curve is the exact BER of the optimum coherent detector
over AWGN, so a point whose whole loss interval lies below ``-BETTER_THAN_THEORY_DB`` does not
show a good demodulator but a wrong noise reference (the symbol energy is not what the noise
was set for, another noise-variance convention, an undeclared gain); it fails, saying which.
Each point is yielded as soon as it is decided, so it is printed, and kept on an interrupt,
before the next one starts. A point that fails as a consequence of an earlier verdict (the
labelling is not Gray, the noiseless round trip fails, the energy is off) says so.

References
----------
A. Wald, *Sequential Analysis*, Wiley, 1947 (Wald's thresholds A = (1-beta)/alpha,
B = beta/(1-alpha)); C. J. Clopper and E. S. Pearson, Biometrika 26(4):404-413, 1934.
"""

from __future__ import annotations

import math
import time
from typing import NamedTuple

import numpy as np

from ..bench import Bench
from ..blocks import (
    BlockJob,
    InProcess,
    Journal,
    block_schedule,
    importance_delay,
    pack_counts,
    unpack_counts,
)
from ..errors import ConfigError
from ..options import Opt
from ..records import BerPointRecord, ImportanceGuardRecord
from ..schemes.conventions import conventions_for
from ..schemes.theory import THEORY_MODULATIONS, default_ebn0_points
from ..schemes.theory import ber as theory_ber
from ..stats import (
    Sprt,
    block_interval,
    clopper_pearson,
    dispersion_test,
    expected_sample_size,
    fixed_sample_size,
    implementation_loss_db,
    look_risk,
    weighted_interval,
)
from ..vectors.channels import FLOAT32_NOISE_MIN_BER, NOISE_PRECISIONS, channel_from_config
from ..verdict import Verdict
from ._importance import run_guard, run_weighted
from .base import Oracle

__all__ = [
    "MIN_SUB_BLOCK", "FIRST_BLOCK", "MIN_BURST_BLOCKS", "BETTER_THAN_THEORY_DB", "BerOracle",
    "ORACLE", "BlockSizes", "block_sizes", "importance_block_sizes", "noise_precision",
    "PointPlan", "plan_point", "computed_bits",
]

#: shortest sub-block (bits) of the error counts the over-dispersion test uses
MIN_SUB_BLOCK = 8192
#: bits in the first block of a point (blocks then double up to block_bits); enough sub-blocks
#: for the burst test at BERs of 1e-3 and above
FIRST_BLOCK = 1 << 17
#: fewest sub-blocks for which the over-dispersion test may set the SPRT's decision aside
MIN_BURST_BLOCKS = 10
#: a point whose whole implementation-loss interval lies below minus this many dB fails: the
#: device is better than theory, so the noise reference is wrong. Chosen from the theory and
#: the interval. (1) The curves are the exact BER of nearest-point decisions with Gray
#: labelling; the bitwise-MAP detector, the best any demodulator can do, is no better at the
#: default points: 16QAM at 7.9 and 10.5 dB and 64QAM at 12.0 dB give the same BER to below
#: 1e-9 relative (4-PAM / 8-PAM per axis, numerical integration of the Gaussian likelihoods
#: with numpy, 4e5 points over +-12 sigma). So no detector beats the curve by any margin; the
#: bound only covers chance. (2) The loss interval is the BER interval at the point's
#: confidence (1 - 2 x risk); a correct device's interval lies wholly below -0.25 dB only if
#: its error count is far below theory. On the smallest sample a point uses (the first block,
#: 2^17 bits) at the familywise risk 0.05 / 3, that has probability at most 2.1e-4 per point
#: at the default points of QPSK, 16QAM and 64QAM and at QPSK 4, 6 and 8 dB (binomial
#: probability of the counts whose Clopper-Pearson upper end is below theory at Eb/N0 +
#: 0.25 dB, scipy.stats.binom) — negligible beside the check's stated 0.05 risk. (3) The
#: mistakes it is there to catch are much larger: a missing QAM normalisation is 10 log10 of
#: 2, 10, 42 or 170 (3 to 22 dB), N0 taken per dimension instead of per complex sample 3 dB,
#: Es taken for Eb 10 log10 k dB.
BETTER_THAN_THEORY_DB = 0.25


def _impairments(v):
    try:
        channel_from_config(v, bits_per_symbol=1)
    except Exception as exc:  # ConfigError or UnknownNameError: report its text at load time
        return str(exc)
    return None


def _increasing(v):
    return None if all(b > a for a, b in zip(v, v[1:])) else \
        f"values must increase; write {sorted(set(v))}"


class BerOracle(Oracle):
    name = "ber"
    order = 110
    fresh_vectors = True
    parallel = True
    summary = "BER within margin_db of theory, decided sequentially with stated confidence"
    options = {
        "ebn0_db": Opt("numbers", None, "Eb/N0 points in dB (default: where theory BER is "
                       "1e-2, 1e-3, 1e-4)", check=_increasing),
        "margin_db": Opt("number", 0.5, "agreed implementation margin in dB", minimum=0,
                         exclusive_minimum=True),
        "confidence": Opt("number", 0.95, "1 - risk of a wrong pass or a wrong fail",
                          minimum=0.5, maximum=0.999999),
        "familywise": Opt("bool", True, "split the risk over the points (Bonferroni), so the "
                          "confidence holds for the whole check"),
        "max_bits": Opt("number", 1e7, "bit budget per point (memory does not grow with it)",
                        minimum=1e3, maximum=1e15),
        "block_bits": Opt("int", 1 << 19, "largest bits per device call; blocks start at "
                          "2^17 bits and double, so early decisions cost little (a multiple of "
                          "8 x bits per symbol is used; at most 2^22)", minimum=64,
                          maximum=1 << 22),
        "energy": Opt("choice", "nominal", "Es from the convention's normalisation (nominal) "
                      "or measured on the device's output (measured)",
                      choices=("nominal", "measured")),
        "impairments": Opt("list", [], "channel stages before the noise, e.g. "
                           "[{kind: phase_offset, degrees: 5}]", check=_impairments),
        "decision": Opt("choice", "sprt", "sprt (sequential) or interval (Clopper-Pearson "
                        "bounds against the limit)", choices=("sprt", "interval")),
        "noise": Opt("choice", "auto", "precision of the normals drawn: float32 (faster), "
                     "float64, or auto (float32 where theory BER >= 1e-10)",
                     choices=("auto",) + NOISE_PRECISIONS),
        "method": Opt("choice", "plain", "plain (the true noise: any device) or importance "
                      "(noise biased toward the decision boundaries, errors weighted by the "
                      "likelihood ratio: deep BER in seconds, valid only for a memoryless "
                      "symbol-by-symbol demodulator at one sample per symbol; a guard checks "
                      "it against plain sampling first; always decided by its interval)",
                      choices=("plain", "importance")),
        "guard_ber": Opt("number", 1e-4, "method: importance: theory BER of the guard point, "
                         "where importance and plain sampling must agree before any point is "
                         "trusted", minimum=1e-6, maximum=1e-2),
    }

    @staticmethod
    def points(spec, opts) -> list[float]:
        """The Eb/N0 points of a device file: ``ebn0_db``, or the defaults for the modulation."""
        return [float(x) for x in (opts["ebn0_db"] or
                                   default_ebn0_points(spec.scheme.modulation,
                                                       ring_ratio=spec.scheme.ring_ratio))]

    def point_name(self, ebn0: float) -> str:
        return f"{self.name}.ebn0={ebn0:g}dB"

    def verdict_names(self, spec):
        opts = spec.checks.get(self.name)
        if opts is None or (not opts["ebn0_db"] and
                            spec.scheme.modulation not in THEORY_MODULATIONS):
            return [self.name]  # no theory curve, no default points: one (skipped) verdict
        guard = [self.guard_name] if opts["method"] == "importance" else []
        return guard + [self.point_name(x) for x in self.points(spec, opts)]

    @property
    def guard_name(self) -> str:
        return f"{self.name}.importance_guard"

    def validate(self, opts, spec, *, file):
        # a point whose theory BER (or limit) is near 0.5 (theory and limit then coincide) or
        # below 1e-300 (it underflows: nothing could be decided) cannot be judged: refused
        # here, so that no gate is silently off
        mod = spec.scheme.modulation
        if opts["method"] == "importance":
            _importance_applies(spec, file=file, key=f"checks.{self.name}.method")
        if opts["ebn0_db"] is None or mod not in THEORY_MODULATIONS:
            return
        for x in opts["ebn0_db"]:
            for at, what in ((x, "theory BER"), (x - opts["margin_db"], "the limit")):
                with np.errstate(over="ignore"):
                    p = float(theory_ber(mod, at, ring_ratio=spec.scheme.ring_ratio))
                if not 1e-300 < p <= 0.25:
                    raise ConfigError(
                        f"ebn0_db={x:g}: {what} for {mod} at {at:g} dB is {p:.3g}, which no bit "
                        f"budget can judge; choose points where theory BER is between about "
                        f"1e-1 and 1e-12", file=file, key=f"checks.{self.name}.ebn0_db")

    def applies(self, bench: Bench):
        mod = bench.convention.modulation
        if mod not in THEORY_MODULATIONS:
            return f"no theory curve for {mod}"
        if not bench.convention.is_gray:
            return (f"the claimed convention {bench.convention.name!r} is not Gray; the theory "
                    f"curves assume Gray labelling")
        pulse = bench.spec.scheme.pulse
        if not pulse.matched_pair:
            return (f"the theory curves assume a matched filter with no inter-symbol "
                    f"interference (rectangular or rrc pulses); a {pulse.shape} pulse has ISI "
                    f"or no matched-filter pair")
        return None

    def run(self, bench: Bench, opts, rng, seed):
        # the blocks draw from their own streams (blocks.block_seed), not from ``rng``: any
        # worker can compute any block, and the verdict does not depend on which did
        points = self.points(bench.spec, opts)
        risk = self.risk(opts, len(points))
        impair = channel_from_config(opts["impairments"], bits_per_symbol=bench.k,
                                     samples_per_symbol=bench.sps)
        plans = [plan_point(bench.convention.modulation, x, opts, risk, bench.k,
                            ring_ratio=bench.convention.ring_ratio) for x in points]
        for plan in plans:
            if plan.warning:
                bench.warn(f"warning: {self.point_name(plan.ebn0_db)}: {plan.warning}")
        clock = _Budget(bench, plans)
        engine = bench.engine if bench.engine is not None else InProcess(bench)
        journal = bench.journal if bench.journal is not None else Journal()
        guard = None
        if opts["method"] == "importance":
            guard = self._guard(bench, opts, engine, journal, seed, impair)
            yield guard
        for ebn0 in points:  # each point as soon as it is decided
            v = self._point(bench, opts, engine, journal, clock, seed, ebn0, risk, impair, guard)
            if v.outcome != "error":
                journal.decided(bench.spec.name, v.name, v)
            yield v

    @staticmethod
    def risk(opts, n_points: int) -> float:
        """The risk of each point: ``1 - confidence``, split over the points if familywise."""
        risk = 1 - opts["confidence"]
        return risk / n_points if opts["familywise"] else risk

    def _point(self, bench, opts, engine, journal, clock, seed, ebn0, risk, impair,
               guard: Verdict | None = None) -> Verdict:
        mod = bench.convention.modulation
        k = bench.k
        name = self.point_name(ebn0)
        saved = journal.load(bench.spec.name, name) or {}
        if "verdict" in saved:  # decided before the interrupt: as it was
            bench.warn(f"resumed: {name} was decided before the interrupt; its verdict is "
                       f"taken from the campaign file")
            return Verdict.from_json(saved["verdict"])
        ring = bench.convention.ring_ratio
        p0 = float(theory_ber(mod, ebn0, ring_ratio=ring))
        p1 = float(theory_ber(mod, ebn0 - opts["margin_db"], ring_ratio=ring))
        max_bits = int(opts["max_bits"])
        if guard is not None:
            return self._weighted_point(bench, opts, engine, journal, clock, seed, ebn0, risk,
                                        impair, guard, saved)
        if not 0 < p0 < p1 < 0.5 or p1 * max_bits < 1:
            return Verdict(name, "skipped",
                           f"theory BER at {ebn0:g} dB is {p0:.3g} (limit {p1:.3g}): too small to "
                           f"measure with max_bits={max_bits:.3g}; choose a lower Eb/N0 or a "
                           f"larger budget", statistic=None, limit=p1, seed=seed)
        sizes = block_sizes(k, p0, opts)
        sub = sizes.sub
        sprt = Sprt(p0, p1, alpha=risk, beta=risk)
        conf = 1 - 2 * risk  # two-sided interval whose one-sided ends each carry the risk
        mode = opts["decision"]
        sub_counts: list[np.ndarray] = []
        bits_sent = errors = done = 0
        decided = None
        bursty = None
        state = saved.get("state")
        if state:  # a resumed campaign: the blocks done, as they were
            done, bits_sent, errors = state["blocks"], state["bits"], state["errors"]
            mode, bursty = state["mode"], state["bursty"]
            sub_counts = [unpack_counts(state["sub_counts"])]
            if mode == "sprt":
                sprt.restore(bits_sent, errors)
            bench.warn(f"resumed: {name} continues at block {done} ({bits_sent:.3g} bits and "
                       f"{errors} errors kept from the campaign file)")
        precision = noise_precision(opts, p0)
        jobs = (BlockJob(self.name, name, i, offset, n, seed, ebn0, opts["energy"],
                         tuple(opts["impairments"]), precision)
                for i, offset, n in block_schedule(sizes.first, sizes.largest, max_bits,
                                                   sizes.unit) if i >= done)
        results = engine.results(jobs)
        try:
            for res in results:
                err, n = res.errors, res.bits
                sub_counts.append(np.bincount(err // sub, minlength=-(-n // sub)))
                bits_sent += n
                errors += err.size
                done = res.index + 1
                if mode == "sprt":
                    d = sprt.update(err, n)
                    if d is not None:
                        counts = np.concatenate(sub_counts)
                        test = (dispersion_test(counts, sub) if len(counts) >= MIN_BURST_BLOCKS
                                else None)
                        if test is not None and test.bursty():
                            mode, bursty = "interval", test.phi
                        else:
                            decided = (d.outcome, d.bits_used, d.errors_used, "sprt")
                if mode == "interval" and decided is None:
                    r = block_interval(np.concatenate(sub_counts), sub, conf)
                    if r.high < p1:
                        decided = ("pass", bits_sent, errors, "interval")
                    elif r.low > p1:
                        decided = ("fail", bits_sent, errors, "interval")
                if decided is None:
                    sub_counts = [np.concatenate(sub_counts)]
                    journal.save(bench.spec.name, name, {
                        "blocks": done, "bits": bits_sent, "errors": errors, "mode": mode,
                        "bursty": bursty, "sub_counts": pack_counts(sub_counts[0])})
                bench.progress(name, bits_sent / max_bits,
                               f"{bits_sent:.3g} bits, {errors} errors")
                clock.measured(bits_sent)
                if decided is not None:
                    break
        finally:
            results.close()  # drops (and cancels) the blocks computed past the decision
        if decided is None:
            decided = ("inconclusive", bits_sent, errors, mode)
        outcome, used_bits, used_errors, method = decided

        # the estimate and its interval use every bit sent (the SPRT may have decided earlier)
        counts = np.concatenate(sub_counts) if sub_counts else np.zeros(0, int)
        ber = errors / bits_sent if bits_sent else math.nan
        if len(counts) >= 2:
            r = block_interval(counts, sub, conf)
        else:
            r = clopper_pearson(errors, bits_sent, conf)
        how = (f"{'sequential test' if method == 'sprt' else 'interval test'} decided after "
               f"{used_bits:.3g} bits")
        extra = (f"; errors come in bursts (dispersion {bursty:.1f}), so the decision uses the "
                 f"interval widened by it" if bursty else "")
        inconclusive = (f"budget of {max_bits:.3g} bits spent before a decision (raise "
                        f"max_bits, or widen margin_db)")
        return self._verdict(bench, opts, seed, ebn0, p0, p1, outcome, ber, r, conf, {
            "bits": bits_sent, "errors": errors, "decided_after_bits": used_bits,
            "decided_after_errors": used_errors, "method": method, "risk": risk,
            "dispersion": r.dispersion, "sub_block_bits": sub, "noise": precision,
            "blocks": done, "impairments": impair.describe() if impair.stages else "",
        }, f"{errors} errors in {bits_sent:.3g} bits; {how}", extra, inconclusive)

    def _verdict(self, bench, opts, seed, ebn0, p0, p1, outcome, ber, r, conf, measured,
                 how: str, extra: str, inconclusive: str, trusted: bool = True) -> Verdict:
        """A point's verdict from what it measured: the estimate ``ber``, its interval ``r``
        (at ``conf``), the implementation loss, the better-than-theory rule, the reason.
        ``trusted=False``: the estimate is not valid (``inconclusive`` says why)."""
        mod = bench.convention.modulation
        interval = (float(r.low), float(r.high))
        loss = implementation_loss_db(mod, ebn0, ber, interval,
                                      ring_ratio=bench.convention.ring_ratio)
        details: BerPointRecord = {
            "ebn0_db": ebn0, "theory_ber": p0, "limit_ber": p1, "margin_db": opts["margin_db"],
            "loss_db": loss.loss_db, "loss_interval_db": [loss.low_db, loss.high_db],
            "energy": opts["energy"], "sides": bench.sides(), **measured,
        }
        head = (f"BER {ber:.3g} at {ebn0:g} dB ({how}); theory {p0:.3g}, limit {p1:.3g} "
                f"(theory at {ebn0 - opts['margin_db']:g} dB); implementation loss "
                f"{loss.describe()}")
        if not trusted:  # the estimate itself is not valid: nothing to judge it by
            reason = head + ": " + inconclusive + extra
        elif loss.high_db < -BETTER_THAN_THEORY_DB:
            outcome = "fail"
            reason = (head + f": better than theory by more than {BETTER_THAN_THEORY_DB:g} dB, "
                      f"which no demodulator achieves over this channel, so the noise "
                      f"reference is wrong: " + _noise_reference(bench, opts) + extra)
        elif outcome == "pass":
            reason = head + extra
        elif outcome == "fail":
            reason = (head + f": worse than the {opts['margin_db']:g} dB margin allows" + extra
                      + _consequence(bench))
        else:
            reason = head + ": " + inconclusive + extra
        return Verdict(self.point_name(ebn0), outcome, reason, statistic=ber,
                       interval=interval, confidence=conf, limit=p1, unit="BER", seed=seed,
                       details=details)

    # -- importance sampling (method: importance; see oracles/_importance.py) ----------------
    def _job_maker(self, seed, opts):
        def make(ebn0, point, index, offset, bits, method):
            return BlockJob(self.name, point, index, offset, bits, seed, ebn0, opts["energy"],
                            tuple(opts["impairments"]), "float64", method)
        return make

    def _guard(self, bench, opts, engine, journal, seed, impair) -> Verdict:
        name = self.guard_name
        saved = journal.load(bench.spec.name, name) or {}
        if "verdict" in saved:
            bench.warn(f"resumed: {name} was decided before the interrupt; its verdict is "
                       f"taken from the campaign file")
            return Verdict.from_json(saved["verdict"])
        mod = bench.convention.modulation
        k = bench.k
        _, why = importance_delay(bench)
        if why:
            v = Verdict(name, "inconclusive",
                        f"importance sampling is not valid for this device: {why}; every point "
                        f"of this check is inconclusive (use method: plain)", seed=seed,
                        details={})
            journal.decided(bench.spec.name, name, v)
            return v
        g = run_guard(engine, self._job_maker(seed, opts), name, mod, opts["guard_ber"],
                      bench.convention.ring_ratio,
                      block_sizes(k, opts["guard_ber"], opts), importance_block_sizes(k, opts),
                      int(opts["max_bits"]))
        details: ImportanceGuardRecord = dict(g._asdict())
        if g.why:
            v = Verdict(name, "inconclusive",
                        f"importance sampling is not valid for this device: {g.why}; "
                        f"{g.describe()}; every point of this check is inconclusive (use "
                        f"method: plain)", statistic=g.importance_ber,
                        interval=g.importance_interval, limit=g.plain_ber, unit="BER",
                        seed=seed, details=details)
        else:
            v = Verdict(name, "pass",
                        f"importance sampling agrees with plain sampling and its weights pass "
                        f"the diagnostics: {g.describe()}", statistic=g.importance_ber,
                        interval=g.importance_interval, limit=g.plain_ber, unit="BER",
                        seed=seed, details=details)
        journal.decided(bench.spec.name, name, v)
        return v

    def _weighted_point(self, bench, opts, engine, journal, clock, seed, ebn0, risk, impair,
                        guard: Verdict, saved) -> Verdict:
        name = self.point_name(ebn0)
        mod = bench.convention.modulation
        ring = bench.convention.ring_ratio
        p0 = float(theory_ber(mod, ebn0, ring_ratio=ring))
        p1 = float(theory_ber(mod, ebn0 - opts["margin_db"], ring_ratio=ring))
        if guard.outcome != "pass":
            why = guard.details.get("why") or guard.reason
            return Verdict(name, "inconclusive",
                           f"not measured: {self.guard_name} did not pass ({why}); use "
                           f"method: plain",
                           statistic=None, limit=p1, seed=seed)
        max_bits = int(opts["max_bits"])
        sizes = importance_block_sizes(bench.k, opts)
        state = saved.get("state")
        done = state["blocks"] if state else 0
        if state:
            bench.warn(f"resumed: {name} continues at block {done} ({state['bits']:.3g} bits "
                       f"kept from the campaign file)")
        make = self._job_maker(seed, opts)
        jobs = (make(ebn0, name, i, offset, n, "importance")
                for i, offset, n in block_schedule(sizes.first, sizes.largest, max_bits,
                                                   sizes.unit) if i >= done)

        def progress(bits, errors):
            bench.progress(name, bits / max_bits, f"{bits:.3g} bits (importance sampling)")
            clock.measured(bits)

        run = run_weighted(engine, jobs, p1, risk, state=state, progress=progress,
                           save=lambda st: journal.save(bench.spec.name, name, st))
        t = run.tally
        conf = 1 - 2 * (look_risk(risk, run.looks) if run.looks else risk / 3)
        r = weighted_interval(t, conf)
        plain_bits = t.plain_bits_for_same_width(bench.k)
        speedup = plain_bits / run.bits if plain_bits == plain_bits and run.bits else math.nan
        calls = f"{run.blocks} device call{'s' if run.blocks != 1 else ''}"
        looks = f"{run.looks} look{'s' if run.looks != 1 else ''}"
        how = (f"importance sampling: {run.bits:.3g} bits in {calls}, effective sample size "
               f"{t.ess:.3g}, largest weight share {100 * t.max_share:.2g} %, {looks}; plain "
               f"sampling would need {plain_bits:.3g} bits for an interval this narrow, "
               f"{speedup:.3g} times more")
        inconclusive = run.why or (f"budget of {max_bits:.3g} bits spent before a decision "
                                   f"(raise max_bits, or widen margin_db)")
        return self._verdict(bench, opts, seed, ebn0, p0, p1, run.outcome, t.mean, r, conf, {
            "bits": run.bits, "errors": run.errors, "decided_after_bits": run.decided_bits,
            "decided_after_errors": run.errors, "method": "importance", "risk": risk,
            "dispersion": None, "sub_block_bits": sizes.sub, "noise": "float64",
            "blocks": run.blocks, "impairments": impair.describe() if impair.stages else "",
            "ess": t.ess, "max_weight_share": t.max_share, "device_calls": run.blocks,
            "speedup": speedup, "plain_bits_same_width": plain_bits,
        }, how, "", inconclusive, trusted=not run.why)


class BlockSizes(NamedTuple):
    """A point's block sizes (bits): the over-dispersion test's sub-block, the first and the
    largest block, and the unit every block is a multiple of."""

    sub: int
    first: int
    largest: int
    unit: int


def block_sizes(k: int, p0: float, opts) -> BlockSizes:
    """The block sizes of a point whose theory BER is ``p0`` (they fix the schedule)."""
    byte_sym = 8 * k  # a block is whole bytes of whole symbols
    # sub-blocks for the over-dispersion test: long enough to expect >= 2 errors at theory
    sub = byte_sym * max(1, -(-max(MIN_SUB_BLOCK, int(2 / p0)) // byte_sym))
    largest = max(sub, (opts["block_bits"] // sub) * sub)
    first = min(largest, max(sub, (FIRST_BLOCK // sub) * sub))
    return BlockSizes(sub, first, largest, byte_sym)


def importance_block_sizes(k: int, opts) -> BlockSizes:
    """Block sizes under importance sampling: errors are common under the biased noise, so the
    blocks start at 2^17 bits and double to ``block_bits`` whatever the point's BER."""
    unit = 8 * k
    largest = max(unit, (opts["block_bits"] // unit) * unit)
    first = min(largest, max(unit, (FIRST_BLOCK // unit) * unit))
    return BlockSizes(unit, first, largest, unit)


def _importance_applies(spec, *, file, key) -> None:
    """Refuse importance sampling where its per-symbol weights cannot be valid."""
    mod = spec.scheme.modulation
    why = None
    if mod not in THEORY_MODULATIONS:
        why = f"it needs a theory curve, and {mod} has none"
    elif spec.scheme.samples_per_symbol != 1 and not spec.scheme.pulse.matched_pair:
        why = (f"at more than one sample per symbol it needs a pulse whose symbols are "
               f"orthonormal after the matched filter (rrc, rectangular), and a "
               f"{spec.scheme.pulse.shape} pulse is not (use method: plain)")
    elif conventions_for(mod)[0].rule.differential:
        why = (f"a differential detector ({mod}) decides on two symbols' noise, so the "
               f"per-symbol weights are not valid (use method: plain)")
    elif conventions_for(mod)[0].rule.q_delay:
        why = (f"{mod} decides its Q arm half a symbol after its I arm, and the noise is "
               f"biased at each symbol's own instant (use method: plain)")
    if why:
        raise ConfigError(f"method=importance: {why}", file=file, key=key)


def noise_precision(opts, p0: float) -> str:
    """float32 noise where its tail is accurate enough for the BER measured, else float64."""
    choice = opts["noise"]
    if choice != "auto":
        return choice
    return "float32" if p0 >= FLOAT32_NOISE_MIN_BER else "float64"


class PointPlan(NamedTuple):
    """What one point is expected to cost: theory, limit, and the bits the tests need."""

    ebn0_db: float
    theory_ber: float
    limit_ber: float
    #: Wald's average sample number of the sequential test at theory and at the limit (bits)
    asn_theory: float
    asn_limit: float
    #: bits a fixed-sample test with the same risks needs
    fixed_bits: int
    max_bits: int
    #: why the point will probably not decide within its budget, or ""
    warning: str
    sizes: BlockSizes | None = None

    @property
    def expected_bits(self) -> float:
        """The bits computed for the larger of the two averages: whole blocks, at most the
        budget (NaN for a point that cannot be judged)."""
        if self.sizes is None:
            return math.nan
        return max(computed_bits(self.asn_theory, self.sizes, self.max_bits),
                   computed_bits(self.asn_limit, self.sizes, self.max_bits))


def computed_bits(bits: float, sizes: BlockSizes, max_bits: int) -> int:
    """Bits the schedule computes to reach ``bits``: whole blocks, at most ``max_bits``.

    >>> sizes = BlockSizes(sub=8, first=8, largest=32, unit=4)
    >>> computed_bits(10, sizes, 100), computed_bits(30, sizes, 100)
    (24, 56)
    """
    if not bits == bits:  # NaN
        return 0
    end = 0
    for _, offset, n in block_schedule(sizes.first, sizes.largest, max_bits, sizes.unit):
        end = offset + n
        if end >= bits:
            break
    return end


def plan_point(modulation: str, ebn0: float, opts, risk: float, k: int = 1, *,
               ring_ratio=None) -> PointPlan:
    """The expected cost of one point (no device needed; ``ring_ratio``: APSK's); see
    :class:`PointPlan`."""
    p0 = float(theory_ber(modulation, ebn0, ring_ratio=ring_ratio))
    p1 = float(theory_ber(modulation, ebn0 - opts["margin_db"], ring_ratio=ring_ratio))
    max_bits = int(opts["max_bits"])
    if not 0 < p0 < p1 < 0.5:
        return PointPlan(ebn0, p0, p1, math.nan, math.nan, 0, max_bits, "")
    fixed = fixed_sample_size(p0, p1, risk, risk)
    if opts["method"] == "importance":
        # errors are common under the biased noise: a device away from the limit is decided
        # at the first look, one at the limit runs to max_bits
        sizes = importance_block_sizes(k, opts)
        return PointPlan(ebn0, p0, p1, sizes.first, sizes.first, fixed, max_bits, "", sizes)
    a0 = expected_sample_size(p0, p0, p1, risk, risk)
    a1 = expected_sample_size(p1, p0, p1, risk, risk)
    warning = ""
    if max(a0, a1) > max_bits:
        warning = (f"the sequential test needs on average {a0:.3g} bits at theory and "
                   f"{a1:.3g} at the limit, more than max_bits={max_bits:.3g}: it will "
                   f"probably end inconclusive (raise max_bits, or widen margin_db)")
    return PointPlan(ebn0, p0, p1, a0, a1, fixed, max_bits, warning,
                     block_sizes(k, p0, opts))


class _Budget:
    """Warns once, after the first block, when the check will likely outlast its time budget."""

    def __init__(self, bench: Bench, plans: list[PointPlan]):
        self.bench = bench
        self.budget = bench.time_budget_s
        self.total = sum(b for p in plans if (b := p.expected_bits) == b)  # NaN: not judged
        self.t0 = time.perf_counter()
        self.warned = self.budget is None

    def measured(self, bits_sent: int) -> None:
        if self.warned:
            return
        self.warned = True
        rate = bits_sent / max(time.perf_counter() - self.t0, 1e-9)
        need = self.total / rate
        if need > self.budget:
            self.bench.warn(f"warning: {self.bench.spec.name}: at the measured {rate:.3g} "
                            f"bit/s the BER check needs about {need:.3g} s on average, more than the time "
                            f"budget of {self.budget:g} s (run modemverify plan for the "
                            f"details; add workers, or relax the points)")


def _noise_reference(bench: Bench, opts) -> str:
    """What is wrong with the noise reference, as far as the run knows."""
    energy = bench.verdicts.get("energy")
    es = bench.scale().es if bench.device.has("modulate") else 1.0
    off_db = 10 * math.log10(es) if es > 0 else -math.inf
    if opts["energy"] == "nominal" and abs(off_db) > 0.1:  # the energy check's tolerance
        named = (", the defect the energy verdict names" if energy is not None and
                 energy.outcome == "fail" else "")
        return (f"the noise is set for the nominal Es = 1, but the device's symbols carry "
                f"Es = {es:.4g} ({off_db:+.2f} dB{named}); fix the energy "
                f"normalisation, or set checks.ber.energy: measured to judge the demodulator "
                f"at the device's own scale")
    return ("the symbol energy is what the noise was set for, so check the noise variance "
            "convention (noise_var is the complex variance N0 per sample, N0/2 on each of I "
            "and Q) and any gain the demodulator applies or the device file declares "
            "(full_scale, an undeclared scaling between modulator and demodulator)")


#: earlier verdicts whose failure makes a BER point fail too, and why
_CAUSES = {
    "roundtrip": "the noiseless round trip already loses bits",
    "gray": "the device's labelling is not Gray, and the theory curve assumes Gray labelling",
    "mapping": "the device's table is not the claimed one, which the reference side decodes",
    "energy": "the symbol energy is off, so the noise is not at the stated Eb/N0",
}


def _consequence(bench: Bench) -> str:
    """``; a consequence of ...`` naming the earlier failures that explain a failing point."""
    sides = bench.sides()
    causes = [f"{name} failed: {why}" for name, why in _CAUSES.items()
              if (v := bench.verdicts.get(name)) is not None and v.outcome == "fail"
              and (name != "mapping" or ("reference" in sides and
                                         "differing_labels" in v.details))]
    return f"; likely a consequence of an earlier verdict ({'; '.join(causes)})" if causes else ""


ORACLE = BerOracle()
