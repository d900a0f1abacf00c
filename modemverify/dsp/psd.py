r"""Measured spectra of sampled waveforms: Welch PSD, bandwidths, spectral masks and ACLR.

Frequencies are in units of the symbol rate ``Rs`` throughout (the sample rate is ``sps * Rs``),
two-sided and centred on the carrier (0), so a result reads directly against the theory of
:meth:`modemverify.dsp.pulses.PulseShape.psd` and against masks written in multiples of ``Rs``.

References
----------
.. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of power spectra",
   IEEE Trans. Audio Electroacoust. 15(2), 1967 (the averaged-periodogram estimator;
   ``scipy.signal.welch`` implements it).
.. [2] ITU Radio Regulations, No. 1.153 (occupied bandwidth: 0.5 % of the power below the lower
   and above the upper limit); Rec. ITU-R SM.328.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from numbers import Integral, Real

import numpy as np
from scipy import signal

from modemverify.errors import ConfigError

from ..options import as_1d_complex

__all__ = [
    "welch_psd", "occupied_bandwidth", "x_db_bandwidth", "MaskResult", "mask_level_db",
    "mask_check", "channel_power", "aclr",
]

# Default frequency resolution: 256 bins per symbol rate at most (finer only costs averages),
# and at least 16 (coarser would blur a roll-off band of 0.1 Rs beyond use).
_BINS_PER_RS_MAX = 256
_BINS_PER_RS_MIN = 16
_NPERSEG_MIN = 64

# Floor for dB conversions of a PSD: an exactly-zero bin is reported at -300 dBc, not -inf.
_DB_FLOOR = 1e-30


def _pow2_ceil(n: float) -> int:
    return 1 << max(0, math.ceil(math.log2(max(1.0, n))))


def _pow2_floor(n: float) -> int:
    return 1 << max(0, math.floor(math.log2(max(1.0, n))))


def _averages(n_samples: int, nperseg: int) -> int:
    """Segments of Welch's method with 50 % overlap."""
    step = nperseg - nperseg // 2
    return 0 if n_samples < nperseg else (n_samples - nperseg) // step + 1


def welch_psd(samples, sps: int, *, nperseg: int | None = None, averages_min: int = 32,
              window: str = "hann") -> tuple[np.ndarray, np.ndarray]:
    r"""Two-sided, centred power spectral density by Welch's method.

    Parameters
    ----------
    samples : array_like
        1-D complex baseband samples.
    sps : int
        Samples per symbol: the sample rate is ``sps`` in units of ``Rs``.
    nperseg : int, optional
        Segment (FFT) length. Default: the largest power of two that leaves at least
        ``averages_min`` segments (50 % overlap), capped at 256 bins per ``Rs``
        (``nperseg <= 256 * sps`` rounded up to a power of two).
    averages_min : int, optional
        Fewest segments to average (default 32; the relative standard deviation of each bin is
        then at most about ``1/sqrt(32)`` before overlap correlation).
    window : str, optional
        Any ``scipy.signal.get_window`` name. ``'hann'`` (default) leaks below about -90 dB a few
        tens of bins from a band edge at the default resolution, enough for masks down to about
        -60 dBc; use ``'blackmanharris'`` when a mask needs more dynamic range near steep edges.

    Returns
    -------
    f : numpy.ndarray
        Frequencies in units of ``Rs``, increasing, from ``-sps/2`` (``fftshift`` order).
    psd : numpy.ndarray
        Power per unit of ``Rs``: ``sum(psd) * (f[1] - f[0])`` is the mean sample power
        ``mean(abs(x)**2)``. For a unit-energy pulse shaper (``Es = 1``) multiply by ``sps`` to
        compare with :meth:`~modemverify.dsp.pulses.PulseShape.psd`, which integrates to 1.

    Raises
    ------
    ConfigError
        When the record is too short for ``averages_min`` segments at the coarsest allowed
        resolution (16 bins per ``Rs``, at least 64 points), or for a bad argument.

    Notes
    -----
    ``scipy.signal.welch`` with ``return_onesided=False``, ``scaling='density'``, 50 % overlap
    and ``detrend=False`` (the default mean removal per segment would delete a carrier at DC,
    which a spectrum check must see) [1]_.
    """
    x = as_1d_complex(samples, "samples")
    sps = _check_int(sps, "sps", 1)
    averages_min = _check_int(averages_min, "averages_min", 1)
    lowest = max(_NPERSEG_MIN, _pow2_ceil(_BINS_PER_RS_MIN * sps))
    if nperseg is None:
        cap = _pow2_ceil(_BINS_PER_RS_MAX * sps)
        # With 50 % overlap K segments need (K + 1) * nperseg / 2 samples.
        fit = _pow2_floor(2.0 * x.size / (averages_min + 1)) if x.size else 0
        nperseg = min(cap, fit)
        if nperseg < lowest or _averages(x.size, nperseg) < averages_min:
            need = (averages_min + 1) * lowest // 2  # K half-overlapped segments
            raise ConfigError(f"record of {x.size} samples is too short for a PSD with "
                              f"{averages_min} averages at {_BINS_PER_RS_MIN} bins per symbol "
                              f"rate (sps={sps}); need at least {need} samples", key="samples")
    else:
        nperseg = _check_int(nperseg, "nperseg", 8)
        if _averages(x.size, nperseg) < averages_min:
            raise ConfigError(f"record of {x.size} samples gives "
                              f"{_averages(x.size, nperseg)} segments of {nperseg}; expected "
                              f"at least averages_min={averages_min}", key="samples")
    f, p = signal.welch(x, fs=float(sps), window=window, nperseg=nperseg,
                        noverlap=nperseg // 2, detrend=False, return_onesided=False,
                        scaling="density")
    return np.fft.fftshift(f), np.fft.fftshift(p)


