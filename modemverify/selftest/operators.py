"""Mutation operators: small, deliberately broken wrappers around the reference modem.

Each operator is one row of :data:`OPERATORS`: the defect it injects, the defect class it
belongs to, the verdict that must catch it and the words that verdict's reason must contain
for the defect to count as *named*. ``build(convention, rng)`` returns a Python device object
(``modulate`` / ``demodulate`` / ``demodulate_soft``) and ``scheme`` the extra device-file keys
it is checked with. The devices are vectorised (numpy blocks) like any device the harness
judges; they are real devices, not mocks: the harness sees only their outputs.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.signal import lfilter
from scipy.special import ndtr

from ..dsp.formats import from_format, to_format
from ..dsp.pulses import PulseShape
from ..schemes.conventions import get_convention
from ..schemes.reference import ReferenceModem
from ..schemes.theory import ber as theory_ber
from ..schemes.theory import default_ebn0_points

__all__ = [
    "DEFECT_CLASSES", "GATING_CLASSES", "WAVEFORM", "Operator", "OPERATORS", "TableModem",
    "NoisyModem", "StreamingShaper", "reference_device", "operators_for", "phase_for_loss",
    "rotated_ber",
]

#: the defect classes, in report order: what each means
DEFECT_CLASSES = {
    "mapping": "the label-to-point table is not the claimed one (bit order, arms, polarity, "
               "rotation, conjugation, traded labels, labelling, memory)",
    "finite": "the modulator returns NaN or Inf",
    "energy": "the symbol energy is not the convention's",
    "length": "output lengths do not follow from input lengths",
    "soft": "soft outputs have the wrong sign or scale",
    "loss": "the demodulated BER is worse than theory plus the margin",
    "waveform": "the waveform is not the declared one (pulse, delay)",
    "fixed_point": "integer samples saturate at the rails",
    "state": "a device with state loses it between calls (at chunk boundaries)",
}
#: classes whose defect must be detected in every seed, with the defect named, for the
#: certificate to hold (deterministic properties; BER detection is a power, reported as such)
GATING_CLASSES = ("mapping", "finite", "energy", "length", "soft", "waveform", "fixed_point",
                  "state")

#: the pulse-shaped bench of the waveform operators (the demo's RRC ports use it too)
WAVEFORM = {"samples_per_symbol": 8, "pulse": {"shape": "rrc", "rolloff": 0.35, "span": 10}}


def _labels(bits: np.ndarray, k: int) -> np.ndarray:
    b = np.asarray(bits, dtype=np.int64).reshape(-1, k)
    return b @ (1 << np.arange(k - 1, -1, -1))


def _bits(labels: np.ndarray, k: int) -> np.ndarray:
    return ((labels[:, None] >> np.arange(k - 1, -1, -1)) & 1).astype(np.uint8).ravel()


class TableModem:
    """A symbol-rate mapper with its own table and the nearest-point demapper of that table.

    ``memory``: the label sent is (label + previous label) mod M, a differential mapper the
    demapper undoes, so its round trip is clean while its table depends on the past.
    ``soft``: a factor applied to the reference demapper's LLRs (None: no soft output).
    """

    def __init__(self, points, k: int, *, reference: ReferenceModem, memory: bool = False,
                 soft: float | None = None):
        self.points = np.asarray(points, dtype=np.complex128)
        self.k, self.m = k, 1 << k
        self.memory = memory
        self.reference = reference
        finite = np.isfinite(self.points)
        self._decide = np.where(finite, self.points, np.inf + 0j)
        if soft is not None:
            self.soft = soft
            self.demodulate_soft = self._demodulate_soft

    def modulate(self, bits):
        lab = _labels(bits, self.k)
        if self.memory:
            lab = (lab + np.concatenate(([0], lab[:-1]))) % self.m
        return self.points[lab]

    def demodulate(self, samples):
        y = np.asarray(samples, dtype=np.complex128)
        d = np.abs(y[:, None] - self._decide[None, :])
        lab = d.argmin(axis=1).astype(np.int64)
        if self.memory:  # lab_k = sent_k - lab_{k-1}: alternating cumulative sums, mod M
            sign = 1 - 2 * (np.arange(lab.size) & 1)
            lab = (sign * np.cumsum(sign * lab)) % self.m
        return _bits(lab, self.k)

    def _demodulate_soft(self, samples, noise_var):
        return self.soft * self.reference.demodulate_soft(samples, noise_var)


class _RefModem:
    """The reference modem as a python-target device, optionally with a waveform change."""

    def __init__(self, ref: ReferenceModem, *, out=None, tx: ReferenceModem | None = None,
                 int16_full_scale: float | None = None):
        self.ref, self.tx = ref, tx or ref
        self.out = out
        self.full_scale = int16_full_scale

    def modulate(self, bits):
        x = self.tx.modulate(bits)
        if self.out is not None:
            x = self.out(x)
        if self.full_scale is not None:  # a Q15 port with no headroom: saturates at the rails
            return to_format(x, "int16", self.full_scale)[0]
        return x

    def demodulate(self, samples):
        if self.full_scale is not None:
            samples = from_format(samples, "int16", self.full_scale)
        return self.ref.demodulate(samples)

    def demodulate_soft(self, samples, noise_var):
        return self.ref.demodulate_soft(samples, noise_var)


class StreamingShaper(_RefModem):
    """The reference modem's pulse as a streaming FIR: the filter memory (the last taps - 1
    upsampled symbols) is carried from call to call, each call returns n x sps samples, and
    ``flush()`` the samples still in the filter. ``drop_state`` clears the memory at every
    call: each burst is still right, but a stream sent in chunks is not. It has no
    demodulator (the checks pair it with the reference's)."""

    demodulate = demodulate_soft = None

    def __init__(self, ref: ReferenceModem, drop_state: bool = False):
        super().__init__(ref)
        self.taps = ref.pulse.taps.astype(np.complex128)
        self.drop_state = drop_state
        self.reset()

    def reset(self):
        self.zi = np.zeros(self.taps.size - 1, dtype=np.complex128)

    def _filter(self, x):
        y, self.zi = lfilter(self.taps, 1.0, x, zi=self.zi)
        return y

    def modulate(self, bits):
        if self.drop_state:
            self.reset()
        up = np.zeros(len(bits) // self.ref.k * self.ref.sps, dtype=np.complex128)
        up[::self.ref.sps] = self.ref.map_symbols(bits)
        return self._filter(up)

    def flush(self):
        out = self._filter(np.zeros(self.taps.size - 1, dtype=np.complex128))
        self.reset()
        return out


class NoisyModem(_RefModem):
    """The reference modem whose demodulator adds its own complex Gaussian noise: at a known
    Eb/N0 this is an implementation loss of exactly ``loss_db`` (the noise powers add)."""

    def __init__(self, ref: ReferenceModem, k: int, ebn0_db: float, loss_db: float, rng):
        super().__init__(ref)
        n0 = 1.0 / (k * 10 ** (ebn0_db / 10))  # Es = 1, complex variance N0 per sample
        self.sigma = math.sqrt(n0 * (10 ** (loss_db / 10) - 1) / 2)
        self.rng = rng

    def demodulate(self, samples):
        y = np.asarray(samples, dtype=np.complex128)
        if self.sigma > 0:
            n = self.rng.standard_normal((2, y.size)) * self.sigma
            y = y + (n[0] + 1j * n[1])
        return self.ref.demodulate(y)


def reference_device(convention, scheme: dict | None = None):
    """The unmutated reference modem as a python-target device object."""
    scheme = scheme or {}
    ref = ReferenceModem(convention, scheme.get("samples_per_symbol", 1), _pulse(scheme))
    return _RefModem(ref)


def _pulse(scheme):
    return _pulse_of(scheme.get("pulse"), scheme.get("samples_per_symbol", 1))


def rotated_ber(modulation: str, points: np.ndarray, ebn0_db: float, theta: float) -> float:
    """Exact BER of a square-QAM/QPSK table rotated by ``theta`` and decided by the unrotated
    table's rectangular (per-axis) decision cells over AWGN: each cell's probability is a
    product of two Gaussian interval probabilities (common practice)."""
    m = points.size
    k = int(round(math.log2(m)))
    n0 = 1.0 / (k * 10 ** (ebn0_db / 10))
    s = math.sqrt(n0 / 2)
    lv_i, lv_q = np.unique(np.round(points.real, 12)), np.unique(np.round(points.imag, 12))

    def edges(lv):
        mid = (lv[1:] + lv[:-1]) / 2
        return np.concatenate(([-np.inf], mid, [np.inf]))

    ei, eq = edges(lv_i), edges(lv_q)
    tx = points * np.exp(1j * theta)
    pi = ndtr((ei[None, 1:] - tx.real[:, None]) / s) - ndtr((ei[None, :-1] - tx.real[:, None]) / s)
    pq = ndtr((eq[None, 1:] - tx.imag[:, None]) / s) - ndtr((eq[None, :-1] - tx.imag[:, None]) / s)
    # the label of each cell: the point at (level i, level q)
    ci = np.searchsorted(lv_i, np.round(points.real, 12))
    cq = np.searchsorted(lv_q, np.round(points.imag, 12))
    cell_label = np.full((lv_i.size, lv_q.size), -1)
    cell_label[ci, cq] = np.arange(m)
    labels = np.arange(m)
    ham = np.array([[bin(a ^ b).count("1") for b in labels] for a in labels])  # M x M, once
    p_cell = pi[:, :, None] * pq[:, None, :]  # tx label, i cell, q cell
    errs = ham[:, cell_label]  # tx label, i cell, q cell
    return float((p_cell * errs).sum() / (m * k))


def phase_for_loss(modulation: str, points: np.ndarray, ebn0_db: float, loss_db: float) -> float:
    """The phase error (radians) whose BER at ``ebn0_db`` equals theory at ``ebn0_db -
    loss_db``: the rotation that costs ``loss_db`` at that point (bisection on
    :func:`rotated_ber`, which increases with the angle below half the symmetry step)."""
    target = float(theory_ber(modulation, ebn0_db - loss_db))
    lo, hi = 0.0, math.pi / 8
    for _ in range(60):
        mid = (lo + hi) / 2
        if rotated_ber(modulation, points, ebn0_db, mid) < target:
            lo = mid
        else:
            hi = mid
    return (lo + hi) / 2


@dataclass(frozen=True)
class Operator:
    """One mutation: ``build(convention, rng) -> device``, checked with ``scheme`` keys."""

    name: str
    defect_class: str
    #: the verdict (name or dotted prefix) that must fail
    verdict: str
    #: words the failing verdict's reason must contain (case-insensitive) for "named"; a word
    #: ``"a|b"`` is either (QPSK's symmetries give one defect several true names)
    words: tuple[str, ...]
    build: object = field(repr=False, compare=False)
    scheme: dict = field(default_factory=dict)
    #: the true implementation loss in dB when known (loss operators)
    loss_db: float | None = None
    description: str = ""


def _perm_bits(k: int, order) -> np.ndarray:
    """label -> label with its bits rearranged: new bit i is old bit order[i]."""
    lab = np.arange(1 << k)
    b = (lab[:, None] >> np.arange(k - 1, -1, -1)) & 1
    return b[:, list(order)] @ (1 << np.arange(k - 1, -1, -1))


def _table(fn, **kw):
    def build(conv, rng):
        k = int(round(math.log2(conv.points.size)))
        ref = ReferenceModem(conv)
        return TableModem(fn(conv.points.copy(), k, conv), k, reference=ref, **kw)
    return build


def _relabel(order_fn):
    return _table(lambda p, k, conv: p[order_fn(k)])


def _traded(p, k, conv):
    p[[0, 1]] = p[[1, 0]]  # not a symmetry of any square constellation
    return p


def _nan(p, k, conv):
    p[-1] = np.nan
    return p


def _soft(scale):
    def build(conv, rng):
        ref = ReferenceModem(conv)
        k = int(round(math.log2(conv.points.size)))
        return TableModem(conv.points, k, reference=ref, soft=scale)
    return build


def _out(fn, scheme=None, *, tx_pulse=None, int16_full_scale=None):
    def build(conv, rng):
        s = scheme or {}
        sps = s.get("samples_per_symbol", 1)
        ref = ReferenceModem(conv, sps, _pulse_of(s.get("pulse"), sps))
        tx = ReferenceModem(conv, sps, _pulse_of(tx_pulse, sps)) if tx_pulse else None
        return _RefModem(ref, out=fn, tx=tx, int16_full_scale=int16_full_scale)
    return build


def _pulse_of(pulse, sps=1):
    if pulse is None:
        return None
    return PulseShape(pulse["shape"], sps, rolloff=pulse.get("rolloff"), span=pulse.get("span"))


def _phase(loss):
    def build(conv, rng):
        mod = conv.modulation
        ebn0 = default_ebn0_points(mod)[1]
        theta = phase_for_loss(mod, conv.points, ebn0, loss)
        ref = ReferenceModem(conv)
        return _RefModem(ref, out=lambda x: x * np.exp(1j * theta))
    return build


def _rotation(step):
    return _table(lambda p, k, conv: p * np.exp(1j * step * math.pi / 2))


def _natural(p, k, conv):
    return get_convention("natural", conv.modulation).points.copy()


_WIDE = dict(WAVEFORM, pulse=dict(WAVEFORM["pulse"], rolloff=0.6))


def _streaming(conv, rng):
    pulse = _pulse_of(WAVEFORM["pulse"], WAVEFORM["samples_per_symbol"])
    return StreamingShaper(ReferenceModem(conv, WAVEFORM["samples_per_symbol"], pulse),
                           drop_state=True)

#: every operator, in report order
OPERATORS: tuple[Operator, ...] = (
    Operator("iq_swapped", "mapping", "mapping", ("arms swapped",),
             _table(lambda p, k, conv: 1j * np.conj(p)), description="I and Q arms swapped"),
    Operator("bits_reversed", "mapping", "mapping", ("reversed",),
             _relabel(lambda k: _perm_bits(k, range(k - 1, -1, -1))),
             description="label bits fed LSB first"),
    Operator("bit_pair_permuted", "mapping", "mapping", ("reorder|reversed|swapped",),
             _relabel(lambda k: _perm_bits(k, [1, 0] + list(range(2, k)))),
             description="the first two label bits trade places"),
    Operator("polarity_inverted", "mapping", "mapping", ("inverted",),
             _table(lambda p, k, conv: -p), description="every point negated"),
    Operator("rotated_90", "mapping", "mapping", ("rotat", "90"), _rotation(1),
             description="table rotated by one symmetry step (90 degrees)"),
    Operator("rotated_180", "mapping", "mapping", ("180",), _rotation(2),
             description="table rotated by two symmetry steps (180 degrees)"),
    Operator("rotated_270", "mapping", "mapping", ("rotat", "270"), _rotation(3),
             description="table rotated by three symmetry steps (270 degrees)"),
    Operator("conjugated", "mapping", "mapping", ("conjugat",),
             _table(lambda p, k, conv: np.conj(p)), description="Q arm negated (conjugate)"),
    Operator("two_labels_traded", "mapping", "mapping", ("moved|trad",), _table(_traded),
             description="labels 0 and 1 trade points"),
    Operator("natural_labelling", "mapping", "mapping", ("natural",), _table(_natural),
             description="natural binary instead of Gray labelling"),
    Operator("previous_symbol", "mapping", "mapping", ("memory",),
             _table(lambda p, k, conv: p, memory=True),
             description="the label sent depends on the previous symbol (differential)"),
    Operator("nan_label", "finite", "finite", ("nan",), _table(_nan),
             description="NaN for the last label"),
    Operator("missing_normalisation", "energy", "energy", ("normalisation",),
             _table(lambda p, k, conv: p / conv.normalisation),
             description="the standard's normalisation factor left out"),
    Operator("gain_0.5dB", "energy", "energy", ("+0.50 dB",),
             _table(lambda p, k, conv: p * 10 ** (0.5 / 20)), description="0.5 dB gain error"),
    Operator("sample_dropped", "length", "length.modulate", ("-1 sample",),
             _out(lambda x: x[:-1]), description="the last sample dropped"),
    Operator("sample_added", "length", "length.modulate", ("+1 sample",),
             _out(lambda x: np.append(x, 0j)), description="one zero sample appended"),
    Operator("llr_sign_flipped", "soft", "llr.sign", ("bit 1",), _soft(-1.0),
             description="LLR signs flipped"),
    Operator("llr_scaled_4", "soft", "llr.calibration", ("over-confident",), _soft(4.0),
             description="LLRs 4 times too large"),
    Operator("llr_scaled_quarter", "soft", "llr.calibration", ("under-confident",), _soft(0.25),
             description="LLRs 4 times too small"),
    *(Operator(f"phase_error_{loss:g}dB", "loss", "ber.", ("BER",), _phase(loss), loss_db=loss,
               description=f"a constant phase error costing {loss:g} dB at the middle BER point")
      for loss in (0.25, 0.5, 1.0, 2.0)),
    Operator("wider_rolloff", "waveform", "spectrum.obw", ("bandwidth",),
             _out(None, WAVEFORM, tx_pulse=_WIDE["pulse"]), scheme=WAVEFORM,
             description="RRC roll-off 0.6 where 0.35 is declared"),
    Operator("undeclared_delay", "waveform", "alignment", ("delay",),
             _out(lambda x: np.concatenate((np.zeros(3, complex), x[:-3])), WAVEFORM),
             scheme=dict(WAVEFORM, alignment={"delay": False}),
             description="3 samples of delay where none is allowed"),
    Operator("int16_clipping", "fixed_point", "fixed_point.clipping", ("rails",),
             _out(None, WAVEFORM, int16_full_scale=0.25),
             scheme=dict(WAVEFORM, sample_format="int16", full_scale=0.25),
             description="Q15 samples with no headroom: full scale 0.25 saturates the peaks"),
    Operator("chunk_state_dropped", "state", "streaming.modulate", ("boundary",), _streaming,
             scheme=dict(WAVEFORM, streaming=True),
             description="a streaming RRC shaper that clears its filter memory at every call"),
)


def operators_for(modulation: str, names=None) -> list[Operator]:
    """The operators that apply to ``modulation`` (all of them, for square QAM and QPSK), or
    just ``names``."""
    ops = [op for op in OPERATORS if names is None or op.name in names]
    return ops
