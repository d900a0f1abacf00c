"""``alignment``: how the device's waveform lines up with the reference of the same bits.

Measured once (on a PRBS15 probe) and applied before the other checks judge a waveform, so
that mapping, roundtrip, EVM and BER work on shaped outputs at any samples per symbol. The
verdict reports the delay (integer and fractional), gain, phase and frequency offset. It fails
when the device needs a correction the device file forbids (``scheme.alignment``), or when the
waveform does not resemble the reference at all. A rotation by a whole symmetry step of the
constellation (90 degrees for square QAM) is not corrected: it is indistinguishable from a
relabelling, and the mapping check names it.
"""

from __future__ import annotations

import numpy as np

from ..bench import measure_alignment
from ..options import Opt
from ..schemes.rules import rule_family
from ..verdict import Verdict
from .base import Oracle

__all__ = ["AlignmentOracle", "ORACLE"]


class AlignmentOracle(Oracle):
    name = "alignment"
    order = 30
    requires = ("modulate",)
    summary = "delay, gain, phase and frequency offset of the waveform against the reference"
    options = {
        "min_correlation": Opt("number", 0.9, "least correlation with the reference after "
                               "alignment", minimum=0, maximum=1),
        "delay_tolerance": Opt("number", 0.05, "largest delay (samples) when delay correction "
                               "is off", minimum=0),
        "phase_tolerance_deg": Opt("number", 1.0, "largest phase when phase correction is off",
                                   minimum=0),
        "frequency_tolerance": Opt("number", 1e-5, "largest frequency offset (cycles/sample) "
                                   "when frequency correction is off", minimum=0),
    }

    def applies(self, bench):
        if not bench.spec.scheme.shaped:
            return "one sample per symbol and no pulse: symbols are judged as they come"
        return None

    def run(self, bench, opts, rng, seed):
        scheme = bench.spec.scheme
        applied = bench.alignment()
        if applied is None:  # every correction forbidden: measure anyway, to judge it

            everything = {"delay": True, "phase": True, "frequency": True}
            measured = measure_alignment(bench, everything).measured
            phase = float(np.degrees(np.angle(measured.gain))) if measured.gain else 0.0
            allowed = dict(scheme.alignment)
        else:
            measured, phase, allowed = applied.measured, applied.phase_deg, applied.allowed
        sps = bench.sps
        d = measured.delay_samples
        f = measured.freq_offset
        gain_db = 20 * np.log10(abs(measured.gain)) if measured.gain else -np.inf
        details = {"delay_samples": d, "delay_symbols": d / sps, "gain_db": gain_db,
                   "phase_deg": phase, "freq_offset_cycles_per_sample": f,
                   "freq_offset_rs": f * sps, "correlation": measured.correlation,
                   "residual_evm_percent": measured.residual_evm, "allowed": allowed}
        if applied is not None:
            details["applied_phase_deg"] = applied.applied_phase_deg
            details["symmetry_deg"] = applied.symmetry_deg
        text = (f"delay {d:+.3f} samples ({d / sps:+.3f} symbols), gain {gain_db:+.2f} dB, "
                f"phase {phase:+.2f} deg, frequency offset {f * sps:+.2e} Rs; correlation "
                f"{measured.correlation:.4f}, residual {measured.residual_evm:.2f} %")
        problems = []
        if not allowed["delay"] and abs(d) > opts["delay_tolerance"]:
            problems.append(f"a delay of {d:+.3f} samples, but scheme.alignment.delay is false")
        if not allowed["phase"] and abs(phase) > opts["phase_tolerance_deg"]:
            problems.append(f"a phase of {phase:+.2f} deg, but scheme.alignment.phase is false")
        if not allowed["frequency"] and abs(f) > opts["frequency_tolerance"]:
            problems.append(f"a frequency offset of {f:+.2e} cycles/sample, but "
                            f"scheme.alignment.frequency is false")
        if measured.correlation < opts["min_correlation"]:
            problems.append(f"the waveform correlates with the reference of the same bits only "
                            f"{measured.correlation:.3f} (at least {opts['min_correlation']:g} "
                            f"expected): " + _arm_delay(bench, opts["min_correlation"]))
        if problems:
            return [Verdict(self.name, "fail", "; ".join(problems) + f" ({text})",
                            statistic=measured.correlation, limit=opts["min_correlation"],
                            unit="correlation", seed=seed, details=details)]
        left = ""
        if applied is not None and abs(applied.phase_deg - applied.applied_phase_deg) > 1e-6:
            left = (f"; the remaining {applied.phase_deg - applied.applied_phase_deg:+.0f} deg is "
                    f"a whole symmetry step, left for the mapping check")
        return [Verdict(self.name, "pass", f"aligned and reported: {text}{left}",
                        statistic=measured.correlation, limit=opts["min_correlation"],
                        unit="correlation", seed=seed, details=details)]


def _arm_delay(bench, least: float) -> str:
    """Why the waveform may not be the reference's: a Q arm delayed otherwise than the claimed
    scheme says, when the waveform read that way (``Bench.read_as``) lines up; else the
    general causes."""
    for rule, found in rule_family(bench.convention.rule):
        other = bench.read_as(rule)
        if other is bench:
            continue
        applied = other.alignment()
        if applied is not None and applied.measured.correlation >= least:
            return (f"{found} (read that way it correlates "
                    f"{applied.measured.correlation:.3f})")
    return "another pulse, sample rate or mapping"


ORACLE = AlignmentOracle()
