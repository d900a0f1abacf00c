"""Speed and memory of the BER check (issue figures; run: python benchmarks/bench_ber.py).

Measures, in one run so that the machine's drift affects both alike:

1. the rate at which numpy's default generator draws standard normals (QPSK needs one normal
   per bit, so that rate is the practical ceiling of a QPSK BER run);
2. the bit rate of the full ``ber`` check path (bits, device calls through the guard, channel,
   error counting, sequential test) with the built-in reference device, Gray QPSK, 1 sample per
   symbol, with a margin so small that the test never decides and runs its whole budget;
3. the harness overhead with a realistic Python device (the demo's 16QAM port, whose
   demodulator searches all 16 points): time outside the device's own calls and the noise;
4. the average number of bits the sequential test needs, at bit granularity, for QPSK at BER
   1e-5 with a 0.5 dB margin and 5 % risks, against the fixed-sample size;
5. peak traced memory as max_bits grows.

Best of several repetitions is reported for the rates (the least disturbed run).
"""

from __future__ import annotations

import argparse
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from modemverify.adapters.python import PythonAdapter  # noqa: E402
from modemverify.config import parse_device  # noqa: E402
from modemverify.runner import check  # noqa: E402
from modemverify.schemes.theory import ber as theory_ber, ebn0_for_ber  # noqa: E402
from modemverify.stats import fixed_sample_size  # noqa: E402


def spec(mod="qpsk", **ber):
    return parse_device({"name": "bench", "adapter": "reference",
                         "scheme": {"modulation": mod, "convention": "3gpp"},
                         "checks": {"ber": {"familywise": False, **ber}}})


def normal_rate(n=1 << 22, reps=3) -> float:
    rng = np.random.default_rng(0)
    out = np.empty(n)
    best = np.inf
    for _ in range(reps):
        t = time.perf_counter()
        rng.standard_normal(out=out)
        best = min(best, time.perf_counter() - t)
    return n / best


