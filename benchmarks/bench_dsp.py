"""Speed of the waveform building blocks (run: python benchmarks/bench_dsp.py).

On 10**6 shaped samples (125 000 RRC-shaped QPSK symbols, roll-off 0.35, 8 samples/symbol, span
10 symbols) times, best of ``--reps`` runs (the least disturbed one):

1. pulse shaping (``PulseShape.shape_symbols``);
2. matched filtering and symbol sampling (``PulseShape.matched_filter``);
3. the spectrum check: ``welch_psd`` + ``occupied_bandwidth`` + ``mask_check``;
4. alignment of a delayed, rotated copy: ``estimate_alignment`` + ``apply_alignment``, with the
   default full delay search and with ``max_delay=256``;
5. ``evm`` on the matched-filter output.

The target is well under a second in total on one core.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

# One core: keep BLAS/FFT thread pools from spreading (set before numpy loads).
for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(var, "1")

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from modemverify.dsp.align import apply_alignment, estimate_alignment  # noqa: E402
from modemverify.dsp.evm import evm  # noqa: E402
from modemverify.dsp.psd import mask_check, occupied_bandwidth, welch_psd  # noqa: E402
from modemverify.dsp.pulses import PulseShape  # noqa: E402

# A loose mask that RRC alpha = 0.35 meets (its raised cosine is -9.6 dBc at 0.6 Rs and 0 from
# 0.675 Rs; the span-10 truncation sidelobes sit near -45 dBc).
MASK = [(0.0, 1.0), (0.45, 1.0), (0.6, -6.0), (0.75, -35.0), (1.0, -40.0)]


def best_of(reps: int, fn):
    best, out = np.inf, None
    for _ in range(reps):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=10 ** 6)
    ap.add_argument("--reps", type=int, default=5)
    args = ap.parse_args(argv)

    sps = 8
    n_sym = args.samples // sps
    rng = np.random.default_rng(2024)
    sym = ((2 * rng.integers(0, 2, n_sym) - 1) + 1j * (2 * rng.integers(0, 2, n_sym) - 1)) \
        / np.sqrt(2)
    pulse = PulseShape("rrc", sps, rolloff=0.35, span=10)

    rows = []
    t, x = best_of(args.reps, lambda: pulse.shape_symbols(sym))
    rows.append(("shape_symbols", t))
    t, y = best_of(args.reps, lambda: pulse.matched_filter(x, n_sym))
    rows.append(("matched_filter", t))

    def spectrum():
        f, p = welch_psd(x, sps)
        return occupied_bandwidth(f, p), mask_check(f, p, MASK)

    t, (obw, mask) = best_of(args.reps, spectrum)
    rows.append(("welch_psd + occupied_bandwidth + mask_check", t))

    device = np.concatenate([np.zeros(37), 0.9 * np.exp(0.4j) * x])

    def align(max_delay):
        a = estimate_alignment(device, x, max_delay=max_delay)
        return a, apply_alignment(device, a, x.size)

    t_full, (a, _) = best_of(args.reps, lambda: align(None))
    rows.append(("estimate_alignment + apply_alignment (full search)", t_full))
    t_win, _ = best_of(args.reps, lambda: align(256))
    rows.append(("estimate_alignment + apply_alignment (max_delay=256)", t_win))
    t, r = best_of(args.reps, lambda: evm(y, sym))
    rows.append(("evm", t))

    print(f"{x.size} samples ({n_sym} RRC-shaped QPSK symbols, alpha 0.35, {sps} sps, "
          f"span 10); best of {args.reps}")
    width = max(len(name) for name, _ in rows)
    for name, t in rows:
        print(f"  {name:<{width}}  {1e3 * t:8.1f} ms")
    total = sum(t for name, t in rows if "max_delay" not in name)
    print(f"  {'total (full search)':<{width}}  {1e3 * total:8.1f} ms")
    print(f"check: OBW {obw[0]:.4f} Rs, mask {'pass' if mask.passed else 'FAIL'} "
          f"(margin {mask.worst_margin_db:.1f} dB), delay {a.delay_samples:.4f}, "
          f"|gain| {abs(a.gain):.4f}, EVM {r.rms_percent:.2f} %")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
