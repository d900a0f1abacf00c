"""``fixed_point``: clipping and quantisation of a device whose samples are integers.

For a device that exchanges int16 (Q15) or int8 (Q7) samples (``sample_format``), on a long
random probe:

- ``fixed_point.clipping``: the fraction of output samples whose I or Q sits on a rail of the
  format (the most positive or most negative code) — a saturating datapath or a full scale
  set too low;
- ``fixed_point.sqnr``: signal-to-quantisation-noise ratio of the device's output against the
  floating-point reference waveform of the same bits, after alignment and a least-squares
  gain. An ideal b-bit rounding quantiser gives about 6.02 b + 1.76 dB less the signal's
  crest factor and back-off (common practice); the defaults (40 dB for int16, 20 dB for int8)
  are rough floors — set ``min_sqnr_db`` from your design.
"""

from __future__ import annotations

import numpy as np

from ..dsp.formats import SAMPLE_FORMATS, clip_count, encode_samples, sqnr_db
from ..options import Opt
from ..vectors.bits import random_bits
from ..verdict import Verdict
from .base import Oracle

__all__ = ["DEFAULT_MIN_SQNR_DB", "FixedPointOracle", "ORACLE"]

DEFAULT_MIN_SQNR_DB = {"int16": 40.0, "int8": 20.0}


def _format_of(bench):
    x = bench.spec.extra
    fmt = x.get("sample_format", "complex128")
    fmt = {"float32": "complex64"}.get(fmt, fmt)
    return fmt, float(x.get("full_scale", 1.0))


class FixedPointOracle(Oracle):
    name = "fixed_point"
    order = 100
    requires = ("modulate",)
    summary = "integer-sample devices: clipping at the rails and SQNR against the reference"
    fresh_vectors = True
    options = {
        "symbols": Opt("int", 8192, "symbols in the probe (256 to 2^20)", minimum=256,
                       maximum=1 << 20),
        "max_clipped": Opt("number", 1e-3, "largest fraction of samples at a rail", minimum=0,
                           maximum=1),
        "min_sqnr_db": Opt("number", None, "least SQNR in dB (default 40 for int16, 20 for "
                           "int8)"),
    }

    def verdict_names(self, spec):
        return [f"{self.name}.clipping", f"{self.name}.sqnr"]

    def applies(self, bench):
        fmt, _ = _format_of(bench)
        if not fmt.startswith("int"):
            return f"the device's samples are {fmt}, not fixed point"
        return None

    def run(self, bench, opts, rng, seed):
        fmt, full_scale = _format_of(bench)
        k, n = bench.k, opts["symbols"]
        bits = random_bits(rng, n * k)
        raw = bench.device.modulate(bits)
        # the device's codes again (its samples are code x full_scale / 2**(bits-1))
        clipped = clip_count(encode_samples(raw, fmt, full_scale), fmt)
        frac = clipped / max(raw.size, 1)
        out = []
        peak = float(np.max(np.abs(raw.view(np.float64)))) / full_scale if raw.size else 0.0
        text = (f"{clipped} of {raw.size} samples ({frac:.2e}) at the rails of {fmt} "
                f"(full scale {full_scale:g}); peak |I|, |Q| at {peak:.1%} of full scale")
        ok = frac <= opts["max_clipped"]
        out.append(Verdict(f"{self.name}.clipping", "pass" if ok else "fail",
                           text + ("" if ok else ": the datapath saturates, or full_scale is "
                                   "set too low"), statistic=frac, limit=opts["max_clipped"],
                           unit="fraction", seed=seed, details={"clipped": clipped}))
        ref = bench.reference.modulate(bits)
        raw = bench.aligned_waveform(raw, n)
        m = min(raw.size, ref.size)
        value = sqnr_db(raw[:m], ref[:m])
        floor = opts["min_sqnr_db"] if opts["min_sqnr_db"] is not None else \
            DEFAULT_MIN_SQNR_DB[fmt]
        ideal = 6.02 * SAMPLE_FORMATS[fmt].bits + 1.76
        out.append(Verdict(f"{self.name}.sqnr", "pass" if value >= floor else "fail",
                           f"SQNR {value:.1f} dB against the floating reference (at least "
                           f"{floor:g} dB; an ideal full-scale sine would give {ideal:.1f} dB)",
                           statistic=value, limit=floor, unit="dB", seed=seed))
        return out


ORACLE = FixedPointOracle()
