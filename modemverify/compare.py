"""``modemverify compare A.yaml B.yaml``: do two implementations agree on the same bits?

Typical use: a fixed-point port (B) against its floating-point original (A), or a vendor's
library against an in-house one. Both devices modulate the same bits; B is judged against A:

- ``compare.mapping``: the label tables agree up to a positive gain; otherwise the transform
  that relates them is named (the same machinery as the ``mapping`` check);
- ``compare.alignment``: delay, gain, phase and frequency offset of B's waveform against A's,
  and their correlation;
- ``compare.samples``: per-sample error of B against A after alignment (RMS and peak, in
  percent of A's RMS);
- ``compare.evm``: EVM of B's symbols with A's symbols as the ideal, against a limit;
- ``compare.spectrum``: largest difference of the Welch PSDs, in dB, where A's PSD is within
  ``spectrum_floor_db`` of its peak.
"""

from __future__ import annotations

import math
import time

import numpy as np

from .bench import open_bench
from .dsp.align import apply_alignment, estimate_alignment
from .dsp.evm import evm, evm_limit
from .dsp.psd import welch_psd
from .errors import AdapterError, ConfigError
from .oracles._table import measure_table
from .records import CompareEvmRecord, CompareSpectrumRecord
from .runner import RunResult, Subject, guarded
from .schemes.transforms import differing_labels, explain_difference
from .spec import DeviceSpec
from .vectors.bits import random_bits
from .verdict import Verdict

__all__ = ["DEFAULTS", "comparison_subject", "compare"]

DEFAULTS = {"symbols": 1 << 14, "sample_error_percent": None, "evm_limit_percent": None,
            "spectrum_tolerance_db": 1.0, "spectrum_floor_db": 40.0}


def comparison_subject(a: DeviceSpec, b: DeviceSpec) -> Subject:
    """What ``compare(a, b)`` judges: B against A (a ConfigError if they cannot be compared)."""
    if a.scheme.modulation != b.scheme.modulation:
        raise ConfigError(f"cannot compare {a.scheme.modulation} ({a.name}) with "
                          f"{b.scheme.modulation} ({b.name})", key="scheme.modulation")
    return Subject(name=f"{b.name} vs {a.name}", adapter=f"{b.adapter} vs {a.adapter}",
                   scheme=a.scheme,
                   description=f"B = {b.name} ({b.file or b.adapter}) judged against "
                               f"A = {a.name} ({a.file or a.adapter})")


def compare(a: DeviceSpec, b: DeviceSpec, *, seed: int = 1, evm_limit_percent=None,
            sample_error_percent=None, spectrum_tolerance_db=1.0, on_verdict=None) -> RunResult:
    """Compare device B against device A; every problem becomes a verdict, never an exception
    (except a ConfigError for specs that cannot be compared). ``on_verdict`` is called with
    each verdict as soon as it exists."""
    subject = comparison_subject(a, b)
    t0 = time.perf_counter()
    verdicts: list[Verdict] = []

    def emit(vs):
        for v in vs:
            verdicts.append(v)
            if on_verdict:
                on_verdict(v)

    benches = []
    for s in (a, b):
        try:
            bench = open_bench(s)
        except AdapterError as exc:
            emit([Verdict("compare.open", "error", f"{s.name} could not be opened: {exc}",
                          seed=seed)])
            for bb in benches:
                bb.device.close()
            return RunResult(subject, verdicts, seed, time.perf_counter() - t0)
        benches.append(bench)
    ba, bb = benches
    try:
        for name, fn in (("compare.mapping", _mapping), ("compare.waveforms", _waveforms)):
            emit(guarded(name, seed, lambda fn=fn: fn(
                ba, bb, seed, evm_limit_percent=evm_limit_percent,
                sample_error_percent=sample_error_percent,
                spectrum_tolerance_db=spectrum_tolerance_db), device_failed="a device failed"))
    finally:
        ba.device.close()
        bb.device.close()
    return RunResult(subject, verdicts, seed, time.perf_counter() - t0)


def _mapping(ba, bb, seed, **_):
    if not (ba.device.has("modulate") and bb.device.has("modulate")):
        return [Verdict("compare.mapping", "skipped", "both devices need modulate", seed=seed)]
    ta, tb = measure_table(ba), measure_table(bb)
    k = ba.k
    gain, bad = differing_labels(ta.points, tb.points)
    if not bad:
        return [Verdict("compare.mapping", "pass",
                        f"the label tables agree (B = {gain:.4g} x A)", statistic=0.0,
                        seed=seed)]
    reason, _ = explain_difference(ta.points, tb.points, bad, gain, k, name="A",
                                   subject="B's table")
    return [Verdict("compare.mapping", "fail", reason, statistic=float(len(bad)),
                    unit="labels differ", seed=seed)]


