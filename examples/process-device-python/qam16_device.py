"""Example device process for ``adapter: process``: a 16QAM modem per 3GPP TS 38.211 5.1.4.

An invented example device. It computes its points from the standard's formula,

    d = ((1 - 2 b0)(2 - (1 - 2 b2)) + j (1 - 2 b1)(2 - (1 - 2 b3))) / sqrt(10),

not from modemverify's tables, and talks to the harness through the frame protocol with
``modemverify.adapters._wire.serve`` (the harness's own protocol module), so it needs numpy and
modemverify installed. A device in another language implements the same frames itself (see
../process-device-c).

``params`` of the device file arrive as keyword arguments of ``Qam16Device``: ``swap_arms: true``
plants a defect (I driven by the Q bits) to see the mapping check fail.
"""

import sys

import numpy as np

from modemverify.adapters._wire import serve

SCALE = 1 / np.sqrt(10)


class Qam16Device:
    def __init__(self, swap_arms=False):
        b = (np.arange(16)[:, None] >> np.arange(3, -1, -1)) & 1  # label -> bits b0 b1 b2 b3
        i = (1 - 2 * b[:, 0]) * (2 - (1 - 2 * b[:, 2]))
        q = (1 - 2 * b[:, 1]) * (2 - (1 - 2 * b[:, 3]))
        if swap_arms:
            i, q = q, i
        self.points = SCALE * (i + 1j * q)
        self.label_bits = b.astype(np.uint8)

    def modulate(self, bits):
        labels = bits.reshape(-1, 4) @ np.array([8, 4, 2, 1])
        return self.points[labels]

    def demodulate(self, samples):
        d = np.abs(samples[:, None] - self.points[None, :])
        return self.label_bits[d.argmin(axis=1)].reshape(-1)

    def demodulate_soft(self, samples, noise_var):
        # exact LLRs, positive meaning bit 0: log-sum-exp over the points with each bit value
        metric = -np.abs(samples[:, None] - self.points[None, :]) ** 2 / noise_var
        llr = np.empty((samples.size, 4))
        for j in range(4):
            zero = self.label_bits[:, j] == 0
            llr[:, j] = (np.logaddexp.reduce(metric[:, zero], axis=1)
                         - np.logaddexp.reduce(metric[:, ~zero], axis=1))
        return llr.reshape(-1)


if __name__ == "__main__":
    sys.exit(serve(Qam16Device, name="qam16-device (Python example)"))
