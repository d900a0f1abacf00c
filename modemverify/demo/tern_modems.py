"""Device code for the invented demo scenario (see SCENARIO.md): five ports of one modem.

This file plays the part of third-party code under test. It deliberately does NOT use
modemverify's own tables: it computes its points the way firmware would, from the TS 38.211
formulas, so that a defect here is a defect the harness has to find.
"""

import numpy as np

__all__ = ["TernModem", "rrc_taps", "symbols_3gpp", "TernRrcModem"]


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


# -- the pulse-shaped builds for the new DSP: RRC taps from the closed form of the RRC impulse
#    response (common practice), symbols from the TS 38.211 5.1.3 / 5.1.4 formulas


def rrc_taps(sps, rolloff, span, frac=0.0):
    """RRC taps at t = (i - L/2 - frac) / sps symbols, i = 0..L, unit energy."""
    n = span * sps
    t = (np.arange(n + 1) - n / 2 - frac) / sps
    a = rolloff
    h = np.empty_like(t)
    for i, x in enumerate(t):
        if abs(x) < 1e-12:
            h[i] = 1 - a + 4 * a / np.pi
        elif a > 0 and abs(abs(x) - 1 / (4 * a)) < 1e-12:
            h[i] = a / np.sqrt(2) * ((1 + 2 / np.pi) * np.sin(np.pi / (4 * a))
                                     + (1 - 2 / np.pi) * np.cos(np.pi / (4 * a)))
        else:
            h[i] = (np.sin(np.pi * x * (1 - a)) + 4 * a * x * np.cos(np.pi * x * (1 + a))) / \
                (np.pi * x * (1 - (4 * a * x) ** 2))
    return h / np.sqrt(np.sum(h ** 2))


def symbols_3gpp(bits, k):
    b = np.asarray(bits, dtype=float).reshape(-1, k)
    if k == 2:
        return ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 1])) / np.sqrt(2)
    if k == 4:
        i = (1 - 2 * b[:, 0]) * (2 - (1 - 2 * b[:, 2]))
        q = (1 - 2 * b[:, 1]) * (2 - (1 - 2 * b[:, 3]))
        return (i + 1j * q) / np.sqrt(10)
    raise ValueError(k)


class TernRrcModem:
    """The Tern downlink on the new DSP: QPSK / 16QAM with RRC shaping, one knob per build
    option (and per defect the demo plants).

    trim: "full" (the whole convolution, n*sps + span*sps samples) or "same" (n*sps samples,
    the filter delay removed); lead: extra zero samples in front; frac: fractional delay of the
    pulse grid in samples; phase_deg: carrier phase; fixed_point: None or (fmt, full_scale)
    for interleaved integer output; true_rolloff: the roll-off actually used; receiver: False for a
    transmit-only build.
    """

    def __init__(self, modulation="16qam", sps=8, rolloff=0.35, span=10, trim="full", lead=0,
                 frac=0.0, phase_deg=0.0, fixed_point=None, true_rolloff=None, receiver=True):
        self.k = {"qpsk": 2, "16qam": 4}[modulation]
        self.sps, self.span, self.trim, self.lead = sps, span, trim, lead
        self.taps = rrc_taps(sps, true_rolloff if true_rolloff is not None else rolloff, span,
                             frac)
        self.rx_taps = rrc_taps(sps, rolloff, span)
        self.rot = np.exp(1j * np.radians(phase_deg))
        self.fixed_point = fixed_point
        if not receiver:  # a transmit-chain build: the harness's reference receiver listens
            self.demodulate = None

    def modulate(self, bits):
        s = symbols_3gpp(bits, self.k)
        up = np.zeros(s.size * self.sps, dtype=complex)
        up[::self.sps] = s
        y = np.convolve(up, self.taps)[: s.size * self.sps + self.span * self.sps]
        if self.trim == "same":
            d = self.span * self.sps // 2
            y = y[d:d + s.size * self.sps]
        y = np.concatenate([np.zeros(self.lead, complex), y]) * self.rot
        if self.fixed_point:
            fmt, fs = self.fixed_point
            top = 32768 if fmt == "int16" else 128
            codes = np.clip(np.rint(y.view(float) / fs * top), -top, top - 1)
            return codes.astype(fmt)
        return y

    def demodulate(self, samples):
        """Expects the reference transmitter's full waveform (n*sps + span*sps samples)."""
        x = np.asarray(samples) / self.rot
        y = np.convolve(x, self.rx_taps[::-1])
        n = (len(samples) - self.span * self.sps) // self.sps
        peaks = y[self.span * self.sps + np.arange(n) * self.sps]
        if self.k == 2:
            return np.stack([peaks.real < 0, peaks.imag < 0], 1).astype(np.uint8).ravel()
        s10 = np.sqrt(10)
        i, q = peaks.real * s10, peaks.imag * s10
        return np.stack([i < 0, q < 0, np.abs(i) > 2, np.abs(q) > 2], 1).astype(np.uint8).ravel()
