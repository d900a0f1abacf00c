"""A QPSK modem with soft outputs, and the ways it can misbehave (written independently of
modemverify): TS 38.211 5.1.3 QPSK, x = ((1 - 2 b0) + j (1 - 2 b1)) / sqrt(2), and the exact LLRs
L(b0) = 2 sqrt(2) Re(y) / N0, L(b1) = 2 sqrt(2) Im(y) / N0, positive meaning bit 0 (the Gaussian
likelihood ratio of the two points that differ in that bit)."""

import numpy as np

S = 1 / np.sqrt(2)


class SoftQpsk:
    def __init__(self, defect=None):
        self.defect = defect  # None, "raises", "nan" or "flip"

    def modulate(self, bits):
        if self.defect == "raises":
            raise RuntimeError("DMA buffer not mapped")
        b = np.asarray(bits, dtype=float).reshape(-1, 2)
        y = S * ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 1]))
        if self.defect == "nan":
            y[::7] = np.nan
        return y

    def demodulate(self, samples):
        s = np.asarray(samples)
        return np.stack([s.real < 0, s.imag < 0], axis=1).astype(np.uint8).ravel()

    def demodulate_soft(self, samples, noise_var):
        s = np.asarray(samples)
        llr = np.stack([s.real, s.imag], axis=1).ravel() * (2 * np.sqrt(2) / noise_var)
        return -llr if self.defect == "flip" else llr


def unopenable():
    raise RuntimeError("licence server not reachable")
