"""``evm``: error vector magnitude of the device's symbols against the ideal reference.

RMS EVM per the 3GPP definition, ``sqrt(sum|z - i|^2 / (N P0))`` with ``P0`` the average power
of the ideal symbols (3GPP TS 38.104 Annex B / TS 38.101-1 Annex F — annex letters from memory),
in percent and dB, with the peak EVM and per-label error statistics, measured noiselessly on a
PRBS probe after the alignment (the one-tap equaliser of a single-carrier signal) and the
matched filter. The default limit per modulation is the base-station requirement of 3GPP
TS 38.104 6.5.2.2, Table 6.5.2.2-1 (QPSK 17.5 %, 16QAM 12.5 %, 64QAM 8 %, 256QAM 3.5 %); that
table is for a transmitter measured with the standard's own procedure and equipment, so a
pass here is a sanity bound, not that requirement met.
"""

from __future__ import annotations

import numpy as np
from scipy import signal

from ..dsp.evm import evm as evm_of
from ..dsp.evm import evm_limit
from ..options import Opt
from ..records import EvmRecord, EyeRecord
from ..schemes.labels import bits_to_labels, label_string
from ..vectors.bits import random_bits
from ..verdict import Verdict
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
        "symbols": Opt("int", 8192, "symbols in the probe", minimum=64),
    }

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
        measured = bench.device_symbols(raw, n)
        labels = bits_to_labels(bits, k)
        ideal = bench.convention.points[labels]
        # skip the symbols the filter tails touch at either end of a shaped probe
        edge = bench.spec.scheme.pulse.span if bench.spec.scheme.shaped else 0
        core = slice(edge, n - edge) if n > 4 * edge else slice(None)
        # the 3GPP EVM is measured after an equaliser: the alignment already removed the gain
        # of a waveform; a symbol-rate device is scaled to the reference's power (a positive
        # gain, as the mapping check allows — a one-tap complex equaliser would hide a
        # rotated or relabelled table, and blow up when the table is wrong)
        m = measured[core]
        if bench.alignment() is None:
            p_m = float(np.vdot(m, m).real)
            if p_m > 0:
                m = m * np.sqrt(np.vdot(ideal[core], ideal[core]).real / p_m)
        res = evm_of(m, ideal[core], labels[core])
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
        text = (f"RMS EVM {res.rms_percent:.3f} % ({res.rms_db:.1f} dB), peak "
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