def ber_rate(s, only=("ber",), adapter=None) -> tuple[float, object]:
    t = time.perf_counter()
    res = check(s, only=list(only), adapter=adapter)
    took = time.perf_counter() - t
    v = res.verdicts[0]
    return v.details["bits"] / took, res


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--bits", type=float, default=2 ** 25, help="bits per rate run")
    ap.add_argument("--reps", type=int, default=5)
    ap.add_argument("--asn-runs", type=int, default=60)
    args = ap.parse_args()

    # 1-2: reference QPSK vs normal rate, interleaved
    never = spec(ebn0_db=[6.0], margin_db=1e-4, max_bits=args.bits)
    rn, rb = [], []
    for _ in range(args.reps):
        rn.append(normal_rate())
        rb.append(ber_rate(never)[0])
    ratios = [b / n for b, n in zip(rb, rn)]
    print(f"normals drawn: best {max(rn) / 1e6:.1f} M/s")
    print(f"QPSK BER check path, reference device: best {max(rb) / 1e6:.1f} Mbit/s; "
          f"ratio to the normal rate per repetition: "
          f"{', '.join(f'{r:.2f}' for r in ratios)} (best {max(ratios):.2f}, "
          f"median {np.median(ratios):.2f})")
    for blk in (1 << 15, 1 << 16, 1 << 18, 1 << 19):
        r = max(ber_rate(spec(ebn0_db=[6.0], margin_db=1e-4, max_bits=2 ** 24,
                              block_bits=blk))[0] for _ in range(3))
        print(f"  block_bits={blk}: {r / 1e6:.1f} Mbit/s ({r / max(rn):.2f} of the normal rate)")

    # 2b: RRC-shaped QPSK at 8 samples per symbol (16 normals per symbol, 8 per bit)
    rrc = parse_device({"name": "bench-rrc", "adapter": "reference",
                        "scheme": {"modulation": "qpsk", "convention": "3gpp",
                                   "samples_per_symbol": 8,
                                   "pulse": {"shape": "rrc", "rolloff": 0.35, "span": 10}},
                        "checks": {"ber": {"familywise": False, "ebn0_db": [6.0],
                                           "margin_db": 1e-4, "max_bits": 2 ** 22}}})
    rr, nn = [], []
    for _ in range(3):
        nn.append(normal_rate())
        rr.append(ber_rate(rrc)[0])
    ratios8 = [r / (n / 8) for r, n in zip(rr, nn)]
    print(f"RRC QPSK, 8 samples/symbol, reference device: best {max(rr) / 1e6:.2f} Mbit/s; "
          f"ratio to (normal rate / 8): {', '.join(f'{r:.2f}' for r in ratios8)} "
          f"(target >= 0.4)")

    # 3: overhead with a realistic device
    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "modemverify" / "demo"))
    from tern_modems import TernModem  # noqa: E402

    s16 = spec("16qam", ebn0_db=[10.0], margin_db=1e-4, max_bits=2 ** 22)
    rng = np.random.default_rng(0)
    for label, dev in (("demo 16QAM port (Python, nearest-point demodulator)",
                        TernModem("16qam")),):
        t = time.perf_counter()
        res = check(s16, only=["ber"], adapter=PythonAdapter(dev))
        total = time.perf_counter() - t
        bits = res.verdicts[0].details["bits"]
        t = time.perf_counter()
        out = np.empty(bits // 4 * 2)
        for _ in range(bits // (1 << 17)):
            rng.standard_normal(out=out[: (1 << 17) // 4 * 2])
        noise = time.perf_counter() - t
        dev_t = res.device_time_s
        overhead = total - dev_t - noise
        print(f"{label}: total {total:.2f} s for {bits:.3g} bits; device calls {dev_t:.2f} s, "
              f"noise {noise:.2f} s; harness {overhead:.3f} s = "
              f"{100 * overhead / (dev_t + noise):.1f} % of device + noise")

    # 4: average sample number at BER 1e-5, 0.5 dB margin, alpha = beta = 0.05
    x = float(ebn0_for_ber("qpsk", 1e-5))
    p0, p1 = float(theory_ber("qpsk", x)), float(theory_ber("qpsk", x - 0.5))
    fixed = fixed_sample_size(p0, p1, 0.05, 0.05, method="exact")
    used = []
    for seed in range(args.asn_runs):
        res = check(spec(ebn0_db=[x], margin_db=0.5, confidence=0.95, max_bits=5e7),
                    only=["ber"], seed=seed)
        used.append(res.verdicts[0].details["decided_after_bits"])
    used = np.array(used)
    print(f"SPRT at theory (BER 1e-5, Eb/N0 {x:.3f} dB): mean {used.mean():.4g} bits over "
          f"{args.asn_runs} runs = {used.mean() / fixed:.3f} x the fixed-sample size "
          f"{fixed:.4g} (Wald's formula 0.559 x)")
    from modemverify.oracles.base import Oracle  # noqa: F401  (the at-limit device below)

    class AtLimit:
        def __init__(self, seed):
            from modemverify.schemes.conventions import get_convention
            from modemverify.schemes.reference import ReferenceModem

            self.m = ReferenceModem(get_convention("3gpp", "qpsk"))
            n0 = 0.5 / 10 ** (x / 10)
            n0w = 0.5 / 10 ** ((x - 0.5) / 10)
            self.extra = np.sqrt((n0w - n0) / 2)
            self.rng = np.random.default_rng(seed + 1000)

        def modulate(self, bits):
            return self.m.modulate(bits)

        def demodulate(self, y):
            y = y + self.extra * (self.rng.standard_normal(y.size)
                                  + 1j * self.rng.standard_normal(y.size))
            return self.m.demodulate(y)

    used1 = []
    for seed in range(args.asn_runs):
        res = check(parse_device({"name": "lim", "adapter": "python", "target": "x:y",
                                  "scheme": {"modulation": "qpsk", "convention": "3gpp"},
                                  "checks": {"ber": {"ebn0_db": [x], "familywise": False,
                                                     "max_bits": 5e7}}}),
                    only=["ber"], seed=seed, adapter=PythonAdapter(AtLimit(seed)))
        used1.append(res.verdicts[0].details["decided_after_bits"])
    used1 = np.array(used1)
    print(f"SPRT at the limit (0.5 dB worse): mean {used1.mean():.4g} bits = "
          f"{used1.mean() / fixed:.3f} x the fixed-sample size (Wald's formula 0.396 x)")

    # 5: memory as max_bits grows
    for mb in (2 ** 22, 2 ** 24, 2 ** 26):
        tracemalloc.start()
        check(spec(ebn0_db=[6.0], margin_db=1e-4, max_bits=mb), only=["ber"])
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        print(f"max_bits={mb:>9}: peak traced memory {peak / 2 ** 20:.1f} MiB")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