def _cumulative_power(f: np.ndarray, psd: np.ndarray) -> np.ndarray:
    """Cumulative power at the bin *edges* ``f - df/2`` (length ``len(f) + 1``).

    Each bin's power ``psd * df`` is spread uniformly over the bin, so interpolating this
    cumulative sum linearly interpolates within a bin.
    """
    df = f[1] - f[0]
    return np.concatenate([[0.0], np.cumsum(psd) * df])


def _check_spectrum(f, psd) -> tuple[np.ndarray, np.ndarray]:
    f = np.asarray(f, dtype=np.float64)
    p = np.asarray(psd, dtype=np.float64)
    if f.ndim != 1 or p.shape != f.shape or f.size < 3:
        raise ConfigError(f"expected 1-D frequency and PSD arrays of the same length >= 3, got "
                          f"shapes {f.shape} and {p.shape}", key="psd")
    df = np.diff(f)
    if not (np.all(df > 0) and np.allclose(df, df[0], rtol=1e-6, atol=0)):
        raise ConfigError("expected equally spaced, increasing frequencies (as welch_psd "
                          "returns)", key="f")
    if not np.all(np.isfinite(p)) or np.any(p < 0):
        raise ConfigError("expected a finite, non-negative PSD", key="psd")
    if not np.any(p > 0):
        raise ConfigError("the PSD is zero everywhere", key="psd")
    return f, p


def occupied_bandwidth(f, psd, fraction: float = 0.99) -> tuple[float, float, float]:
    r"""Occupied bandwidth of a measured spectrum (ITU Radio Regulations No. 1.153).

    The band ``[f_low, f_high]`` such that ``(1 - fraction) / 2`` of the total power lies below
    ``f_low`` and the same above ``f_high`` (0.5 % each for 99 %) [2]_. The cumulative power is
    interpolated linearly inside a bin (each bin's power spread over its width).

    Parameters
    ----------
    f, psd : array_like
        Equally spaced frequencies (units of ``Rs``) and PSD, e.g. from :func:`welch_psd`.
    fraction : float, optional
        In ``(0, 1)``; default 0.99.

    Returns
    -------
    (width, f_low, f_high) : tuple of float
        In the units of ``f``.

    Examples
    --------
    >>> f = (np.arange(400) - 199.5) / 100       # bins of 0.01 centred on +-0.005, ...
    >>> w, lo, hi = occupied_bandwidth(f, np.where(abs(f) < 0.5, 1.0, 0.0))
    >>> round(w, 3), round(lo, 3), round(hi, 3)
    (0.99, -0.495, 0.495)
    """
    f, p = _check_spectrum(f, psd)
    fraction = _check_fraction(fraction)
    cum = _cumulative_power(f, p)
    total = cum[-1]
    edges = np.concatenate([f - (f[1] - f[0]) / 2, [f[-1] + (f[1] - f[0]) / 2]])
    tail = (1.0 - fraction) / 2.0 * total
    # cum is non-decreasing; np.interp needs strictly increasing x, so search explicitly.
    lo = _invert_cumulative(cum, edges, tail)
    hi = _invert_cumulative(cum, edges, total - tail)
    return hi - lo, lo, hi


def _invert_cumulative(cum: np.ndarray, edges: np.ndarray, level: float) -> float:
    """The frequency where the (piecewise-linear) cumulative power first reaches ``level``."""
    i = int(np.searchsorted(cum, level, side="left"))
    if i <= 0:
        return float(edges[0])
    if i >= cum.size:
        return float(edges[-1])
    c0, c1 = cum[i - 1], cum[i]
    t = 0.0 if c1 == c0 else (level - c0) / (c1 - c0)
    return float(edges[i - 1] + t * (edges[i] - edges[i - 1]))


