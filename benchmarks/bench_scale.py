"""BER campaigns at scale: speed ratios, workers, a Dask LocalCluster, memory and overhead.

Run: ``python benchmarks/bench_scale.py`` (about 3 minutes on 2 cores; needs the cluster
extra for the LocalCluster line). Every figure is a ratio of two rates measured in the same
run, interleaved, with the median over repetitions reported (the machine is shared and noisy):

1. the QPSK BER check path with the reference device against numpy's float64 normal-draw
   rate (one normal per QPSK bit is the practical ceiling), with the default float32 noise
   and with float64 noise forced;
2. the RRC-shaped QPSK path at 8 samples per symbol against (normal rate / 8), beside a plain
   scipy loop (upfirdn shaping, noise, matched filter, slicing) measured the same way;
3. a device-bound run (the demo's Python 16QAM port, whose demodulator searches all 16
   points) on 2 worker processes against 1, and on a Dask LocalCluster of 2 against the pool;
4. peak traced memory of the check as max_bits grows;
5. the harness's overhead with the demo's Python device: wall time outside the device's own
   calls and the noise draw, as a fraction of those.
"""

from __future__ import annotations

import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np
from scipy import signal

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from modemverify.config import load_device, parse_device  # noqa: E402
from modemverify.dsp.pulses import PulseShape  # noqa: E402
from modemverify.execution import Execution, dask_available  # noqa: E402
from modemverify.runner import check  # noqa: E402

DEMO = Path(__file__).resolve().parents[1] / "modemverify" / "demo" / "tern_modems.py"


def normal_rate(n=1 << 22) -> float:
    out = np.empty(n)
    rng = np.random.default_rng(0)
    t = time.perf_counter()
    rng.standard_normal(out=out)
    return n / (time.perf_counter() - t)


def reference(mod="qpsk", sps=1, pulse=None, **ber):
    scheme = {"modulation": mod, "convention": "3gpp", "samples_per_symbol": sps}
    if pulse:
        scheme["pulse"] = pulse
    return parse_device({"name": "bench", "adapter": "reference", "scheme": scheme,
                         "checks": {"ber": {"familywise": False, **ber}}})


def check_rate(spec, **kw) -> float:
    t = time.perf_counter()
    res = check(spec, only=["ber"], **kw)
    took = time.perf_counter() - t
    return sum(v.details["bits"] for v in res.verdicts) / took


