"""The bench: a device under test, its claimed scheme, and the reference it is judged by.

:func:`open_bench` opens a validated spec's device behind the guard; the :class:`Bench` caches
what several checks share (the measured alignment, the probe of every label pair and the
device's scale measured on it) and offers the one way from a device waveform to symbols
(:meth:`Bench.device_symbols`), so every oracle sees waveforms alike. It also keeps the
verdicts judged so far in the run (:attr:`Bench.verdicts`), for the checks that depend on
earlier ones.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any, Callable

import numpy as np

from .adapters.base import GuardedDevice
from .adapters.isolated import open_adapter
from .dsp.align import Alignment, apply_alignment, estimate_alignment
from .schemes.conventions import Convention
from .schemes.geometry import rotational_symmetry_deg
from .schemes.labels import labels_to_bits
from .schemes.reference import ReferenceModem
from .schemes.rules import SymbolRule, arm_delay_samples
from .spec import DeviceSpec
from .vectors.coverage import de_bruijn_labels
from .vectors.prbs import prbs
from .verdict import Verdict

__all__ = [
    "Bench", "ALIGNMENT_PROBE_SYMBOLS", "AppliedAlignment", "LabelProbe", "DeviceScale",
    "measure_alignment", "open_bench",
]


@dataclass
class Bench:
    """A device under test with its claimed scheme and the reference to judge it by."""

    spec: DeviceSpec
    device: GuardedDevice
    convention: Convention
    reference: ReferenceModem
    cache: dict = field(default_factory=dict)
    #: ``progress(name, fraction, text)``: set by the command line for long runs; a no-op here
    progress: Callable[[str, float, str], None] = field(default=lambda name, fraction, text: None)
    #: the verdicts judged on this bench so far, by name (the runner records each one as it
    #: exists; a check that depends on an earlier verdict reads it here)
    verdicts: dict[str, Verdict] = field(default_factory=dict)
    #: what computes the BER check's blocks (``blocks.Engine``); None: this bench, in process
    engine: Any = None
    #: where a BER campaign keeps its state (``blocks.Journal``); None: nowhere
    journal: Any = None
    #: ``warn(text)``: a line to say at once, before a long check spends its budget: a warning
    #: (``warning: ...``) or what a resumed campaign takes over (the command line prints it,
    #: and the device's result keeps it in its notes)
    warn: Callable[[str], None] = field(default=lambda text: None)
    #: seconds a BER check should take at most; it warns when it will likely take longer
    time_budget_s: float | None = None
    #: counterexamples an earlier run kept with its report, by verdict name
    #: ({name: [records.CounterexampleRecord, ...]}): the checks that find concrete failing
    #: inputs try these first (vectors.kept)
    kept: dict = field(default_factory=dict)

    @property
    def k(self) -> int:
        return self.convention.bits_per_symbol

    @property
    def sps(self) -> int:
        return self.spec.scheme.samples_per_symbol

    def transmit(self, bits: np.ndarray) -> np.ndarray:
        """The device's modulator, or the reference's when the device has none."""
        if self.device.has("modulate"):
            return self.device.modulate(bits)
        return self.reference.modulate(bits)

    def receive(self, samples: np.ndarray, n_symbols: int | None = None) -> np.ndarray:
        """The device's hard demodulator, or the reference's when the device has none.

        Samples that came from the device's modulator are aligned first (see
        :meth:`device_symbols`); ``n_symbols`` says how many symbols they carry.
        """
        if n_symbols is None:
            n_symbols = self.device.bits_for(len(samples)) // self.k
        if self.device.has("demodulate"):
            return self.device.demodulate(samples, n_bits=n_symbols * self.k)
        if self.device.has("modulate"):
            return self.reference.slice_bits(
                self.device_symbols(samples, n_symbols, at_reference_scale=True))
        return self.reference.demodulate(samples, n_symbols)

    # -- waveforms --------------------------------------------------------------------------
    def alignment(self) -> AppliedAlignment | None:
        """How the device's waveform lines up with the reference (measured once, cached).

        None when the scheme allows no correction (one sample per symbol, no pulse) or the
        device has no modulator. Raises AdapterError if the device fails on the probe.
        """
        if "alignment" not in self.cache:
            self.cache["alignment"] = measure_alignment(self)
        return self.cache["alignment"]

    def aligned_waveform(self, samples: np.ndarray, n_symbols: int) -> np.ndarray:
        """A device waveform of ``n_symbols`` lined up with the reference's (as allowed)."""
        applied = self.alignment()
        if applied is None:
            return samples
        return apply_alignment(samples, applied.correction,
                               self.reference.waveform_length(n_symbols))

    def device_symbols(self, samples: np.ndarray, n_symbols: int, *,
                       at_reference_scale: bool = False) -> np.ndarray:
        """Symbols from a device waveform: aligned (as allowed), matched-filtered, sampled.

        With ``at_reference_scale`` they are also divided by the gain the alignment left on
        them (:attr:`DeviceScale.symbol_gain`), so that a device whose only defect is its
        scale is judged like the reference (the ``energy`` check judges the scale itself).
        """
        sym = self.reference.symbols(self.aligned_waveform(samples, n_symbols), n_symbols)
        if at_reference_scale:
            g = self.scale().symbol_gain
            if g != 1.0:
                sym = sym / g
        return sym

    def reference_waveform(self, samples: np.ndarray, n_symbols: int) -> np.ndarray:
        """A device waveform as the reference's receiver must see it: aligned (as allowed) and
        at the reference's scale. Noise in it is scaled by ``1 / scale().total`` in amplitude."""
        x = self.aligned_waveform(samples, n_symbols)
        g = self.scale().symbol_gain
        return x / g if g != 1.0 else x

    # -- the probe of every label pair, and the device's scale measured on it ----------------
    def label_probe(self) -> LabelProbe:
        """The device's answer to every ordered pair of labels (measured once, cached).

        Raises AdapterError if the device misbehaves; needs a modulator.
        """
        if "label_probe" not in self.cache:
            self.cache["label_probe"] = _probe_labels(self)
        return self.cache["label_probe"]

    def scale(self) -> DeviceScale:
        """The device's amplitude against the reference's (measured once, cached).

        Measured on :meth:`label_probe` as ``sqrt(Es / Es_ref)``, the energy per symbol of the
        device's waveform over that of the reference points of the same labels: the quantity
        the ``energy`` check judges, as an amplitude. The checks after ``energy`` and
        ``mapping`` work at this scale, so a normalisation defect fails ``energy`` alone. A
        device with no modulator has the reference's scale. Raises AdapterError if the device
        misbehaves on the probe.
        """
        if "scale" not in self.cache:
            self.cache["scale"] = _measure_scale(self)
        return self.cache["scale"]

    def read_as(self, rule: SymbolRule) -> "Bench":
        """This device judged as if its scheme sent the table under ``rule`` at waveform level:
        this bench when ``rule`` has the claimed rule's arm delay, else a bench (cached) whose
        reference delays the Q arm as ``rule`` says, with its own alignment and probe. The
        symbol-level part of a rule is undone on the symbols (``undo_rule``), not here."""
        if arm_delay_samples(rule, self.sps) == arm_delay_samples(self.convention.rule, self.sps):
            return self
        key = ("read_as", arm_delay_samples(rule, self.sps))
        if key not in self.cache:
            conv = replace(self.convention, rule=rule)
            self.cache[key] = replace(
                self, convention=conv, cache={}, verdicts={},
                reference=ReferenceModem(conv, self.sps, self.spec.scheme.pulse))
        return self.cache[key]

    def sides(self) -> str:
        tx = "device" if self.device.has("modulate") else "reference"
        rx = "device" if self.device.has("demodulate") else "reference"
        return f"{tx} modulate -> {rx} demodulate"


