"""QPSK devices for the BER campaign tests: workers, clusters, interrupts, lost workers
(TS 38.211 5.1.3 QPSK, written independently of modemverify).

``Qpsk(delay_s)``: a correct modem whose demodulator takes ``delay_s`` more per call (a
device-bound run). ``MainProcessOnly``: opens only in the process that started the run (a
device whose handle cannot be shared: an invented lab fixture), so every worker fails to open
it. ``DiesInWorker(threshold)``: a worker process running it exits at once on a demodulator
call of at least ``threshold`` symbols (a crash in a C library, say).
"""

import multiprocessing
import os
import time

import numpy as np

S = 1 / np.sqrt(2)


class Qpsk:
    def __init__(self, delay_s=0.0):
        self.delay_s = float(delay_s)

    def modulate(self, bits):
        b = np.asarray(bits, dtype=float).reshape(-1, 2)
        return S * ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 1]))

    def demodulate(self, samples):
        if self.delay_s:
            time.sleep(self.delay_s)
        s = np.asarray(samples)
        return np.stack([s.real < 0, s.imag < 0], axis=1).astype(np.uint8).ravel()


class MainProcessOnly(Qpsk):
    def __init__(self):
        super().__init__()
        if multiprocessing.parent_process() is not None:
            raise RuntimeError("the bench fixture is held by the process that opened it first")


class DiesInWorker(Qpsk):
    def __init__(self, threshold=1 << 16):
        super().__init__()
        self.threshold = threshold

    def demodulate(self, samples):
        if multiprocessing.parent_process() is not None and len(samples) >= self.threshold:
            os._exit(3)
        return super().demodulate(samples)