def scipy_rrc_rate(bits=1 << 21, sps=8) -> float:
    """A plain scipy loop: map, upfirdn shaping, noise, matched filter, sample, slice."""
    taps = PulseShape("rrc", sps, rolloff=0.35, span=10).taps
    rng = np.random.default_rng(1)
    t = time.perf_counter()
    done = 0
    while done < bits:
        b = rng.integers(0, 2, 1 << 17, dtype=np.uint8).reshape(-1, 2)
        sym = ((1 - 2.0 * b[:, 0]) + 1j * (1 - 2.0 * b[:, 1])) / np.sqrt(2)
        x = signal.upfirdn(taps, sym, up=sps)
        x = x + 0.1 * (rng.standard_normal(x.size) + 1j * rng.standard_normal(x.size))
        y = signal.upfirdn(taps[::-1].conj(), x, down=sps)[(taps.size - 1) // sps:][:sym.size]
        np.stack([y.real < 0, y.imag < 0], axis=1)
        done += b.size
    return done / (time.perf_counter() - t)


def demo_device(tmp: Path, max_bits: float) -> Path:
    p = tmp / "tern-16qam-bench.yaml"
    p.write_text(f"name: tern-16qam-bench\nadapter: python\ntarget: {DEMO}:TernModem\n"
                 f"params: {{modulation: 16qam}}\n"
                 f"scheme: {{modulation: 16qam, convention: 3gpp}}\n"
                 f"checks: {{ber: {{ebn0_db: [10], margin_db: 1e-4, max_bits: {max_bits:g}}}}}\n")
    return p


def main() -> int:
    reps = 7
    never = dict(ebn0_db=[6.0], margin_db=1e-4, max_bits=2 ** 24)  # never decides: full budget
    r32, r64 = [], []
    for _ in range(reps):
        n = normal_rate()
        r32.append(check_rate(reference(**never)) / n)
        n = normal_rate()
        r64.append(check_rate(reference(noise="float64", **never)) / n)
    print(f"1. QPSK BER check path, reference device, / numpy float64 normal rate: median "
          f"{np.median(r32):.2f} with float32 noise (target >= 0.85; per repetition "
          f"{', '.join(f'{x:.2f}' for x in r32)}), {np.median(r64):.2f} with float64 noise")

    rrc = dict(pulse={"shape": "rrc", "rolloff": 0.35, "span": 10})
    rr, sc = [], []
    for _ in range(5):
        n = normal_rate()
        rr.append(check_rate(reference(sps=8, ebn0_db=[6.0], margin_db=1e-4,
                                       max_bits=2 ** 21, **rrc)) / (n / 8))
        n = normal_rate()
        sc.append(scipy_rrc_rate() / (n / 8))
    print(f"2. RRC QPSK, 8 samples/symbol, / (normal rate / 8): median {np.median(rr):.2f} "
          f"(target >= 0.45); a plain scipy upfirdn loop: median {np.median(sc):.2f}")

    tmp = Path("/tmp") / "modemverify-bench-scale"
    tmp.mkdir(exist_ok=True)
    # 2^27 bits: about 7 s on one worker. The workers' start-up (a fresh interpreter that
    # imports numpy and opens the device) is measured apart, on a one-block run, and the
    # steady-state figure takes it out: a campaign at 1e-6 and below runs for minutes.
    spec = load_device(demo_device(tmp, 2 ** 27))
    short = load_device(demo_device(tmp, 2 ** 17))
    one, two, dask, start2, startd = [], [], [], [], []
    for _ in range(3):
        t = time.perf_counter()
        check(short, only=["ber"])
        base = time.perf_counter() - t
        t = time.perf_counter()
        check(short, only=["ber"], execution=Execution(workers=2))
        start2.append(time.perf_counter() - t - base)
        one.append(check_rate(spec))
        two.append(check_rate(spec, execution=Execution(workers=2)))
        if dask_available():
            t = time.perf_counter()
            check(short, only=["ber"], execution=Execution(workers=2, cluster="local"))
            startd.append(time.perf_counter() - t - base)
            dask.append(check_rate(spec, execution=Execution(workers=2, cluster="local")))
    bits = 2 ** 27
    t1, t2 = bits / np.median(one), bits / np.median(two)
    speed = t1 / t2
    steady = t1 / max(t2 - np.median(start2), 1e-9)
    print(f"3. device-bound run (demo 16QAM Python port, 2^27 bits): 1 worker "
          f"{np.median(one) / 1e6:.2f} Mbit/s ({t1:.1f} s), 2 workers "
          f"{np.median(two) / 1e6:.2f} Mbit/s ({t2:.1f} s): {speed:.2f}x with the start-up, "
          f"{steady:.2f}x without the pool's start-up of {np.median(start2):.1f} s "
          f"(target >= 1.8x)")
    if dask:
        td = bits / np.median(dask)
        print(f"   Dask LocalCluster of 2: {np.median(dask) / 1e6:.2f} Mbit/s ({td:.1f} s) = "
              f"{np.median(dask) / np.median(two):.2f} of the local pool with both start-ups, "
              f"{(t2 - np.median(start2)) / (td - np.median(startd)):.2f} without them "
              f"(cluster start-up {np.median(startd):.1f} s; target >= 0.8)")

    for mb in (2 ** 22, 2 ** 24, 2 ** 26):
        tracemalloc.start()
        check(reference(**{**never, "max_bits": mb}), only=["ber"])
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        print(f"4. max_bits={mb:>9}: peak traced memory {peak / 2 ** 20:.1f} MiB")

    spec = load_device(demo_device(tmp, 2 ** 23))
    over = []
    for _ in range(3):
        t = time.perf_counter()
        res = check(spec, only=["ber"])
        total = time.perf_counter() - t
        bits = res.verdicts[0].details["bits"]
        rng = np.random.default_rng(0)
        buf = np.empty((1 << 19) // 4 * 2, dtype=np.float32)
        t = time.perf_counter()
        for _ in range(bits // (1 << 19)):
            rng.standard_normal(out=buf, dtype=np.float32)
        noise = time.perf_counter() - t
        over.append((total - res.device_time_s - noise) / (res.device_time_s + noise))
    print(f"5. harness overhead with the demo's Python device: median "
          f"{100 * np.median(over):.1f} % of device + noise time (target <= 10 %)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
