"""Device code used by the CLI and config tests (written independently of modemverify)."""

import numpy as np

S = 1 / np.sqrt(2)


class Qpsk3gpp:
    """TS 38.211 5.1.3 QPSK: first bit -> I, second -> Q, 0 -> +."""

    def __init__(self, defect=None):
        self.defect = defect

    def modulate(self, bits):
        b = np.asarray(bits, dtype=float).reshape(-1, 2)
        if self.defect == "swap":
            b = b[:, ::-1]
        y = S * ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 1]))
        if self.defect == "wrong_dtype":
            return y.astype(str)
        if self.defect == "nan" and len(y) > 3:
            y[3] = np.nan
        return y

    def demodulate(self, samples):
        s = np.asarray(samples)
        if self.defect == "raises":
            raise ZeroDivisionError("division by zero in slicer")
        return np.stack([s.real < 0, s.imag < 0], axis=1).astype(np.uint8).ravel()


def broken_factory():
    raise RuntimeError("license server not reachable")
