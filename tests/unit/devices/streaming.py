"""Devices that keep state between calls, correct and broken (written independently of
modemverify; numpy and scipy only).

Each keeps its state across ``modulate`` / ``demodulate`` calls and offers ``reset()``; the
``defect`` argument makes one broken variant:

- ``StreamingRrcQpsk``: 3GPP TS 38.211 5.1.3 QPSK, shaped by a root-raised-cosine FIR whose
  memory (the last span x sps upsampled inputs) is carried from call to call; each call returns
  n x sps samples and ``flush()`` the span x sps samples still in the filter.
  ``defect="drop_state"`` clears the filter memory at the start of every call.
- ``StreamingPi2Bpsk``: TS 38.211 5.1.1 pi/2-BPSK, d(i) = e^{j pi/2 (i mod 2)} / sqrt 2
  [(1 - 2b(i)) + j(1 - 2b(i))], with i counted over the stream. ``defect="restart"`` restarts
  the position counter at every call; ``defect="reset_ignored"`` has a reset() that does
  nothing.
- ``StreamingDqpsk``: Gray DQPSK, the label sets the phase change (00 -> 0, 01 -> pi/2,
  11 -> pi, 10 -> 3pi/2; common practice), the reference carried across calls on both sides
  (differential detection against the previous symbol). ``defect="restart_tx"`` /
  ``"restart_rx"`` restarts the modulator's / demodulator's reference at every call.
- ``DitheredQpsk``: a QPSK mapper without declared state that adds a small random dither to
  every sample (not repeatable).
"""

import numpy as np
from scipy.signal import lfilter

S = 1 / np.sqrt(2)


def rrc_taps(sps, rolloff, span):
    """Root-raised-cosine taps over span symbols, unit energy (the usual closed form; the
    singular points t = 0 and |t| = 1/(4 rolloff) by their limits)."""
    t = np.arange(-span * sps // 2, span * sps // 2 + 1) / sps
    a = rolloff
    h = np.empty_like(t)
    for i, x in enumerate(t):
        if abs(x) < 1e-12:
            h[i] = 1 + a * (4 / np.pi - 1)
        elif a > 0 and abs(abs(x) - 1 / (4 * a)) < 1e-12:
            h[i] = a / np.sqrt(2) * ((1 + 2 / np.pi) * np.sin(np.pi / (4 * a))
                                     + (1 - 2 / np.pi) * np.cos(np.pi / (4 * a)))
        else:
            h[i] = ((np.sin(np.pi * x * (1 - a)) + 4 * a * x * np.cos(np.pi * x * (1 + a)))
                    / (np.pi * x * (1 - (4 * a * x) ** 2)))
    return h / np.sqrt(np.sum(h ** 2))


def _qpsk(bits):
    b = np.asarray(bits, dtype=float).reshape(-1, 2)
    return S * ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 1]))


class StreamingRrcQpsk:
    def __init__(self, sps=8, rolloff=0.35, span=10, defect=None):
        self.sps, self.defect = sps, defect
        self.taps = rrc_taps(sps, rolloff, span)
        self.reset()

    def reset(self):
        self.zi = np.zeros(self.taps.size - 1, dtype=np.complex128)

    def _filter(self, x):
        y, self.zi = lfilter(self.taps, 1.0, x, zi=self.zi)
        return y

    def modulate(self, bits):
        if self.defect == "drop_state":
            self.reset()
        up = np.zeros(len(bits) // 2 * self.sps, dtype=np.complex128)
        up[::self.sps] = _qpsk(bits)
        return self._filter(up)

    def flush(self):
        out = self._filter(np.zeros(self.taps.size - 1, dtype=np.complex128))
        self.reset()
        return out


class StreamingPi2Bpsk:
    def __init__(self, defect=None):
        self.defect = defect
        self.position = self.rx_position = 0  # symbols sent, received

    def reset(self):
        if self.defect != "reset_ignored":
            self.position = self.rx_position = 0

    def modulate(self, bits):
        if self.defect == "restart":
            self.position = 0
        b = np.asarray(bits, dtype=float)
        i = self.position + np.arange(b.size)
        self.position += b.size
        return np.exp(0.5j * np.pi * (i % 2)) * S * ((1 - 2 * b) + 1j * (1 - 2 * b))

    def demodulate(self, samples):
        y = np.asarray(samples)
        i = self.rx_position + np.arange(y.size)
        self.rx_position += y.size
        z = y * np.exp(-0.5j * np.pi * (i % 2))
        return (z.real + z.imag < 0).astype(np.uint8)


_DQPSK_STEP = np.array([0, 1, 3, 2])  # label -> phase change in quarter turns
_DQPSK_LABEL = np.array([0, 1, 3, 2])  # quarter turns -> label (the same Gray order)


class StreamingDqpsk:
    def __init__(self, defect=None):
        self.defect = defect
        self.reset()

    def reset(self):
        self.tx_phase = 0  # quarter turns of the last symbol sent
        self.rx_last = 1.0 + 0j  # the last symbol received

    def modulate(self, bits):
        if self.defect == "restart_tx":
            self.tx_phase = 0
        b = np.asarray(bits, dtype=np.int64).reshape(-1, 2)
        phase = self.tx_phase + np.cumsum(_DQPSK_STEP[2 * b[:, 0] + b[:, 1]])
        if phase.size:
            self.tx_phase = int(phase[-1] % 4)
        return np.exp(0.5j * np.pi * phase)

    def demodulate(self, samples):
        if self.defect == "restart_rx":
            self.rx_last = 1.0 + 0j
        y = np.asarray(samples, dtype=np.complex128)
        prev = np.concatenate([[self.rx_last], y[:-1]])
        if y.size:
            self.rx_last = y[-1]
        turns = np.rint(np.angle(y * np.conj(prev)) / (np.pi / 2)).astype(np.int64) % 4
        lab = _DQPSK_LABEL[turns]
        return np.stack([lab >> 1, lab & 1], axis=1).astype(np.uint8).ravel()


class DitheredQpsk:
    def __init__(self, level=1e-3, seed=5):
        self.level = level
        self.rng = np.random.default_rng(seed)

    def modulate(self, bits):
        x = _qpsk(bits)
        return x + self.level * (self.rng.standard_normal(x.size)
                                 + 1j * self.rng.standard_normal(x.size))

    def demodulate(self, samples):
        y = np.asarray(samples)
        return np.stack([y.real < 0, y.imag < 0], axis=1).astype(np.uint8).ravel()
