"""Deep BER by importance sampling (``checks.ber.method: importance``): accuracy, speed, risk.

Run: ``python benchmarks/bench_importance.py [coverage|decisions|false-pass|memory ...]``
(all four by default; about 15 minutes on one core). Parts:

1. **coverage**: with the reference device, the weighted estimate at BER 1e-6, 1e-8 and 1e-10
   for BPSK, QPSK, 16QAM and 64QAM (3GPP tables), 100 seeds per point, each on the first two
   blocks of a point (2^17 + 2^18 bits): how often the interval a verdict reports holds the
   exact theory (Proakis and Salehi 4.3; Cho and Yoon 2002 for square QAM), and how often the
   nominal 95 % interval does (its calibration).
2. **decisions**: a correct QPSK device and one with exactly 1 dB of implementation loss (a
   phase error whose exact BER is theory at Eb/N0 - 1 dB) at BER 1e-9, margin 0.5 dB, 95 %
   confidence: the whole check (guard included) on one core, its wall time, and the speed-up
   over plain sampling: the bits the sequential test of plain sampling needs on average
   (Wald's formula) and the fixed-sample size, each timed at the plain rate measured on the
   same device in the same run.
3. **false-pass**: a device exactly at the limit (a phase error costing exactly the 0.5 dB
   margin at QPSK 1e-9), 200 seeds, 95 % confidence: the rate of passes, with its
   Clopper-Pearson interval, against the stated risk (0.05).
4. **memory**: devices whose decisions use the previous or the next symbol's residual noise,
   20 seeds each: how often anything passes (must be never).
"""

from __future__ import annotations

import importlib.util
import math
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from modemverify.adapters.python import PythonAdapter  # noqa: E402
from modemverify.bench import open_bench  # noqa: E402
from modemverify.blocks import BlockJob, run_block  # noqa: E402
from modemverify.config import parse_device  # noqa: E402
from modemverify.oracles import ORACLES  # noqa: E402
from modemverify.runner import check_object  # noqa: E402
from modemverify.schemes.conventions import get_convention  # noqa: E402
from modemverify.schemes.theory import ber, ebn0_for_ber  # noqa: E402
from modemverify.selftest.operators import phase_for_loss  # noqa: E402
from modemverify.stats import (  # noqa: E402
    WeightedTally,
    clopper_pearson,
    expected_sample_size,
    look_risk,
    fixed_sample_size,
    weighted_interval,
)

_spec = importlib.util.spec_from_file_location(
    "importance_devices", ROOT / "tests" / "unit" / "devices" / "importance.py")
devices = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(devices)


def reference_bench(mod):
    return open_bench(parse_device({"name": "bench", "adapter": "reference",
                                    "scheme": {"modulation": mod, "convention": "3gpp"}}))


def coverage(seeds=100):
    print("1. coverage of exact theory by the interval a verdict decided at its first look "
          "reports (a check of the three points, familywise risk 0.05: confidence "
          f"{1 - 2 * look_risk(0.05 / 3, 1):.4f}), and by the nominal 95 % interval (the "
          "calibration); reference device, 100 seeds")
    print(f"   {'mod':6} {'BER':>7} {'covered':>8} {'at 95 %':>13} "
          f"{'median rel. half-width':>23} {'median ESS':>11}")
    worst = 1.0
    for mod in ("bpsk", "qpsk", "16qam", "64qam"):
        bench = reference_bench(mod)
        k = bench.k
        for target in (1e-6, 1e-8, 1e-10):
            x = float(ebn0_for_ber(mod, target))
            exact = float(ber(mod, x))
            hits, hits95, widths, ess = 0, 0, [], []
            for seed in range(seeds):
                tally = WeightedTally()
                for i, (off, n) in enumerate(((0, 1 << 17), (1 << 17, 1 << 18))):
                    n -= n % (8 * k)
                    job = BlockJob("ber", f"coverage {mod} {target:g}", i, off, n, seed, x,
                                   method="importance")
                    tally = tally.add(run_block(bench, job).tally)
                # the interval a verdict decided at its first look reports, in the default
                # configuration of a check of these three points (familywise: risk 0.05 / 3)
                ci = weighted_interval(tally, 1 - 2 * look_risk(0.05 / 3, 1))
                hits += ci.low <= exact <= ci.high
                nominal = weighted_interval(tally, 0.95)
                hits95 += nominal.low <= exact <= nominal.high
                widths.append((ci.high - ci.low) / 2 / exact)
                ess.append(tally.ess)
            worst = min(worst, hits / seeds)
            print(f"   {mod:6} {target:7.0e} {hits:>5}/{seeds} {hits95:>10}/{seeds} "
                  f"{np.median(widths):>22.3f} {np.median(ess):>11.0f}")
    print(f"   lowest coverage {100 * worst:.0f} % (target: at least 95 % per point)")


def _only_ber(x, **opts):
    # every other check off: the figures are the BER check's alone
    off = {name: False for name in ORACLES if name != "ber"}
    return {**off, "ber": {"method": "importance", "ebn0_db": [x], **opts}}


