"""Device code for the invented demo scenario (see SCENARIO.md): five ports of one modem.

This file plays the part of third-party code under test. It deliberately does NOT use
modemverify's own tables: it computes its points the way firmware would, from the TS 38.211
formulas, so that a defect here is a defect the harness has to find.
"""

import numpy as np


def _axis_16qam(sign_bit, mag_bit, *, natural=False):
    """One axis of 16QAM: TS 38.211 5.1.4 gives (1-2*s) * (2 - (1-2*m))."""
    if natural:  # wrong: levels -3 -1 +1 +3 in natural binary order of (s, m)
        level = np.array([-3, -1, 1, 3])[2 * sign_bit + mag_bit]
        return level.astype(float)
    return (1 - 2 * sign_bit) * (2 - (1 - 2 * mag_bit))


class TernModem:
    """16QAM or QPSK modem of the invented Tern buoy, with an optional injected defect.

    defect: None, "swapped_arms", "lsb_first", "natural", "inverted", "two_labels".
    """

    def __init__(self, modulation="16qam", defect=None):
        self.k = {"16qam": 4, "qpsk": 2}[modulation]
        self.defect = defect
        labels = np.arange(1 << self.k)
        bits = (labels[:, None] >> np.arange(self.k - 1, -1, -1)) & 1
        self.lut = self._build_lut(bits)

    def _build_lut(self, b):
        if self.defect == "lsb_first":
            b = b[:, ::-1]
        if self.k == 2:
            sign = -1 if self.defect == "inverted" else 1
            i, q = sign * (1 - 2 * b[:, 0]), sign * (1 - 2 * b[:, 1])
            lut = (i + 1j * q) / np.sqrt(2)
        else:
            natural = self.defect == "natural"
            i = _axis_16qam(b[:, 0], b[:, 2], natural=natural)
            q = _axis_16qam(b[:, 1], b[:, 3], natural=natural)
            if self.defect == "swapped_arms":
                i, q = q, i
            lut = (i + 1j * q) / np.sqrt(10)
        if self.defect == "two_labels":
            lut[[5, 6]] = lut[[6, 5]]
        return lut.astype(np.complex64)

    def modulate(self, bits):
        bits = np.asarray(bits, dtype=np.uint8).reshape(-1, self.k)
        idx = bits @ (1 << np.arange(self.k - 1, -1, -1))
        return self.lut[idx]

    def demodulate(self, samples):
        samples = np.asarray(samples)
        d = np.abs(samples[:, None] - self.lut[None, :])
        idx = d.argmin(axis=1)
        return ((idx[:, None] >> np.arange(self.k - 1, -1, -1)) & 1).astype(np.uint8).ravel()
