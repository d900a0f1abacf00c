"""``llr``: soft outputs — sign convention, calibration and mutual information.

The device's LLRs (``demodulate_soft``) for noisy samples of its own modulator (or the
reference's, for a receiver-only device) are judged three ways, each a verdict, at the device's
measured scale: the noise is set for the energy its symbols carry and the reference demapper
sees the same samples at the reference's scale, so that a normalisation defect fails ``energy``
alone. When ``mapping`` failed the reference demapper would decode another table, so the check
is skipped naming it; when ``llr.sign`` fails the other two are skipped naming it.

``llr.sign``
    The sign convention: with ``scheme.llr_positive_bit: 0`` (the default) a positive LLR means
    bit 0, ``L = ln P(b=0|y) / P(b=1|y)`` (Hagenauer, Offer, Papke, IEEE Trans. Inf. Theory
    42(2), 1996 — from memory). 3GPP specifies no LLR sign (TS 38.211 defines the transmitter
    only — from memory), so the sign is a property of each device and must be declared.
``llr.calibration``
    Whether the magnitudes mean what they say: the best-fit scale ``s`` that makes
    ``P(b|L) = 1 / (1 + exp(-s L (1 - 2b)))`` most likely for the bits sent (a one-parameter
    logistic calibration, common practice). A calibrated demapper has ``s = 1``; over-confident
    LLRs give ``s < 1``, under-confident ``s > 1``.
``llr.mutual_information``
    Bitwise mutual information ``I = 1 - E[log2(1 + exp(-(1-2b) L))]`` (the standard estimate
    from LLRs of a consistent demapper, e.g. as used for BICM capacity — from memory), against
    the exact reference demapper at the same Eb/N0.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import optimize, special

from ..bench import Bench
from ..options import Opt
from ..records import SoftOutputRecord
from ..schemes.theory import THEORY_MODULATIONS, default_ebn0_points
from ..vectors.bits import random_bits
from ..vectors.channels import Awgn
from ..verdict import Verdict
from ._table import claimed_table_failed
from .base import Oracle

__all__ = ["PARTS", "mutual_information", "best_scale", "LlrOracle", "ORACLE", "soft_record"]

#: the verdicts of the check, ``llr.<part>``, in order
PARTS = ("sign", "calibration", "mutual_information")


def _nll(scale: float, llr: np.ndarray, sign: np.ndarray) -> float:
    """Mean negative log-likelihood (nats) of the bits under LLRs scaled by ``scale``."""
    return float(np.mean(np.logaddexp(0.0, -scale * sign * llr)))


def mutual_information(llr: np.ndarray, bits: np.ndarray) -> float:
    """Bitwise mutual information estimate, in bits, from LLRs (positive meaning bit 0)."""
    sign = 1.0 - 2.0 * bits
    return float(1.0 - np.mean(np.logaddexp(0.0, -sign * llr)) / math.log(2))


def best_scale(llr: np.ndarray, bits: np.ndarray) -> tuple[float, float]:
    """Maximum-likelihood calibration scale and its standard error (Fisher information)."""
    sign = 1.0 - 2.0 * bits
    res = optimize.minimize_scalar(_nll, bounds=(1e-3, 1e3), args=(llr, sign),
                                   method="bounded", options={"xatol": 1e-6})
    s = float(res.x)
    p = special.expit(s * sign * llr)
    info = float(np.sum(llr ** 2 * p * (1 - p)))
    return s, (1 / math.sqrt(info) if info > 0 else math.inf)


def soft_record(llr: np.ndarray, bits: np.ndarray) -> SoftOutputRecord:
    """Histograms of the LLRs per transmitted bit value, and the calibration curve: in bins of
    the LLR, the log-ratio of bits sent as 0 to bits sent as 1 (positive LLR = bit 0). A
    calibrated demapper's curve lies on the diagonal (common practice: an LLR is calibrated
    when L = log P(b=0 | L) / P(b=1 | L))."""
    finite = np.isfinite(llr)
    x, b = llr[finite], bits[finite]
    lim = float(np.percentile(np.abs(x), 99.5)) if x.size else 1.0
    lim = lim if lim > 0 else 1.0
    edges = np.linspace(-lim, lim, 61)
    h0 = np.histogram(x[b == 0], edges)[0]
    h1 = np.histogram(x[b == 1], edges)[0]
    cal = np.linspace(-lim, lim, 25)
    idx = np.clip(np.digitize(x, cal) - 1, 0, cal.size - 2)
    n0 = np.bincount(idx[b == 0], minlength=cal.size - 1)
    n1 = np.bincount(idx[b == 1], minlength=cal.size - 1)
    keep = (n0 + n1) >= 50  # enough bits in the bin to estimate the ratio
    centres = (cal[:-1] + cal[1:]) / 2
    empirical = np.log((n0 + 0.5) / (n1 + 0.5))
    return {"edges": edges.tolist(), "bit0": h0.tolist(), "bit1": h1.tolist(),
            "centres": centres[keep].tolist(), "empirical": empirical[keep].tolist()}


class LlrOracle(Oracle):
    name = "llr"
    order = 120
    requires = ("demodulate_soft",)
    fresh_vectors = True
    summary = "soft outputs: sign convention, calibration, mutual information vs the reference"
    options = {
        "ebn0_db": Opt("number", None, "Eb/N0 of the test (default: where the reference BER "
                       "is about 1e-2)"),
        "bits": Opt("int", 200_000, "bits sent (1000 to 2^24)", minimum=1000, maximum=1 << 24),
        "scale_tolerance": Opt("number", 0.2, "allowed |s - 1| of the calibration scale",
                               minimum=0, exclusive_minimum=True),
        "mi_tolerance": Opt("number", 0.01, "allowed mutual-information shortfall, in bits per "
                            "bit", minimum=0),
    }

    def verdict_names(self, spec):
        return [f"{self.name}.{part}" for part in PARTS]

    def blocked_by(self, bench):
        return claimed_table_failed(
            bench, "the device's table is not the claimed one, so the reference "
                   "demapper would decode another table")

    def run(self, bench: Bench, opts, rng, seed):
        k, sps = bench.k, bench.sps
        mod = bench.convention.modulation
        ebn0 = opts["ebn0_db"]
        if ebn0 is None:
            ebn0 = (default_ebn0_points(mod, (1e-2,), ring_ratio=bench.convention.ring_ratio)[0]
                    if mod in THEORY_MODULATIONS
                    else 10.0)
        n = opts["bits"] - opts["bits"] % (8 * k)
        bits = random_bits(rng, n)
        tx = bench.transmit(bits)
        # at the device's measured scale: the noise is set for the energy its symbols carry
        # (so Eb/N0 is what the verdicts say), the device is told that noise variance, and the
        # reference demapper sees the same samples at the reference's scale with the noise
        # variance scaled alike — a device whose only defect is its normalisation fails energy,
        # not llr
        scale = bench.scale()
        awgn = Awgn(ebn0, k, sps, nominal_es=scale.es if scale.es > 0 else 1.0)
        rx = awgn.apply(tx, rng)
        nv = awgn.noise_variance()
        llr = bench.device.demodulate_soft(rx, nv, n_bits=n)
        declared = bench.spec.scheme.llr_positive_bit
        if declared == 1:
            llr = -llr  # judge everything in the positive-means-0 convention
        if bench.device.has("modulate"):
            ref = bench.reference.demodulate_soft(bench.reference_waveform(rx, n // k),
                                                  nv / scale.total ** 2, n_symbols=n // k)
        else:
            ref = bench.reference.demodulate_soft(rx, nv, n_symbols=n // k)
        where = f"at Eb/N0 {ebn0:g} dB over {n} bits"
        at_scale = (f" (the device's own scale, {scale.db:+.2f} dB from the reference's)"
                    if abs(scale.db) > 0.1 else "")

        # sign: agreement with the exact reference LLR where the reference is confident
        confident = np.abs(ref) > 1.0
        agree = float(np.mean(np.sign(llr[confident]) == np.sign(ref[confident]))) \
            if confident.any() else math.nan
        soft = soft_record(llr, bits)
        if agree >= 0.9:
            yield Verdict("llr.sign", "pass",
                          f"positive LLR means bit {declared}, as declared: signs agree with "
                          f"the reference demapper on {agree:.1%} of confident bits "
                          f"{where}{at_scale}", statistic=agree, limit=0.9, unit="agreement",
                          seed=seed, details=soft)
        else:
            if agree <= 0.1:
                reason = (f"LLR sign is flipped: a positive LLR means bit {1 - declared}, but "
                          f"the device file declares {declared} (signs disagree with the "
                          f"reference on {1 - agree:.1%} of confident bits {where}{at_scale}); "
                          f"fix the device or set scheme.llr_positive_bit: {1 - declared}")
                details = dict(soft)
            else:
                per_bit = [float(np.mean(np.sign(llr.reshape(-1, k)[:, i]) ==
                                         np.sign(ref.reshape(-1, k)[:, i]))) for i in range(k)]
                reason = (f"LLR signs agree with the reference on only {agree:.1%} of "
                          f"confident bits {where}{at_scale}: some label bits are flipped or "
                          f"reordered (agreement per label bit: "
                          f"{', '.join(f'b{i} {a:.0%}' for i, a in enumerate(per_bit))})")
                details = {**soft, "per_bit_agreement": per_bit}
            yield Verdict("llr.sign", "fail", reason, statistic=agree, limit=0.9,
                          unit="agreement", seed=seed, details=details)
            why = ("not judged because llr.sign failed: calibration and information are "
                   "measured in the declared sign convention")
            for part in PARTS[1:]:
                yield Verdict(f"llr.{part}", "skipped", why, seed=seed)
            return

        s, se = best_scale(llr, bits)
        s_ref, _ = best_scale(ref, bits)
        tol = opts["scale_tolerance"]
        z = 1.96
        interval = (s - z * se, s + z * se)
        details = {"scale": s, "scale_se": se, "reference_scale": s_ref, "ebn0_db": ebn0}
        if abs(s - 1) <= tol:
            yield Verdict("llr.calibration", "pass",
                          f"best-fit LLR scale {s:.3f} (reference demapper {s_ref:.3f}) "
                          f"{where}: within {tol:g} of 1", statistic=s, interval=interval,
                          confidence=0.95, limit=tol, unit="scale", seed=seed, details=details)
        else:
            what = "over-confident" if s < 1 else "under-confident"
            yield Verdict("llr.calibration", "fail",
                          f"LLRs are {what}: the best-fit scale is {s:.3f} (multiply the "
                          f"device's LLRs by it to calibrate; the reference demapper gives "
                          f"{s_ref:.3f}) {where}; allowed {1 - tol:g} to {1 + tol:g}",
                          statistic=s, interval=interval, confidence=0.95, limit=tol,
                          unit="scale", seed=seed, details=details)

        mi = mutual_information(llr, bits)
        mi_ref = mutual_information(ref, bits)
        short = mi_ref - mi
        mtol = opts["mi_tolerance"]
        mdetails = {"mi": mi, "mi_reference": mi_ref, "ebn0_db": ebn0}
        outcome = "pass" if short <= mtol else "fail"
        yield Verdict("llr.mutual_information", outcome,
                      f"bitwise mutual information {mi:.4f} vs {mi_ref:.4f} for the exact "
                      f"reference demapper {where} (shortfall {short:+.4f}, allowed "
                      f"{mtol:g})", statistic=mi, limit=mi_ref - mtol, unit="bit/bit",
                      seed=seed, details=mdetails)


ORACLE = LlrOracle()
