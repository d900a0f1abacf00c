"""The reference modem: the convention's own modulator, hard slicer and soft demapper.

Oracles use it as the other side when a device offers only one, and as the yardstick for soft
outputs. Hard decisions are vectorised slicers chosen from the constellation's structure: a
rectangular grid (square QAM, QPSK) is sliced per axis, equally spaced points on a circle (PSK,
BPSK) by angle; anything else by nearest point.
"""

from __future__ import annotations

import numpy as np

from ..dsp.sampling import hold, integrate_dump
from .conventions import Convention
from .labels import bits_to_labels, labels_to_bits


class ReferenceModem:
    """Modulate, slice and demap with a :class:`Convention`'s table.

    Parameters
    ----------
    convention : Convention
    samples_per_symbol : int
        Rectangular hold on transmit, integrate-and-dump on receive.
    """

    def __init__(self, convention: Convention, samples_per_symbol: int = 1):
        self.convention = convention
        self.points = np.asarray(convention.points, dtype=np.complex128)
        self.k = convention.bits_per_symbol
        self.sps = int(samples_per_symbol)
        self._label_bits = labels_to_bits(np.arange(len(self.points)), self.k).reshape(-1, self.k)
        self._slicer = _make_slicer(self.points)

    # -- transmit ---------------------------------------------------------------------------
    def modulate(self, bits: np.ndarray) -> np.ndarray:
        return hold(self.points[bits_to_labels(bits, self.k)], self.sps)

    # -- receive ----------------------------------------------------------------------------
    def symbols(self, samples: np.ndarray) -> np.ndarray:
        return integrate_dump(np.asarray(samples, dtype=np.complex128), self.sps)

    def decide_labels(self, symbols: np.ndarray) -> np.ndarray:
        return self._slicer(np.asarray(symbols, dtype=np.complex128))

    def demodulate(self, samples: np.ndarray) -> np.ndarray:
        labels = self.decide_labels(self.symbols(samples))
        return self._label_bits[labels].reshape(-1)

    def demodulate_soft(self, samples: np.ndarray, noise_var: float, *,
                        max_log: bool = False) -> np.ndarray:
        """Exact (or max-log) LLRs, positive meaning bit 0.

        ``L(b) = ln sum_{x: b=0} exp(-|y-x|^2/N0) - ln sum_{x: b=1} exp(-|y-x|^2/N0)``
        (standard; e.g. Proakis & Salehi, *Digital Communications*, 5th ed. — section from
        memory). ``noise_var`` is the complex noise variance N0 at the symbol.
        """
        y = self.symbols(samples)
        out = np.empty((y.size, self.k))
        chunk = max(1, (1 << 22) // len(self.points))
        for s in range(0, y.size, chunk):
            metric = -np.abs(y[s:s + chunk, None] - self.points[None, :]) ** 2 / noise_var
            for i in range(self.k):
                zero = self._label_bits[:, i] == 0
                m0, m1 = metric[:, zero], metric[:, ~zero]
                if max_log:
                    out[s:s + chunk, i] = m0.max(axis=1) - m1.max(axis=1)
                else:
                    out[s:s + chunk, i] = (np.logaddexp.reduce(m0, axis=1)
                                           - np.logaddexp.reduce(m1, axis=1))
        return out.reshape(-1)


def _make_slicer(points: np.ndarray):
    m = len(points)
    re = np.unique(np.round(points.real, 9))
    im = np.unique(np.round(points.imag, 9))
    if len(re) * len(im) == m and len(re) > 1 and len(im) > 1:
        return _grid_slicer(points, re, im)
    radius = np.abs(points)
    if np.allclose(radius, radius[0]) and m > 1:
        ang = np.sort(np.mod(np.angle(points), 2 * np.pi))
        steps = np.diff(np.concatenate([ang, ang[:1] + 2 * np.pi]))
        if np.allclose(steps, 2 * np.pi / m):
            return _psk_slicer(points)
    return _nearest_slicer(points)


def _grid_slicer(points, re, im):
    step_i, step_q = np.diff(re).mean(), np.diff(im).mean()
    ni, nq = len(re), len(im)
    lut = np.empty((ni, nq), dtype=np.int64)
    ii = np.rint((points.real - re[0]) / step_i).astype(int)
    qq = np.rint((points.imag - im[0]) / step_q).astype(int)
    lut[ii, qq] = np.arange(len(points))
    r0, q0 = re[0], im[0]

    def slicer(y):
        i = np.rint((y.real - r0) / step_i)
        q = np.rint((y.imag - q0) / step_q)
        np.clip(i, 0, ni - 1, out=i)
        np.clip(q, 0, nq - 1, out=q)
        return lut[i.astype(np.int64), q.astype(np.int64)]

    return slicer


def _psk_slicer(points):
    m = len(points)
    phase0 = np.angle(points[0])
    sector = np.mod(np.rint((np.angle(points) - phase0) * m / (2 * np.pi)), m).astype(int)
    lut = np.empty(m, dtype=np.int64)
    lut[sector] = np.arange(m)

    def slicer(y):
        s = np.rint((np.angle(y) - phase0) * (m / (2 * np.pi))).astype(np.int64) % m
        return lut[s]

    return slicer


def _nearest_slicer(points):
    def slicer(y):
        out = np.empty(y.size, dtype=np.int64)
        chunk = max(1, (1 << 22) // len(points))
        for s in range(0, y.size, chunk):
            out[s:s + chunk] = np.abs(y[s:s + chunk, None] - points[None, :]).argmin(axis=1)
        return out

    return slicer