def _verdicts(device, x, seed=1, **opts):
    r = check_object(device, modulation="qpsk", convention="3gpp", seed=seed,
                     checks=_only_ber(x, **opts))
    return {v.name: v for v in r.verdicts if v.name.startswith("ber")}


def plain_rate(device, x, bits=1 << 22):
    """Bits per second of plain sampling on ``device`` at ``x`` dB (the same blocks the check
    sends, in this process)."""
    spec = parse_device({"name": "rate", "adapter": "python", "target": "<object>:x",
                         "scheme": {"modulation": "qpsk", "convention": "3gpp"}})
    bench = open_bench(spec, adapter=PythonAdapter(device))
    t = time.perf_counter()
    done = 0
    for i in range(8):
        n = bits // 8
        run_block(bench, BlockJob("ber", "rate", i, done, n, 1, x, precision="float32"))
        done += n
    return done / (time.perf_counter() - t)


def decisions():
    print("2. QPSK at BER 1e-9, margin 0.5 dB, 95 % confidence, one core")
    x = round(float(ebn0_for_ber("qpsk", 1e-9)), 2)
    p0, p1 = float(ber("qpsk", x)), float(ber("qpsk", x - 0.5))
    points = get_convention("3gpp", "qpsk").points
    deg = math.degrees(phase_for_loss("qpsk", points, x, 1.0))
    asn = max(expected_sample_size(p0, p0, p1, 0.05, 0.05),
              expected_sample_size(p1, p0, p1, 0.05, 0.05))
    fixed = fixed_sample_size(p0, p1, 0.05, 0.05)
    for label, dev in (("correct", devices.Modem("qpsk")),
                       ("1 dB loss", devices.Rotated("qpsk", deg))):
        rate = plain_rate(dev, x)
        t = time.perf_counter()
        v = _verdicts(dev, x)
        took = time.perf_counter() - t
        point = v[f"ber.ebn0={x:g}dB"]
        guard = v["ber.importance_guard"]
        d = point.details
        print(f"   {label:9}: {point.outcome} in {took:.1f} s (guard {guard.outcome}); "
              f"estimate {point.statistic:.3g} [{point.interval[0]:.3g}, "
              f"{point.interval[1]:.3g}], {d['bits']:.3g} bits in {d['device_calls']} calls, "
              f"ESS {d['ess']:.0f}")
        print(f"   {'':9}  plain sampling: {asn:.3g} bits on average for the sequential test "
              f"({asn / rate:.3g} s at the measured {rate:.3g} bit/s), {fixed:.3g} fixed; "
              f"{d['plain_bits_same_width']:.3g} bits for this interval width: "
              f"{d['speedup']:.3g} times the bits; wall-time speed-up over the sequential "
              f"test {asn / rate / took:.3g}")


def false_pass(seeds=200):
    print(f"3. a device exactly at the limit (QPSK 1e-9, 0.5 dB), {seeds} seeds, risk 0.05")
    x = round(float(ebn0_for_ber("qpsk", 1e-9)), 2)
    deg = math.degrees(phase_for_loss("qpsk", get_convention("3gpp", "qpsk").points, x, 0.5))
    outcomes = []
    t = time.perf_counter()
    for seed in range(seeds):
        v = _verdicts(devices.Rotated("qpsk", deg), x, seed=seed, max_bits=1e6)
        outcomes.append(v[f"ber.ebn0={x:g}dB"].outcome)
    passes = outcomes.count("pass")
    ci = clopper_pearson(passes, seeds, 0.95)
    print(f"   pass {passes}, fail {outcomes.count('fail')}, inconclusive "
          f"{outcomes.count('inconclusive')} ({time.perf_counter() - t:.0f} s)")
    print(f"   false-pass rate {passes / seeds:.3f}, 95 % interval [{ci.low:.3f}, "
          f"{ci.high:.3f}] against the stated 0.05")


def memory(seeds=20):
    print(f"4. devices with memory across symbols, {seeds} seeds each")
    x = round(float(ebn0_for_ber("qpsk", 1e-9)), 2)
    for label, make in (("previous symbol", lambda: devices.Feedback("qpsk", 0.3)),
                        ("next symbol", lambda: devices.Lookahead("qpsk", 0.3)),
                        ("previous, weak", lambda: devices.Feedback("qpsk", 0.05))):
        outs = []
        for seed in range(seeds):
            v = _verdicts(make(), x, seed=seed)
            outs.append((v["ber.importance_guard"].outcome, v[f"ber.ebn0={x:g}dB"].outcome))
        guard_caught = sum(o[0] == "inconclusive" for o in outs)
        points = [o[1] for o in outs]
        print(f"   {label:16}: guard caught {guard_caught}/{seeds}; point: pass "
              f"{points.count('pass')}, fail {points.count('fail')}, inconclusive "
              f"{points.count('inconclusive')}")


PARTS = {"coverage": coverage, "decisions": decisions, "false-pass": false_pass,
         "memory": memory}

if __name__ == "__main__":
    for name in sys.argv[1:] or PARTS:
        PARTS[name]()
