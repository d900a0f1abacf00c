"""``evm``: error vector magnitude of the device's symbols against the ideal reference.

RMS EVM per the 3GPP definition, ``sqrt(sum|z - i|^2 / (N P0))`` with ``P0`` the average power
of the ideal symbols (3GPP TS 38.104 Annex B / TS 38.101-1 Annex F — annex letters from memory),
in percent and dB, with the peak EVM and per-label error statistics, measured noiselessly on a
PRBS probe after the alignment (the one-tap equaliser of a single-carrier signal) and the
matched filter, at the device's measured scale (:meth:`~modemverify.bench.Bench.scale`: a device
whose only defect is its normalisation fails ``energy``, not ``evm``). When ``mapping`` failed,
the error vectors against the claimed points would measure the mapping defect, not signal
quality, so the verdict is skipped naming it. The default limit per modulation is the base-station requirement of 3GPP
TS 38.104 6.5.2.2, Table 6.5.2.2-1 (QPSK 17.5 %, 16QAM 12.5 %, 64QAM 8 %, 256QAM 3.5 %); that
table is for a transmitter measured with the standard's own procedure and equipment, so a
pass here is a sanity bound, not that requirement met.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import signal

from ..dsp.evm import evm as evm_of
from ..dsp.evm import evm_limit
from ..options import Opt
from ..records import EvmRecord, EyeRecord
from ..schemes.labels import bits_to_labels, label_string
from ..vectors.bits import random_bits
from ..verdict import Verdict
from ._table import claimed_table_failed
from .base import Oracle

__all__ = ["EvmOracle", "ORACLE"]


class EvmOracle(Oracle):
    name = "evm"
    order = 80
    requires = ("modulate",)
    fresh_vectors = True
    summary = "RMS and peak EVM of the device's symbols (3GPP definition) against a limit"
    options = {
        "limit_percent": Opt("number", None, "RMS EVM limit in % (default: TS 38.104 Table "
                             "6.5.2.2-1 for the modulation)", minimum=0, exclusive_minimum=True),
        "symbols": Opt("int", 8192, "symbols in the probe (64 to 2^20)", minimum=64,
                       maximum=1 << 20),
    }

    def blocked_by(self, bench):
        return claimed_table_failed(
            bench, "the device's points are not the claimed table, so error vectors against "
                   "it would measure the mapping defect, not signal quality")

    def run(self, bench, opts, rng, seed):
        mod = bench.convention.modulation
        limit = opts["limit_percent"] if opts["limit_percent"] is not None else evm_limit(mod)
        if limit is None:
            return [Verdict(self.name, "skipped", f"no published EVM limit for {mod}; set "
                            f"checks.evm.limit_percent", seed=seed)]
        k = bench.k
        n = opts["symbols"]
        bits = random_bits(rng, n * k)
        raw = bench.device.modulate(bits)
        # at the device's measured scale: the alignment (the one-tap equaliser of a waveform)
        # already removed a waveform's gain; symbols judged as they come are divided by the
        # gain measured on the label probe (a positive gain, as the mapping check allows — a
        # complex equaliser would hide a rotated or relabelled table)
        measured = bench.device_symbols(raw, n, at_reference_scale=True)
        labels = bits_to_labels(bits, k)
        ideal = bench.reference.map_symbols(bits)  # under the scheme's symbol rule
        # skip the symbols the filter tails touch at either end of a shaped probe
        edge = bench.spec.scheme.pulse.span if bench.spec.scheme.shaped else 0
        core = slice(edge, n - edge) if n > 4 * edge else slice(None)
        res = evm_of(measured[core], ideal[core], labels[core])
        worst = sorted(res.per_label.items(), key=lambda kv: -kv[1][1])[:4]
        per_label = {label_string(int(l), k): [float(abs(mean)), float(rms)]
                     for l, (mean, rms) in res.per_label.items()}
        details: EvmRecord = {"rms_percent": res.rms_percent, "rms_db": res.rms_db,
                   "peak_percent": res.peak_percent, "limit_percent": limit,
                   "per_label": per_label,
                   "cloud": [[float(z.real), float(z.imag)] for z in measured[core][:2000]],
                   "cloud_labels": [int(l) for l in labels[core][:2000]]}
        if bench.spec.scheme.shaped:
            details["eye"] = _eye_traces(bench, raw, n)
        worst_txt = ", ".join(f"{label_string(int(l), k)} {rms:.2f} %" for l, (_, rms) in worst)
        db = f"{res.rms_db:.1f} dB" if math.isfinite(res.rms_db) else "no error at all"
        text = (f"RMS EVM {res.rms_percent:.3f} % ({db}), peak "
                f"{res.peak_percent:.3f} % over {res.n_symbols} symbols; limit {limit:g} %")
        if res.rms_percent <= limit:
            return [Verdict(self.name, "pass", text, statistic=res.rms_percent, limit=limit,
                            unit="%", seed=seed, details=details)]
        return [Verdict(self.name, "fail", text + f"; worst labels: {worst_txt}",
                        statistic=res.rms_percent, limit=limit, unit="%", seed=seed,
                        details=details)]


def _eye_traces(bench, raw, n, traces=120) -> EyeRecord:
    """In-phase matched-filter output around 120 symbol peaks, two symbols wide (eye diagram)."""
    x = bench.aligned_waveform(raw, n)
    pulse = bench.spec.scheme.pulse
    sps = bench.sps
    y = signal.oaconvolve(x, np.conj(pulse.taps[::-1]))
    peak0 = sps - 1 if pulse.is_rectangular else int(round(2 * pulse.delay))
    first = max(0 if pulse.is_rectangular else pulse.span, 1)
    out = []
    for s in range(first, min(n - 2, first + traces)):
        c = peak0 + s * sps
        seg = y[c - sps:c + sps + 1]
        if seg.size == 2 * sps + 1:
            out.append([float(v) for v in seg.real])
    return {"sps": sps, "traces": out}


ORACLE = EvmOracle()