#: symbols in the probe that measures the alignment
ALIGNMENT_PROBE_SYMBOLS = 4096


@dataclass(frozen=True)
class LabelProbe:
    """A de Bruijn sequence of labels (every ordered pair occurs) sent through the modulator.

    ``labels`` are the judged labels; on a shaped waveform they are wrapped by ``pad`` labels
    each side (a filter span and two), sent as ``sent``, because the first and last symbols see
    the filter start up and die down (and a device that trims its output cuts them).
    ``samples`` is the device's raw output for ``sent``; ``symbols`` are
    :meth:`Bench.device_symbols` of the judged labels (no rescaling).
    """

    labels: np.ndarray
    pad: int
    sent: np.ndarray
    samples: np.ndarray
    symbols: np.ndarray


@dataclass(frozen=True)
class DeviceScale:
    """How loud the device is against the reference, as the bench measured it once.

    ``gain``: ``sqrt(Es / Es_ref)`` on the label probe (1 for a device at the convention's
    normalisation). ``symbol_gain``: the part of it left on :meth:`Bench.device_symbols` — 1
    when the alignment already divides a waveform by its measured gain, ``gain`` for symbols
    judged as they come. ``applied``: the magnitude the alignment divides by (1 without one).
    ``source`` says where the figures came from.
    """

    gain: float
    symbol_gain: float
    applied: float
    source: str

    @property
    def total(self) -> float:
        """Everything the bench divides a device waveform by before the reference sees it."""
        return self.applied * self.symbol_gain

    @property
    def es(self) -> float:
        """The device's energy per symbol relative to the reference's (``gain ** 2``)."""
        return self.gain ** 2

    @property
    def db(self) -> float:
        return 20 * float(np.log10(self.gain)) if self.gain > 0 else -float("inf")


