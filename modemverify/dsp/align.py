r"""Line a device's waveform up with the reference waveform of the same bits.

Model. With ``t`` counted in reference samples,

    ``device(t + delay) = gain * exp(j 2 pi freq_offset t) * reference(t) + error(t)``,

where ``device(.)`` is the band-limited interpolation of the device's samples. So a positive
``delay`` means the device's copy starts ``delay`` samples later (the device has extra lead
samples or a longer filter delay); a negative one means it starts early (its first samples are
missing). :func:`estimate_alignment` finds ``delay`` (integer and fractional part),
``freq_offset`` (cycles per sample) and the complex ``gain`` (scale and phase), and
:func:`apply_alignment` undoes them so that the result can be compared sample by sample with the
reference (e.g. by :func:`modemverify.dsp.evm.evm`).

Method (all vectorised, numpy/scipy):

1. **Integer delay** from the peak of the cross-correlation of the device with a segment of the
   reference (from its middle, at most ``2**15`` samples and half the device's length), by
   ``scipy.signal.oaconvolve`` (overlap-add, cheap for a long device and a short segment),
   normalised by the device's sliding energy so that the peak is a correlation coefficient.
   A frequency offset makes the coherent correlation fade (by ``sinc(f * segment)``), so when
   ``estimate_frequency`` and the coherent peak is weak (below 0.5) the same search is also
   run on the lag-1 products ``x[n] * conj(x[n-1])``, whose correlation does not depend on the
   offset; the better-normalised of the two peaks wins. The phase of the lag-1 peak is
   ``2 pi f``: the coarse frequency estimate.
2. **Frequency offset**: least squares on the unwrapped phase of block sums of
   ``device[n + D] * conj(reference[n])`` over the whole overlap (after removing the coarse
   estimate), weighted by the block magnitudes.
3. **Fractional delay**: the coherent correlation over the overlap (its central ``2**18``
   samples at most) at lags ``D - 32 ... D + 32`` (65 dot products), interpolated with a
   Kaiser-windowed sinc (band-limited interpolation; the correlation of a band-limited signal
   is band-limited); the device's
   energy under the same window is interpolated alike, and ``abs(c)**2 / energy`` (the
   least-squares criterion) is maximised over ``[D - 1, D + 1]`` by
   ``scipy.optimize.minimize_scalar``.
4. **Gain**: least squares ``sum(y * conj(r)) / sum(abs(r)**2)`` with ``y`` the device after
   :func:`apply_alignment` at unit gain; the residual EVM and the correlation coefficient are
   measured on the same window as step 3 (so the estimate costs a fixed amount beyond the
   delay search and one pass for the frequency, whatever the record length).

Fractional delays are applied with an FFT phase ramp (exact for a band-limited, zero-padded
signal; samples near the ends of the device ring as for any band-limited interpolation).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from numbers import Integral

import numpy as np
import scipy.fft
from scipy import optimize, signal

from modemverify.errors import ConfigError

from ..options import as_1d_complex

__all__ = ["Alignment", "estimate_alignment", "apply_alignment"]

_SEGMENT = 1 << 15     # reference samples used by the integer-delay search
_SINC_HALF = 32        # correlation lags each side used by the fractional refinement
_KAISER_BETA = 10.0    # window of the interpolating sinc (measured: delay bias ~1e-4 sample)
_FFT_PAD = 64          # zeros each side before the FFT delay, to keep wrap-around off the data
_REFINE_MAX = 1 << 18   # reference samples used by the fractional refinement
_COHERENT_ENOUGH = 0.5  # coherent correlation coefficient that needs no frequency-robust search


@dataclass(frozen=True)
class Alignment:
    """Result of :func:`estimate_alignment` (model in the module docstring).

    Attributes
    ----------
    delay_samples : float
        ``device(t + delay) ~ reference(t)``: integer plus fractional part, in samples.
    gain : complex
        Scale and phase of the device relative to the reference.
    freq_offset : float
        Frequency offset of the device, cycles per sample (0 when not estimated).
    residual_evm : float
        RMS error after alignment, in percent of the reference RMS:
        ``100 * sqrt(sum(abs(y - r)**2) / sum(abs(r)**2))`` with ``y`` the aligned device.
    correlation : float
        Magnitude of the normalised correlation coefficient between the aligned device and the
        reference, in ``[0, 1]``.
    overlap : int
        Number of reference samples the device covers at this delay.

    Notes
    -----
    ``gain``, ``residual_evm`` and ``correlation`` are measured on the estimator's window: the
    overlap less 32 samples at each end, and at most its central ``2**18`` samples. For a
    figure over the whole record, apply the alignment (:func:`apply_alignment`) and measure
    the result (e.g. :func:`modemverify.dsp.evm.evm`).
    """

    delay_samples: float
    gain: complex
    freq_offset: float
    residual_evm: float
    correlation: float
    overlap: int


def estimate_alignment(device, reference, *, max_delay: int | None = None,
                       estimate_frequency: bool = True) -> Alignment:
    r"""Estimate delay, frequency offset and complex gain of ``device`` against ``reference``.

    Parameters
    ----------
    device, reference : array_like
        1-D complex waveforms; either may be longer (extra lead/trail samples are allowed).
    max_delay : int, optional
        Largest ``abs(delay)`` to consider, in samples. Default: any delay at which the central
        reference segment (see the module notes) lies inside the device, which covers offsets
        of at least a quarter of the device's length either way.
    estimate_frequency : bool, optional
        Estimate and remove a carrier frequency offset (default). When False the offset is
        taken to be 0 and only the coherent correlation is searched.

    Returns
    -------
    Alignment
        For an all-zero device: delay 0, gain 0, correlation 0 and residual 100 % (there is
        nothing to undo; :func:`apply_alignment` refuses a zero gain).

    Raises
    ------
    ConfigError
        For empty or non-finite inputs, a zero reference, or no admissible delay.

    Notes
    -----
    The offset estimate is unambiguous for ``abs(f) < 0.5`` cycles/sample in principle, but the
    coarse lag-1 estimate degrades as the per-sample SNR drops; offsets of a few 1e-3
    cycles/sample and below are the intended use. A periodic reference (one repeated pattern)
    has several equal correlation peaks; the largest one wins, ties to the smallest delay.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> ref = np.convolve(rng.standard_normal(4000) + 1j * rng.standard_normal(4000),
    ...                   np.hanning(16), mode="same")
    >>> dev = np.concatenate([np.zeros(7), 0.5j * ref])
    >>> a = estimate_alignment(dev, ref)
    >>> round(a.delay_samples, 3), complex(round(a.gain.real, 3), round(a.gain.imag, 3))
    (7.0, 0.5j)
    """
    dev = as_1d_complex(device, "device", non_empty=True)
    ref = as_1d_complex(reference, "reference", non_empty=True)
    if max_delay is not None:
        if isinstance(max_delay, bool) or not isinstance(max_delay, Integral) or max_delay < 0:
            raise ConfigError(f"expected a non-negative integer, got {max_delay!r}",
                              key="max_delay")
        max_delay = int(max_delay)
    e_ref = float(np.vdot(ref, ref).real)
    if e_ref == 0:
        raise ConfigError("the reference waveform is all zeros", key="reference")
    if not np.any(dev):
        # Nothing to line up: report the null result rather than a delay picked from noise.
        return Alignment(0.0, 0j, 0.0, 100.0, 0.0, min(dev.size, ref.size))

    # 1. integer delay (and coarse frequency) on a central reference segment
    # At most half the device, so that the segment fits at delays of either sign even when
    # the device is shorter than the reference.
    s_len = max(1, min(ref.size, _SEGMENT, dev.size // 2))
    s0 = (ref.size - s_len) // 2
    seg = ref[s0:s0 + s_len]
    d_int, rho, f_coarse = _coherent_search(dev, seg, s0, max_delay)
    # A coherent peak above 0.5 already pins the delay (an offset large enough to matter would
    # have faded it), so the second search only runs when the first one is weak.
    if estimate_frequency and rho < _COHERENT_ENOUGH and seg.size >= 3 and dev.size >= 3:
        found = _differential_search(dev, seg, s0, max_delay)
        if found is not None and found[1] > rho:
            d_int, rho, f_coarse = found
    if d_int is None:
        raise ConfigError(f"no admissible delay: device of {dev.size} samples, reference "
                          f"segment of {seg.size}, max_delay={max_delay}", key="max_delay")

    # 2. frequency offset over the whole overlap
    freq = 0.0
    if estimate_frequency:
        freq = f_coarse + _fine_frequency(dev, ref, d_int, f_coarse)

    # 3. fractional delay from the band-limited interpolation of the correlation, on a central
    #    window of the overlap, with the device slice under it de-rotated once (about sample
    #    d_int; the constant phase of the fraction is restored below)
    lo, hi = _refine_window(dev.size, ref.size, d_int)
    if hi - lo >= 2:
        start = max(0, lo + d_int - _SINC_HALF - _FFT_PAD)
        stop = min(dev.size, hi + d_int + _SINC_HALF + _FFT_PAD)
        x = _derotate(dev[start:stop], freq, d_int - start)
        delay = float(d_int) + _fractional_delay(x, ref, d_int - start, lo, hi)
    else:  # too short to refine: integer delay, whole overlap
        start, x, delay = 0, _derotate(dev, freq, d_int), float(d_int)
        lo, hi = _overlap(dev.size, ref.size, delay)
    if max_delay is not None:
        delay = float(np.clip(delay, -max_delay, max_delay))
    if hi <= lo:
        raise ConfigError("the device and the reference do not overlap at the estimated "
                          "delay", key="device")

    # 4. gain, residual and correlation on the same window: y is apply_alignment at unit gain
    yo = _shift(x, lo + delay - start, hi - lo)
    if freq:
        yo *= np.exp(2j * np.pi * freq * (delay - d_int))
    ro = ref[lo:hi]
    overlap = _overlap(dev.size, ref.size, delay)
    n_overlap = max(0, overlap[1] - overlap[0])
    e_r = float(np.vdot(ro, ro).real)
    e_y = float(np.vdot(yo, yo).real)
    c = complex(np.vdot(ro, yo))       # sum(y * conj(r))
    if e_r == 0 or e_y == 0:
        return Alignment(delay, 0j, freq, 100.0, 0.0, n_overlap)
    gain = c / e_r
    err = yo / gain - ro
    residual = 100.0 * math.sqrt(float(np.vdot(err, err).real) / e_r)
    corr = abs(c) / math.sqrt(e_r * e_y)
    return Alignment(delay, gain, freq, residual, min(1.0, corr), n_overlap)


def apply_alignment(device, alignment: Alignment, length: int) -> np.ndarray:
    r"""Undo an :class:`Alignment`: return ``length`` samples lined up with the reference.

    ``out[m] = device(m + delay) * exp(-j 2 pi f m) / gain`` for ``m = 0 ... length - 1``, where
    ``device(.)`` is the band-limited (FFT) interpolation of the device's samples; positions
    outside the device are 0.

    Parameters
    ----------
    device : array_like
        1-D complex waveform.
    alignment : Alignment
    length : int
        Number of output samples (normally the reference's length).

    Returns
    -------
    numpy.ndarray of complex128
    """
    dev = as_1d_complex(device, "device", non_empty=True)
    if isinstance(length, bool) or not isinstance(length, Integral) or length < 0:
        raise ConfigError(f"expected a non-negative integer, got {length!r}", key="length")
    gain = complex(alignment.gain)
    if gain == 0 or not (math.isfinite(gain.real) and math.isfinite(gain.imag)):
        raise ConfigError(f"cannot undo a gain of {gain!r}", key="alignment.gain")
    delay = float(alignment.delay_samples)
    x = _derotate(dev, float(alignment.freq_offset), delay)
    out = _shift(x, delay, length)
    out /= gain
    return out


def _derotate(x: np.ndarray, f: float, about: float) -> np.ndarray:
    """``x[n] * exp(-j 2 pi f (n - about))``; at ``n = m + delay`` with ``about = delay`` this
    is the model's ``exp(-j 2 pi f m)``."""
    if f == 0.0:
        return x
    n = np.arange(x.size, dtype=np.float64) - about
    # Reduce to a fraction of a turn before exp, so long records keep full phase precision.
    return x * np.exp(-2j * np.pi * np.mod(f * n, 1.0))


def _shift(x: np.ndarray, delay: float, length: int) -> np.ndarray:
    """``out[m] = x(m + delay)``, ``m = 0 ... length - 1``, zero outside ``x``."""
    d_int = math.floor(delay)
    frac = delay - d_int
    if frac > 1e-12:
        x = _fft_advance(x, frac)
    out = np.zeros(length, dtype=np.complex128)
    m_lo = max(0, -d_int)
    m_hi = min(length, x.size - d_int)
    if m_hi > m_lo:
        out[m_lo:m_hi] = x[m_lo + d_int:m_hi + d_int]
    return out


# --------------------------------------------------------------------------------------------
# steps


def _lag_range(n_dev: int, s_len: int, s0: int, max_delay):
    """Admissible integer delays D with the segment fully inside the device.

    The segment (reference samples s0 ... s0 + s_len - 1) lands on device samples
    s0 + D ... s0 + D + s_len - 1.
    """
    lo, hi = -s0, n_dev - s_len - s0
    if max_delay is not None:
        lo, hi = max(lo, -max_delay), min(hi, max_delay)
    return lo, hi


def _sliding_energy(x: np.ndarray, width: int) -> np.ndarray:
    """sum(abs(x[p:p+width])**2) for p = 0 ... len(x) - width."""
    c = np.concatenate([[0.0], np.cumsum(x.real ** 2 + x.imag ** 2)])
    return c[width:] - c[:-width]


def _sliding_sum(x: np.ndarray, width: int) -> np.ndarray:
    c = np.concatenate([[0j], np.cumsum(x)])
    return c[width:] - c[:-width]


def _pick(score: np.ndarray, lo: int):
    """argmax of score (indexed by D - lo); ties go to the smallest abs(D)."""
    best = float(score.max())
    lags = np.flatnonzero(score >= best * (1 - 1e-12)) + lo
    return int(lags[np.argmin(np.abs(lags))]), best


def _correlation_scores(x, seg, s0, lo, hi, centred: bool):
    """Normalised correlation of ``seg`` placed at device positions ``s0 + lo ... s0 + hi``.

    Only the part of ``x`` those placements touch is transformed, so a small ``max_delay``
    makes the search cheap. Returns (scores, raw correlations), indexed by ``D - lo``.
    """
    w = seg.size
    part = x[s0 + lo:s0 + hi + w]
    # Full convolution with the reversed conjugate segment: index q + w - 1 is the
    # correlation with the segment placed at position q of ``part``.
    c = signal.oaconvolve(part, np.conj(seg[::-1]), mode="full")[w - 1:part.size]
    e_x = _sliding_energy(part, w)
    if centred:
        e_x = np.maximum(e_x - np.abs(_sliding_sum(part, w)) ** 2 / w, 0.0)
    e_seg = float(np.vdot(seg, seg).real)
    with np.errstate(divide="ignore", invalid="ignore"):
        score = np.abs(c) / np.sqrt(e_x * e_seg)
    return np.nan_to_num(score, nan=0.0, posinf=0.0), c


def _coherent_search(dev, seg, s0, max_delay):
    lo, hi = _lag_range(dev.size, seg.size, s0, max_delay)
    if hi < lo:
        return None, -1.0, 0.0
    score, _ = _correlation_scores(dev, seg, s0, lo, hi, centred=False)
    d, rho = _pick(score, lo)
    return d, rho, 0.0


def _differential_search(dev, seg, s0, max_delay):
    """The same search on lag-1 products, insensitive to a frequency offset.

    ``u[n] = dev[n+1] conj(dev[n])`` and ``v[n] = seg[n+1] conj(seg[n])`` keep the alignment
    of the signals; a frequency offset f multiplies u by the constant exp(j 2 pi f). The mean
    of v is removed (its DC would otherwise correlate with the DC of u at every lag).
    """
    u = dev[1:] * np.conj(dev[:-1])
    v = seg[1:] * np.conj(seg[:-1])
    v = v - v.mean()
    lo, hi = _lag_range(u.size, v.size, s0, max_delay)
    if hi < lo or not np.any(v):
        return None
    # Normalised by the energy of u about its own window mean, so a perfect match scores 1.
    score, c = _correlation_scores(u, v, s0, lo, hi, centred=True)
    d, rho = _pick(score, lo)
    f_coarse = float(np.angle(c[d - lo])) / (2 * np.pi)
    return d, rho, f_coarse


def _overlap(n_dev: int, n_ref: int, delay: float) -> tuple[int, int]:
    """Reference indices [lo, hi) whose device position n + delay lies inside the device."""
    # A delay within 1e-6 of an integer counts as that integer (estimates are never exact).
    lo = max(0, math.ceil(-delay - 1e-6))
    hi = min(n_ref, math.floor(n_dev - 1 - delay + 1e-6) + 1)
    return lo, hi


def _fine_frequency(dev, ref, d_int, f_coarse) -> float:
    lo, hi = _overlap(dev.size, ref.size, d_int)
    if hi - lo < 16:
        return 0.0
    n = np.arange(lo, hi, dtype=np.float64)
    z = dev[lo + d_int:hi + d_int] * np.conj(ref[lo:hi])
    if f_coarse:
        z = z * np.exp(-2j * np.pi * np.mod(f_coarse * n, 1.0))
    # Blocks short enough that the residual after the coarse estimate turns the phase by far
    # less than pi between neighbours, and many enough for a well-conditioned fit.
    block = int(np.clip((hi - lo) // 256, 8, 256))
    k = (hi - lo) // block
    if k < 3:
        return 0.0
    sums = z[:k * block].reshape(k, block).sum(axis=1)
    weight = np.abs(sums)
    if not np.any(weight > 0):
        return 0.0
    phase = np.unwrap(np.angle(sums))
    centre = lo + (np.arange(k) + 0.5) * block - 0.5
    slope = np.polyfit(centre, phase, 1, w=weight)[0]
    return float(slope) / (2 * np.pi)


def _refine_window(n_dev: int, n_ref: int, d_int: int) -> tuple[int, int]:
    """Reference indices [lo, hi) of the refinement (and gain) window.

    Valid for every lag d_int - w ... d_int + w; at most _REFINE_MAX samples, centred. The
    central part suffices (its delay error is already far below 1e-3 samples at any SNR where
    alignment makes sense), and 65 passes over a long record cost memory bandwidth.
    """
    w = _SINC_HALF
    lo = max(0, -(d_int - w))
    hi = min(n_ref, n_dev - (d_int + w))
    if hi - lo > _REFINE_MAX:
        mid = (lo + hi) // 2
        lo, hi = mid - _REFINE_MAX // 2, mid + _REFINE_MAX // 2
    return lo, hi


def _fractional_delay(x, ref, d_int, lo, hi) -> float:
    """Offset in [-1, 1] from d_int maximising the least-squares correlation criterion.

    ``x`` is the device (or a slice of it, with ``d_int`` relative to the slice start);
    ``ref[lo:hi]`` is the window, valid for lags ``d_int - w ... d_int + w``.
    """
    w = _SINC_HALF
    r = ref[lo:hi]
    # c[l] = sum_n x[n + d_int + l] conj(r[n]) for l = -w ... w: 2w + 1 BLAS dot products over
    # the window (a loop over lags, not samples).
    c = np.array([np.vdot(r, x[lo + d_int + l:hi + d_int + l]) for l in range(-w, w + 1)])
    # Energy of the device under the same window at each lag: over a finite window it varies
    # with the lag, and maximising abs(c) alone would pull the estimate towards the lag with
    # more energy. abs(c)**2 / energy is the least-squares criterion (the residual after the
    # best complex gain is energy - abs(c)**2 / sum(abs(r)**2)).
    part = x[lo + d_int - w:hi + d_int + w]
    cum = np.concatenate([[0.0], np.cumsum(part.real ** 2 + part.imag ** 2)])
    n = hi - lo
    energy = cum[n:n + 2 * w + 1] - cum[:2 * w + 1]
    lags = np.arange(-w, w + 1, dtype=np.float64)
    half = w + 1.0
    i0_beta = float(np.i0(_KAISER_BETA))

    def kernel(tau: float) -> np.ndarray:
        u = tau - lags
        return np.sinc(u) * np.i0(_KAISER_BETA * np.sqrt(np.clip(1 - (u / half) ** 2, 0,
                                                                  None))) / i0_beta

    def cost(tau: float) -> float:
        k = kernel(tau)
        e = float(np.dot(energy, k))
        return -abs(complex(np.dot(c, k))) ** 2 / e if e > 0 else 0.0

    res = optimize.minimize_scalar(cost, bounds=(-1.0, 1.0), method="bounded",
                                   options={"xatol": 1e-7})
    return float(res.x)


def _fft_advance(x: np.ndarray, frac: float) -> np.ndarray:
    """``y[n] = x(n + frac)`` by an FFT phase ramp on the zero-padded signal."""
    n = x.size
    size = scipy.fft.next_fast_len(n + 2 * _FFT_PAD)
    buf = np.zeros(size, dtype=np.complex128)
    buf[_FFT_PAD:_FFT_PAD + n] = x
    spec = scipy.fft.fft(buf, overwrite_x=True)
    # exp(j 2 pi k frac / size) for signed bins k; the negative half is the conjugate of the
    # positive half, which halves the exponentials.
    half = size // 2
    pos = np.exp(2j * np.pi * frac / size * np.arange(half + 1))
    ramp = np.empty(size, dtype=np.complex128)
    ramp[:half + 1] = pos
    ramp[half + 1:] = np.conj(pos[1:size - half][::-1])
    if size % 2 == 0:
        # The Nyquist bin stands for +-1/2 at once: use the mean of both ramps (real).
        ramp[half] = math.cos(np.pi * frac)
    spec *= ramp
    y = scipy.fft.ifft(spec, overwrite_x=True)
    return y[_FFT_PAD:_FFT_PAD + n]