def x_db_bandwidth(f, psd, x_db: float) -> tuple[float, float, float]:
    r"""Width between the outermost frequencies where the PSD is within ``x_db`` of its peak.

    The peak is the largest PSD value. The crossings of the level ``peak * 10**(-x_db/10)`` are
    located by linear interpolation (in dB) between the outermost bin at or above it and its
    outer neighbour. ``x_db = 3`` is the half-power bandwidth (``0.886 / Ts`` for a rectangular
    pulse: Sklar, *Digital Communications*, sec. 1.7.2, from memory).

    Parameters
    ----------
    f, psd : array_like
        Equally spaced frequencies and PSD.
    x_db : float
        Positive level below the peak, in dB.

    Returns
    -------
    (width, f_low, f_high) : tuple of float

    Notes
    -----
    On a Welch estimate the peak is the largest of many noisy bins and is biased upwards, which
    narrows the result; use many averages, or smooth the PSD first, when this matters.
    """
    f, p = _check_spectrum(f, psd)
    if isinstance(x_db, bool) or not isinstance(x_db, Real) or not (0 < x_db < math.inf):
        raise ConfigError(f"expected a positive number of dB, got {x_db!r}", key="x_db")
    db = 10.0 * np.log10(np.maximum(p, _DB_FLOOR) / p.max())
    level = -float(x_db)
    inside = np.flatnonzero(db >= level)
    i_lo, i_hi = int(inside[0]), int(inside[-1])

    def cross(i_in: int, i_out: int) -> float:
        if i_out < 0 or i_out >= f.size:
            return float(f[i_in])
        d_in, d_out = db[i_in], db[i_out]
        t = 0.0 if d_in == d_out else (d_in - level) / (d_in - d_out)
        return float(f[i_in] + t * (f[i_out] - f[i_in]))

    lo, hi = cross(i_lo, i_lo - 1), cross(i_hi, i_hi + 1)
    return hi - lo, lo, hi


@dataclass(frozen=True)
class MaskResult:
    """Outcome of :func:`mask_check`.

    Attributes
    ----------
    passed : bool
        No bin above the mask.
    worst_margin_db : float
        ``min(mask_dBc - psd_dBc)`` over the bins the mask covers; negative when violated.
    worst_freq : float
        Frequency (units of ``Rs``) of that bin.
    violations : list of (float, float)
        Frequency ranges ``(first_bin, last_bin)`` of consecutive bins above the mask.
    """

    worst_margin_db: float
    worst_freq: float
    violations: list = field(default_factory=list)

    @property
    def passed(self) -> bool:
        return not self.violations


def mask_level_db(mask_points, offsets) -> np.ndarray:
    """The mask at ``abs(offsets)``: piecewise-linear in dB between breakpoints, held flat
    before the first and after the last breakpoint."""
    pts = _check_mask(mask_points)
    xs = np.array([p[0] for p in pts])
    ys = np.array([p[1] for p in pts])
    return np.interp(np.abs(np.asarray(offsets, dtype=np.float64)), xs, ys)


def _check_mask(mask_points):
    try:
        pts = [(float(a), float(b)) for a, b in mask_points]
    except (TypeError, ValueError):
        raise ConfigError(f"expected a list of (offset_rs, dBc) pairs, got {mask_points!r}",
                          key="mask_points") from None
    if not pts:
        raise ConfigError("expected at least one (offset_rs, dBc) breakpoint", key="mask_points")
    xs = [p[0] for p in pts]
    if any(not math.isfinite(v) for p in pts for v in p) or xs[0] < 0 or \
            any(b < a for a, b in zip(xs, xs[1:])):
        raise ConfigError(f"expected finite breakpoints with non-negative, non-decreasing "
                          f"offsets, got {mask_points!r}", key="mask_points")
    return pts