def _probe_labels(bench: Bench) -> LabelProbe:
    k = bench.k
    labels = de_bruijn_labels(k, order=2)
    pad = bench.spec.scheme.pulse.span + 2 if bench.spec.scheme.shaped else 0
    sent = np.concatenate([labels[labels.size - pad:], labels, labels[:pad]])
    samples = bench.device.modulate(labels_to_bits(sent, k))
    symbols = bench.device_symbols(samples, sent.size)[pad:pad + labels.size]
    return LabelProbe(labels=labels, pad=pad, sent=sent, samples=samples, symbols=symbols)


def _measure_scale(bench: Bench) -> DeviceScale:
    if not bench.device.has("modulate"):
        return DeviceScale(1.0, 1.0, 1.0, "the device has no modulator: the reference's scale")
    probe = bench.label_probe()
    ref = bench.convention.points[probe.sent]
    ratio = float(np.vdot(probe.samples, probe.samples).real / np.vdot(ref, ref).real)
    gain = float(np.sqrt(ratio)) if np.isfinite(ratio) and ratio > 0 else 0.0
    applied = bench.alignment()
    if applied is not None:
        return DeviceScale(gain, 1.0, float(abs(applied.correction.gain)),
                           "the alignment's gain, applied to the waveform")
    if gain == 0.0:
        return DeviceScale(gain, 1.0, 1.0, "no energy to measure a scale from")
    return DeviceScale(gain, gain, 1.0, "the energy per symbol of the label probe")


@dataclass(frozen=True)
class AppliedAlignment:
    """The measured alignment and the part of it that is applied to the device's waveform.

    ``measured`` is the full estimate (``dsp.align.Alignment``); ``correction`` is what is
    undone: the delay and frequency offset when allowed, the gain's magnitude always (mapping
    allows a positive gain), and its phase reduced modulo the constellation's symmetry angle
    when allowed — a rotation by a whole symmetry step (90 degrees for square QAM) is left in
    place, for the mapping check to name as a rotation.
    """

    measured: Alignment
    correction: Alignment
    symmetry_deg: float
    phase_deg: float
    applied_phase_deg: float
    allowed: dict


def measure_alignment(bench: Bench, allowed: dict | None = None) -> AppliedAlignment | None:
    """Measure the alignment; ``allowed`` overrides the device file's corrections (the
    alignment check measures what a forbidden correction would have been)."""
    scheme = bench.spec.scheme
    allowed = dict(scheme.alignment if allowed is None else allowed)
    if not any(allowed.values()) or not bench.device.has("modulate"):
        return None
    n = ALIGNMENT_PROBE_SYMBOLS
    bits = prbs("prbs15", n * bench.k)
    raw = bench.device.modulate(bits)
    ref = bench.reference.modulate(bits)
    measured = estimate_alignment(raw, ref, estimate_frequency=allowed["frequency"])
    sym = rotational_symmetry_deg(bench.convention.points)
    phase = float(np.degrees(np.angle(measured.gain))) if measured.gain else 0.0
    applied_phase = phase - sym * round(phase / sym) if allowed["phase"] else 0.0
    gain = abs(measured.gain) * np.exp(1j * np.radians(applied_phase))
    correction = replace(measured, gain=complex(gain) if gain else 1.0,
                          delay_samples=measured.delay_samples if allowed["delay"] else 0.0,
                          freq_offset=measured.freq_offset if allowed["frequency"] else 0.0)
    return AppliedAlignment(measured=measured, correction=correction, symmetry_deg=sym,
                            phase_deg=phase, applied_phase_deg=applied_phase, allowed=allowed)


def open_bench(spec: DeviceSpec, adapter=None) -> Bench:
    """Open the device of a validated spec (or use ``adapter``, already open).

    The opening (importing the device, constructing it) runs under the device guard
    (:meth:`GuardedDevice.opening`): what it raises, ``sys.exit`` included, is an AdapterError
    naming ``open``. Raises ConfigError or AdapterError.
    """
    scheme = spec.scheme

    def opener():
        # ``isolate: true`` runs the adapter in a worker process (adapters/isolated.py)
        return open_adapter(spec) if adapter is None else adapter

    device = GuardedDevice.opening(opener, scheme.bits_per_symbol, scheme.samples_per_symbol,
                                   name=spec.name, tail_samples=scheme.tail_samples,
                                   input_tail=scheme.pulse.tail, streaming=scheme.streaming)
    try:
        conv = scheme.reference
        return Bench(spec=spec, device=device, convention=conv,
                     reference=ReferenceModem(conv, scheme.samples_per_symbol, scheme.pulse))
    except BaseException:
        device.close()
        raise
