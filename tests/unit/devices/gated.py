"""QPSK devices that wait for, or send, events: for the live-output and interrupt tests
(TS 38.211 5.1.3 QPSK, written independently of modemverify).

``Gated(gate, marker, threshold)``: the demodulator, on its first call with at least
``threshold`` symbols, writes ``marker`` and waits until the file ``gate`` exists (so the test
decides when the run may go on). ``SelfSignal(signals, threshold)``: the modulator, on its
first call with at least ``threshold`` symbols, sends the named signals to its own process.
"""

import os
import signal
import time
from pathlib import Path

import numpy as np

S = 1 / np.sqrt(2)


def _modulate(bits):
    b = np.asarray(bits, dtype=float).reshape(-1, 2)
    return S * ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 1]))


def _demodulate(samples):
    s = np.asarray(samples)
    return np.stack([s.real < 0, s.imag < 0], axis=1).astype(np.uint8).ravel()


class Gated:
    def __init__(self, gate, marker, threshold=0, calls=1):
        self.gate, self.marker = Path(gate), Path(marker)
        self.threshold, self.calls = threshold, calls

    def modulate(self, bits):
        return _modulate(bits)

    def demodulate(self, samples):
        if len(samples) >= self.threshold:
            self.calls -= 1
            if self.calls == 0:
                self.marker.write_text("waiting")
                deadline = time.monotonic() + 300  # never hang a test run for ever
                while not self.gate.exists() and time.monotonic() < deadline:
                    time.sleep(0.01)
        return _demodulate(samples)


class SelfSignal:
    def __init__(self, signals=("SIGTERM",), threshold=0, gap_s=0.0):
        self.signals, self.threshold, self.gap_s = list(signals), threshold, gap_s

    def modulate(self, bits):
        if len(bits) // 2 >= self.threshold and self.signals:
            for i, name in enumerate(self.signals):
                if i and self.gap_s:
                    time.sleep(self.gap_s)
                os.kill(os.getpid(), getattr(signal, name))
            self.signals = []
        return _modulate(bits)

    def demodulate(self, samples):
        return _demodulate(samples)
