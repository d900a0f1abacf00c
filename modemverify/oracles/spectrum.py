"""``spectrum``: occupied bandwidth, x-dB bandwidth, spectral mask and ACLR of the waveform.

All on a Welch PSD of the device's output for a long random bit sequence
(``scipy.signal.welch``, at least 32 averages), frequencies in units of the symbol rate Rs.

- ``spectrum.obw``: the 99 % occupied bandwidth (0.5 % of the power below the lower and above
  the upper limit: ITU Radio Regulations No. 1.153, Rec. ITU-R SM.328) against the value
  computed for the declared pulse, within ``obw_tolerance`` (relative). A device that shapes
  with another roll-off than it declares fails here.
- ``spectrum.xdb`` (when ``x_db_limit_rs`` is set): the width within ``x_db`` of the peak.
- ``spectrum.mask`` (when ``mask`` is set): a piecewise-linear limit in dBc (relative to the
  in-band peak of the PSD) against the frequency offset in Rs, e.g.
  ``[[0.6, 0], [0.8, -30], [1.5, -50]]``, applied to both sides.
- ``spectrum.aclr`` (when ``aclr`` is set): adjacent-channel leakage ratio with rectangular
  windows: ``{bandwidth_rs, offset_rs, min_db}``. The 3GPP ACLR procedure uses its own
  measurement filter and conditions: this simplified figure is not that requirement.
"""

from __future__ import annotations

from ..dsp.psd import aclr, mask_check, occupied_bandwidth, welch_psd, x_db_bandwidth
from ..errors import ConfigError
from ..options import Opt
from ..records import SpectrumRecord
from ..vectors.bits import random_bits
from ..verdict import Verdict
from .base import Oracle

__all__ = ["SpectrumOracle", "ORACLE"]


def _mask(v):
    try:
        pts = [(float(a), float(b)) for a, b in v]
    except (TypeError, ValueError):
        return "expected a list of [offset_rs, dBc] pairs, e.g. [[0.6, 0], [1.0, -40]]"
    if any(b <= a for (a, _), (b, _) in zip(pts, pts[1:])):
        return "offsets must increase"
    return None


def _aclr(v):
    if not isinstance(v, dict) or set(v) - {"bandwidth_rs", "offset_rs", "min_db"} or \
            not {"bandwidth_rs", "offset_rs", "min_db"} <= set(v):
        return "expected {bandwidth_rs: B, offset_rs: F, min_db: L}"
    return None