def _waveforms(ba, bb, seed, *, evm_limit_percent, sample_error_percent,
               spectrum_tolerance_db):
    """B's waveform against A's: each verdict yielded as soon as it exists."""
    if not (ba.device.has("modulate") and bb.device.has("modulate")):
        yield Verdict("compare.waveforms", "skipped", "both devices need modulate", seed=seed)
        return
    k = ba.k
    n = DEFAULTS["symbols"]
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(0xC0,)))
    bits = random_bits(rng, n * k)
    wa, wb = ba.device.modulate(bits), bb.device.modulate(bits)
    if ba.sps != bb.sps:
        yield Verdict("compare.alignment", "fail",
                 f"A has {ba.sps} and B {bb.sps} samples per symbol: the waveforms "
                 f"cannot be compared sample by sample", seed=seed)
        return
    al = estimate_alignment(wb, wa)
    phase = math.degrees(math.atan2(al.gain.imag, al.gain.real)) if al.gain else 0.0
    gain_db = 20 * math.log10(abs(al.gain)) if al.gain else -math.inf
    text = (f"B is A delayed by {al.delay_samples:+.3f} samples, gain {gain_db:+.2f} dB, "
            f"phase {phase:+.2f} deg, frequency offset {al.freq_offset * ba.sps:+.2e} Rs; "
            f"correlation {al.correlation:.5f}")
    yield Verdict("compare.alignment", "pass" if al.correlation >= 0.9 else "fail",
                  text if al.correlation >= 0.9 else text + ": B is not A's signal",
                  statistic=al.correlation, limit=0.9, unit="correlation", seed=seed,
                  details={"delay_samples": al.delay_samples, "gain_db": gain_db,
                           "phase_deg": phase,
                           "freq_offset_cycles_per_sample": al.freq_offset,
                           "freq_offset_rs": al.freq_offset * ba.sps})
    if al.correlation < 0.5 or not al.gain:
        return
    yb = apply_alignment(wb, al, wa.size)
    edge = 64 * ba.sps  # filter transients at the record's ends
    core = slice(edge, wa.size - edge) if wa.size > 4 * edge else slice(None)
    err = yb[core] - wa[core]
    rms_a = math.sqrt(float(np.mean(np.abs(wa[core]) ** 2)))
    rms = 100 * math.sqrt(float(np.mean(np.abs(err) ** 2))) / rms_a
    peak = 100 * float(np.max(np.abs(err))) / rms_a
    mod = ba.convention.modulation
    evm_lim = evm_limit_percent if evm_limit_percent is not None else evm_limit(mod)
    sample_lim = sample_error_percent if sample_error_percent is not None else evm_lim
    if sample_lim is None:
        sample_lim = 10.0
    yield Verdict("compare.samples", "pass" if rms <= sample_lim else "fail",
                  f"per-sample error of B against A after alignment: RMS {rms:.3f} %, "
                  f"peak {peak:.3f} % of A's RMS (limit {sample_lim:g} % RMS)",
                  statistic=rms, limit=sample_lim, unit="%", seed=seed)
    # B, lined up with A's waveform, goes through A's own alignment and matched filter
    sa = ba.device_symbols(wa, n)
    sb = ba.device_symbols(yb, n)
    e = evm(sb[16:-16], sa[16:-16], equalise=True)
    cloud = slice(16, 16 + 2000)
    details: CompareEvmRecord = {
        "a_symbols": [[float(z.real), float(z.imag)] for z in sa[cloud]],
        "error": [[float(z.real), float(z.imag)] for z in (sb - sa)[cloud]],
        "rms_percent": e.rms_percent}
    if evm_lim is None:
        yield Verdict("compare.evm", "skipped", f"no EVM limit for {mod}: give "
                      f"--evm-limit", seed=seed)
    else:
        yield Verdict("compare.evm", "pass" if e.rms_percent <= evm_lim else "fail",
                      f"EVM of B against A {e.rms_percent:.3f} % ({e.rms_db:.1f} dB), "
                      f"peak {e.peak_percent:.3f} %; limit {evm_lim:g} %",
                      statistic=e.rms_percent, limit=evm_lim, unit="%", seed=seed,
                      details=details)
    if ba.sps >= 2:
        fa, pa = welch_psd(wa, ba.sps)
        _, pb = welch_psd(yb, ba.sps)
        pa_db = 10 * np.log10(np.maximum(pa / pa.max(), 1e-30))
        pb_db = 10 * np.log10(np.maximum(pb / pb.max(), 1e-30))
        band = pa_db >= -DEFAULTS["spectrum_floor_db"]
        diff = float(np.max(np.abs(pb_db[band] - pa_db[band])))
        where = float(fa[band][np.argmax(np.abs(pb_db[band] - pa_db[band]))])
        ok = diff <= spectrum_tolerance_db
        keep = slice(None, None, max(1, len(fa) // 2048))
        spectra: CompareSpectrumRecord = {
            "f_rs": fa[keep].tolist(), "psd_a_db": pa_db[keep].tolist(),
            "psd_b_db": pb_db[keep].tolist(), "floor_db": -DEFAULTS["spectrum_floor_db"]}
        yield Verdict("compare.spectrum", "pass" if ok else "fail",
                      f"PSDs differ by at most {diff:.2f} dB (at {where:+.3f} Rs) where A "
                      f"is within {DEFAULTS['spectrum_floor_db']:g} dB of its peak "
                      f"(tolerance {spectrum_tolerance_db:g} dB)", statistic=diff,
                      limit=spectrum_tolerance_db, unit="dB", seed=seed, details=spectra)
