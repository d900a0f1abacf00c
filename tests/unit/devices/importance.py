"""Devices for the importance-sampling tests (written independently of modemverify).

QPSK and 16QAM after TS 38.211 5.1.3 and 5.1.4 (claim them as ``3gpp``), at unit average
energy, hard decisions by the nearest point.

- ``Modem(modulation)``: correct.
- ``Lossy(modulation, ebn0_db, loss_db, seed)``: the demodulator adds its own complex noise so
  that, at ``ebn0_db``, the total noise is ``loss_db`` above the channel's (the noise powers
  add): an implementation loss of exactly ``loss_db`` there.
- ``Feedback(modulation, c)``: decides symbol ``i`` on ``y[i] + c (y[i-1] - d[i-1])``, the
  previous symbol's residual noise leaking in (a decision-feedback fault): a device with
  memory across symbols.
- ``Lookahead(modulation, c)``: the same with the next symbol's residual.
- ``Rotated(modulation, degrees)``: decides on the input turned by a fixed phase error.
- ``Outward(modulation, factor)``: a slicer that flips the first bit of a decision when the
  input lies more than ``factor`` times half the minimum distance outside the constellation's
  outer edge on the I axis (a saturation fault): an error region that no translation toward
  a neighbour aims at.
"""

import numpy as np

S = 1 / np.sqrt(2)


def _table(modulation):
    if modulation == "qpsk":
        labels = np.arange(4)
        b0, b1 = labels >> 1, labels & 1
        return S * ((1 - 2 * b0) + 1j * (1 - 2 * b1))
    if modulation == "16qam":
        labels = np.arange(16)
        b0, b1, b2, b3 = (labels >> 3) & 1, (labels >> 2) & 1, (labels >> 1) & 1, labels & 1
        return ((1 - 2 * b0) * (2 - (1 - 2 * b2))
                + 1j * (1 - 2 * b1) * (2 - (1 - 2 * b3))) / np.sqrt(10)
    raise ValueError(modulation)


class Modem:
    def __init__(self, modulation="qpsk"):
        self.points = _table(modulation)
        self.k = int(np.log2(self.points.size))

    def modulate(self, bits):
        b = np.asarray(bits, dtype=np.int64).reshape(-1, self.k)
        labels = b @ (1 << np.arange(self.k - 1, -1, -1))
        return self.points[labels]

    def decide(self, y):
        return np.argmin(np.abs(y[:, None] - self.points[None, :]), axis=1)

    def to_bits(self, labels):
        return ((labels[:, None] >> np.arange(self.k - 1, -1, -1)) & 1).astype(np.uint8).ravel()

    def demodulate(self, samples):
        return self.to_bits(self.decide(np.asarray(samples, dtype=np.complex128)))


class Lossy(Modem):
    def __init__(self, modulation="qpsk", ebn0_db=10.0, loss_db=1.0, seed=1):
        super().__init__(modulation)
        n0 = 1.0 / (self.k * 10 ** (ebn0_db / 10))
        self.sigma = np.sqrt(n0 * (10 ** (loss_db / 10) - 1) / 2)
        self.rng = np.random.default_rng(seed)

    def demodulate(self, samples):
        y = np.asarray(samples, dtype=np.complex128)
        n = self.rng.standard_normal((2, y.size)) * self.sigma
        return super().demodulate(y + n[0] + 1j * n[1])


class Feedback(Modem):
    def __init__(self, modulation="qpsk", c=0.5, ahead=False):
        super().__init__(modulation)
        self.c, self.ahead = float(c), ahead

    def demodulate(self, samples):
        y = np.asarray(samples, dtype=np.complex128)
        r = y - self.points[self.decide(y)]
        y2 = y.copy()
        if self.ahead:
            y2[:-1] += self.c * r[1:]
        else:
            y2[1:] += self.c * r[:-1]
        return self.to_bits(self.decide(y2))


class Lookahead(Feedback):
    def __init__(self, modulation="qpsk", c=0.5):
        super().__init__(modulation, c, ahead=True)


class Outward(Modem):
    def __init__(self, modulation="qpsk", factor=1.0):
        super().__init__(modulation)
        d = np.abs(self.points[:, None] - self.points[None, :])
        dmin = d[d > 0].min()
        self.edge = np.abs(self.points.real).max() + factor * dmin / 2

    def demodulate(self, samples):
        y = np.asarray(samples, dtype=np.complex128)
        labels = self.decide(y)
        flip = np.abs(y.real) > self.edge
        labels = np.where(flip, labels ^ (1 << (self.k - 1)), labels)
        return self.to_bits(labels)


class Rotated(Modem):
    """Decides on the input turned by ``degrees`` (a fixed phase error): deterministic, with a
    known implementation loss."""

    def __init__(self, modulation="qpsk", degrees=3.0):
        super().__init__(modulation)
        self.turn = np.exp(1j * np.radians(float(degrees)))

    def demodulate(self, samples):
        return super().demodulate(np.asarray(samples, dtype=np.complex128) * self.turn)
