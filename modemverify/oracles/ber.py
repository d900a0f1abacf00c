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

import numpy as np

from ..bench import Bench
from ..errors import ConfigError
from ..options import Opt
from ..records import BerPointRecord
from ..schemes.theory import THEORY_MODULATIONS, default_ebn0_points
from ..schemes.theory import ber as theory_ber
from ..stats import (
    Sprt,
    block_interval,
    clopper_pearson,
    dispersion_test,
    implementation_loss_db,
)
from ..vectors.bits import random_bits
from ..vectors.channels import Awgn, channel_from_config
from ..verdict import Verdict
from .base import Oracle

__all__ = [
    "MIN_SUB_BLOCK", "FIRST_BLOCK", "MIN_BURST_BLOCKS", "BETTER_THAN_THEORY_DB", "BerOracle",
    "ORACLE",
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
    }

    @staticmethod
    def points(spec, opts) -> list[float]:
        """The Eb/N0 points of a device file: ``ebn0_db``, or the defaults for the modulation."""
        return [float(x) for x in (opts["ebn0_db"] or
                                   default_ebn0_points(spec.scheme.modulation))]

    def point_name(self, ebn0: float) -> str:
        return f"{self.name}.ebn0={ebn0:g}dB"

    def verdict_names(self, spec):
        opts = spec.checks.get(self.name)
        if opts is None or (not opts["ebn0_db"] and
                            spec.scheme.modulation not in THEORY_MODULATIONS):
            return [self.name]  # no theory curve, no default points: one (skipped) verdict
        return [self.point_name(x) for x in self.points(spec, opts)]

    def validate(self, opts, spec, *, file):
        # a point whose theory BER (or limit) is near 0.5 (theory and limit then coincide) or
        # below 1e-300 (it underflows: nothing could be decided) cannot be judged: refused
        # here, so that no gate is silently off
        mod = spec.scheme.modulation
        if opts["ebn0_db"] is None or mod not in THEORY_MODULATIONS:
            return
        for x in opts["ebn0_db"]:
            for at, what in ((x, "theory BER"), (x - opts["margin_db"], "the limit")):
                with np.errstate(over="ignore"):
                    p = float(theory_ber(mod, at))
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
        points = self.points(bench.spec, opts)
        n_points = len(points)
        risk = 1 - opts["confidence"]
        if opts["familywise"]:
            risk /= n_points
        impair = channel_from_config(opts["impairments"], bits_per_symbol=bench.k,
                                     samples_per_symbol=bench.sps)
        streams = rng.spawn(n_points)
        for ebn0, stream in zip(points, streams):  # each point as soon as it is decided
            yield self._point(bench, opts, stream, seed, ebn0, risk, impair)

    def _point(self, bench, opts, rng, seed, ebn0, risk, impair) -> Verdict:
        mod = bench.convention.modulation
        k, sps = bench.k, bench.sps
        name = self.point_name(ebn0)
        p0 = float(theory_ber(mod, ebn0))
        p1 = float(theory_ber(mod, ebn0 - opts["margin_db"]))
        max_bits = int(opts["max_bits"])
        if not 0 < p0 < p1 < 0.5 or p1 * max_bits < 1:
            return Verdict(name, "skipped",
                           f"theory BER at {ebn0:g} dB is {p0:.3g} (limit {p1:.3g}): too small to "
                           f"measure with max_bits={max_bits:.3g}; choose a lower Eb/N0 or a "
                           f"larger budget", statistic=None, limit=p1, seed=seed)
        byte_sym = 8 * k  # a block is whole bytes of whole symbols
        # sub-blocks for the over-dispersion test: long enough to expect >= 2 errors at theory
        sub = byte_sym * max(1, -(-max(MIN_SUB_BLOCK, int(2 / p0)) // byte_sym))
        block_max = max(sub, (opts["block_bits"] // sub) * sub)
        block = min(block_max, max(sub, (FIRST_BLOCK // sub) * sub))
        # unit-energy pulses carry unit-energy symbols: Es = 1 (see vectors.channels.Awgn)
        awgn = Awgn(ebn0, k, sps, energy=opts["energy"], nominal_es=1.0)
        sprt = Sprt(p0, p1, alpha=risk, beta=risk)
        conf = 1 - 2 * risk  # two-sided interval whose one-sided ends each carry the risk
        mode = opts["decision"]
        sub_counts: list[np.ndarray] = []
        bits_sent = errors = 0
        decided = None
        bursty = None
        buf = None
        while bits_sent < max_bits and decided is None:
            n = min(block, max_bits - bits_sent)
            n -= n % byte_sym
            if n <= 0:
                break
            bits = random_bits(rng, n)
            tx = bench.transmit(bits)
            if impair.stages:
                tx = impair.apply(tx, rng)
            if buf is None or buf.size != tx.size:
                buf = np.empty(tx.size, dtype=np.complex128)
            rx = bench.receive(awgn.apply(tx, rng, out=buf), n // k)
            err = np.flatnonzero(rx != bits)
            sub_counts.append(np.bincount(err // sub, minlength=-(-n // sub)))
            bits_sent += n
            errors += err.size
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
            bench.progress(name, bits_sent / max_bits, f"{bits_sent:.3g} bits, {errors} errors")
            block = min(block_max, 2 * block)
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
        interval = (float(r.low), float(r.high))
        loss = implementation_loss_db(mod, ebn0, ber, interval)
        details: BerPointRecord = {
            "ebn0_db": ebn0, "theory_ber": p0, "limit_ber": p1, "margin_db": opts["margin_db"],
            "bits": bits_sent, "errors": errors, "decided_after_bits": used_bits,
            "decided_after_errors": used_errors, "method": method, "risk": risk,
            "loss_db": loss.loss_db, "loss_interval_db": [loss.low_db, loss.high_db],
            "dispersion": r.dispersion, "sub_block_bits": sub,
            "energy": opts["energy"], "sides": bench.sides(),
            "impairments": impair.describe() if impair.stages else "",
        }
        how = ("sequential test" if method == "sprt" else "interval test")
        head = (f"BER {ber:.3g} at {ebn0:g} dB ({errors} errors in {bits_sent:.3g} bits; "
                f"{how} decided after {used_bits:.3g} bits); theory {p0:.3g}, limit {p1:.3g} "
                f"(theory at {ebn0 - opts['margin_db']:g} dB); implementation loss "
                f"{loss.describe()}")
        extra = (f"; errors come in bursts (dispersion {bursty:.1f}), so the decision uses the "
                 f"interval widened by it" if bursty else "")
        if loss.high_db < -BETTER_THAN_THEORY_DB:
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
            reason = (head + f": budget of {max_bits:.3g} bits spent before a decision (raise "
                      f"max_bits, or widen margin_db)" + extra)
        return Verdict(name, outcome, reason, statistic=ber, interval=interval, confidence=conf,
                       limit=p1, unit="BER", seed=seed, details=details)


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