class SpectrumOracle(Oracle):
    name = "spectrum"
    order = 90
    requires = ("modulate",)
    summary = "99 % occupied bandwidth against the declared pulse; optional x-dB width, mask, ACLR"
    fresh_vectors = True
    options = {
        "symbols": Opt("int", 1 << 15, "symbols in the record (1024 to 2^20)", minimum=1024,
                       maximum=1 << 20),
        "obw_tolerance": Opt("number", 0.03, "allowed relative deviation of the 99 % "
                             "occupied bandwidth", minimum=0, exclusive_minimum=True),
        "x_db": Opt("number", 26.0, "level below the peak for the x-dB bandwidth", minimum=0,
                    exclusive_minimum=True),
        "x_db_limit_rs": Opt("number", None, "largest x-dB bandwidth, in Rs", minimum=0,
                             exclusive_minimum=True),
        "mask": Opt("list", None, "[[offset_rs, dBc], ...] piecewise-linear mask", check=_mask),
        "aclr": Opt("mapping", None, "{bandwidth_rs, offset_rs, min_db}", check=_aclr),
    }

    def verdict_names(self, spec):
        opts = spec.checks.get(self.name) or {}
        parts = ["obw"] + [part for part, key in (("xdb", "x_db_limit_rs"), ("mask", "mask"),
                                                  ("aclr", "aclr"))
                           if opts.get(key) is not None]
        return [f"{self.name}.{part}" for part in parts]

    def applies(self, bench):
        if bench.sps < 2:
            return ("one sample per symbol: the output is the symbol sequence itself, with no "
                    "pulse shape to judge")
        return None

    def run(self, bench, opts, rng, seed):
        k, sps = bench.k, bench.sps
        n = opts["symbols"]
        bits = random_bits(rng, n * k)
        x = bench.device.modulate(bits)
        try:
            f, psd = welch_psd(x, sps)
        except ConfigError as exc:
            return [Verdict(name, "error", f"spectrum not measurable: {exc.raw_message}",
                            seed=seed) for name in self.verdict_names(bench.spec)]
        pulse = bench.spec.scheme.pulse
        expected = float(pulse.occupied_bandwidth(0.99, truncated=True))
        width, lo, hi = occupied_bandwidth(f, psd, 0.99)
        xw, xlo, xhi = x_db_bandwidth(f, psd, opts["x_db"])
        keep = slice(None, None, max(1, len(f) // 2048))
        details: SpectrumRecord = {"f_rs": f[keep].tolist(), "psd": psd[keep].tolist(), "obw_rs": width,
                   "obw_edges_rs": [lo, hi], "expected_obw_rs": expected,
                   "x_db": opts["x_db"], "x_db_width_rs": xw, "x_db_edges_rs": [xlo, xhi],
                   "mask": opts["mask"], "pulse": bench.spec.scheme.describe()}
        rel = width / expected - 1
        tol = opts["obw_tolerance"]
        text = (f"99 % occupied bandwidth {width:.4f} Rs ({lo:+.4f} to {hi:+.4f}), declared "
                f"pulse gives {expected:.4f} Rs ({rel:+.1%}, tolerance {tol:.0%}); "
                f"{opts['x_db']:g} dB width {xw:.3f} Rs")
        out = [Verdict(f"{self.name}.obw", "pass" if abs(rel) <= tol else "fail",
                       text + ("" if abs(rel) <= tol else
                               ": the device shapes with another pulse or roll-off than it "
                               "declares"), statistic=width, limit=expected * (1 + tol),
                       unit="Rs", seed=seed, details=details)]
        if opts["x_db_limit_rs"] is not None:
            lim = opts["x_db_limit_rs"]
            out.append(Verdict(f"{self.name}.xdb", "pass" if xw <= lim else "fail",
                               f"{opts['x_db']:g} dB bandwidth {xw:.4f} Rs (limit {lim:g} Rs)",
                               statistic=xw, limit=lim, unit="Rs", seed=seed))
        if opts["mask"] is not None:
            m = mask_check(f, psd, [tuple(p) for p in opts["mask"]])
            details["mask_result"] = {"worst_margin_db": m.worst_margin_db,
                                      "worst_freq_rs": m.worst_freq,
                                      "violations": [list(v) for v in m.violations]}
            where = ", ".join(f"{a:+.3f}..{b:+.3f} Rs" for a, b in m.violations[:4])
            out.append(Verdict(
                f"{self.name}.mask", "pass" if m.passed else "fail",
                (f"within the mask; worst margin {m.worst_margin_db:.1f} dB at "
                 f"{m.worst_freq:+.3f} Rs" if m.passed else
                 f"above the mask by {-m.worst_margin_db:.1f} dB at {m.worst_freq:+.3f} Rs "
                 f"(violations at {where})"),
                statistic=m.worst_margin_db, limit=0.0, unit="dB margin", seed=seed))
        if opts["aclr"] is not None:
            a = opts["aclr"]
            value = aclr(f, psd, float(a["bandwidth_rs"]), float(a["offset_rs"]))
            ok = value >= float(a["min_db"])
            out.append(Verdict(
                f"{self.name}.aclr", "pass" if ok else "fail",
                f"ACLR {value:.1f} dB (channel {a['bandwidth_rs']:g} Rs, adjacent at "
                f"{a['offset_rs']:g} Rs; at least {a['min_db']:g} dB); rectangular windows, "
                f"not the standard's measurement filter", statistic=value,
                limit=float(a["min_db"]), unit="dB", seed=seed))
        return out


ORACLE = SpectrumOracle()