def mask_check(f, psd, mask_points) -> MaskResult:
    r"""Hold a measured PSD against a spectral mask.

    Parameters
    ----------
    f, psd : array_like
        Equally spaced frequencies (units of ``Rs``, centred on the carrier) and PSD.
    mask_points : sequence of (offset_rs, dBc)
        Breakpoints of the mask, offsets from the carrier in units of ``Rs``, non-decreasing.
        The mask is piecewise-linear in dB between breakpoints, flat before the first and after
        the last, and symmetric about the carrier (applied at ``abs(f)``).

    Returns
    -------
    MaskResult

    Notes
    -----
    **Reference level.** ``dBc`` here is relative to the highest PSD bin (the in-band peak
    density), so the mask's 0 dBc is the peak of the signal's own spectrum. A mask that a
    standard states relative to the total carrier power or to a power in a reference bandwidth
    must be converted to this reference first. The comparison is bin by bin at the resolution
    of ``f`` (no extra measurement filter).
    """
    f, p = _check_spectrum(f, psd)
    mask = mask_level_db(mask_points, f)
    db = 10.0 * np.log10(np.maximum(p, _DB_FLOOR) / p.max())
    margin = mask - db
    # the worst margin where the mask attenuates (below 0 dBc): in band, where the mask is
    # 0 dBc and the PSD at its peak, the margin is about 0 whatever the device does, and would
    # hide how close the skirts come (a violation anywhere still fails, below)
    skirts = mask < 0
    judged = np.flatnonzero(skirts) if skirts.any() else np.arange(margin.size)
    worst = int(judged[np.argmin(margin[judged])])
    over = margin < 0
    violations = []
    if over.any():
        # Runs of consecutive bins above the mask: starts where over turns on, ends where off.
        d = np.diff(np.concatenate([[0], over.view(np.int8), [0]]))
        starts, stops = np.flatnonzero(d == 1), np.flatnonzero(d == -1) - 1
        violations = [(float(f[a]), float(f[b])) for a, b in zip(starts, stops)]
    return MaskResult(worst_margin_db=float(margin[worst]), worst_freq=float(f[worst]),
                      violations=violations)


def channel_power(f, psd, low: float, high: float) -> float:
    """Power of the PSD in ``[low, high]`` (rectangular window, partial bins pro rata)."""
    f, p = _check_spectrum(f, psd)
    cum = _cumulative_power(f, p)
    edges = np.concatenate([f - (f[1] - f[0]) / 2, [f[-1] + (f[1] - f[0]) / 2]])
    lo, hi = np.interp([low, high], edges, cum)
    return float(hi - lo)


def aclr(f, psd, channel_bw_rs: float, offset_rs: float) -> float:
    r"""Adjacent-channel leakage ratio in dB: main-channel power over adjacent-channel power.

    Parameters
    ----------
    f, psd : array_like
        Equally spaced frequencies (units of ``Rs``) and PSD.
    channel_bw_rs : float
        Width of both channels' integration windows, in units of ``Rs``.
    offset_rs : float
        Centre-to-centre spacing of the adjacent channel; the channels at ``+offset`` and
        ``-offset`` are both measured and the worse (smaller) ratio is returned.

    Returns
    -------
    float
        ``10 log10(P_main / max(P_lower, P_upper))``; ``inf`` when no power leaks.

    Raises
    ------
    ConfigError
        When a window lies outside the measured span ``[-sps/2, sps/2]``.

    Notes
    -----
    A simplified ACLR: both channels are integrated with rectangular windows over the PSD.
    3GPP's ACLR (e.g. TS 38.104 sub-clause 6.6.3) instead weights the channels with a
    specified measurement filter (a root raised cosine for UTRA-style channels) and uses
    specified channel bandwidths; this function is not that procedure and its results are not
    comparable with the standard's limits without those filters.
    """
    f, p = _check_spectrum(f, psd)
    bw = _check_positive(channel_bw_rs, "channel_bw_rs")
    off = _check_positive(offset_rs, "offset_rs")
    half_span = (f[-1] - f[0] + (f[1] - f[0])) / 2.0
    if off + bw / 2 > half_span * (1 + 1e-9):
        raise ConfigError(f"adjacent channel at {off:g} +- {bw / 2:g} Rs lies outside the "
                          f"measured span +-{half_span:g} Rs", key="offset_rs")
    main = channel_power(f, p, -bw / 2, bw / 2)
    upper = channel_power(f, p, off - bw / 2, off + bw / 2)
    lower = channel_power(f, p, -off - bw / 2, -off + bw / 2)
    leak = max(upper, lower)
    if leak <= 0:
        return math.inf
    return 10.0 * math.log10(main / leak)


# --------------------------------------------------------------------------------------------
# argument checks


def _check_int(value, name: str, low: int) -> int:
    if isinstance(value, bool) or not isinstance(value, Integral) or value < low:
        raise ConfigError(f"expected an integer >= {low}, got {value!r}", key=name)
    return int(value)


def _check_positive(value, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, Real) or not (0 < value < math.inf):
        raise ConfigError(f"expected a positive number, got {value!r}", key=name)
    return float(value)


def _check_fraction(value) -> float:
    if isinstance(value, bool) or not isinstance(value, Real) or not (0 < value < 1):
        raise ConfigError(f"expected a fraction strictly between 0 and 1, got {value!r}",
                          key="fraction")
    return float(value)
