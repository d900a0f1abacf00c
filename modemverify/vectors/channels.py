"""Channel stages: calibrated AWGN and deterministic impairments, composable and seeded.

Every stage is a small frozen dataclass with ``apply(samples, rng) -> samples`` acting on a 1-D
``complex128`` array (``rng`` is a :class:`numpy.random.Generator`; only :class:`Awgn` draws from
it) and ``describe() -> str``. Stages never modify their input. :class:`Channel` applies a tuple of
stages in order; :func:`channel_from_config` builds one from device-file entries such as::

    channel:
      - {kind: awgn, ebn0_db: 6}
      - {kind: phase_offset, degrees: 10}

Randomness comes only from the generator passed in, so the same :class:`numpy.random.SeedSequence`
gives bit-identical output on any machine with the same numpy.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import MISSING, dataclass, fields
from numbers import Real
from typing import ClassVar

import numpy as np

from modemverify.errors import ConfigError, UnknownNameError
from modemverify.options import whole_number as _check_int
from modemverify.vectors.coverage import MAX_BITS_PER_SYMBOL

__all__ = [
    "Awgn", "PhaseOffset", "FrequencyOffset", "IqImbalance", "DcOffset", "Quantise", "Channel",
    "CHANNEL_KINDS", "channel_from_config", "NOISE_CHUNK", "NOISE_PRECISIONS",
    "FLOAT32_NOISE_MIN_BER",
]


# --------------------------------------------------------------------------------------------
# argument checks (ConfigError names the field; channel_from_config prefixes the entry)


def _real(value, name: str) -> float:
    """A finite real number (bools and strings refused)."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (Real, np.integer,
                                                                      np.floating)):
        raise ConfigError(f"expected a number, got {value!r}", key=name)
    result = float(value)
    if not math.isfinite(result):
        raise ConfigError(f"expected a finite number, got {value!r}", key=name)
    return result


def _choice(value, name: str, allowed: tuple[str, ...]) -> str:
    if value not in allowed:
        raise ConfigError(f"expected one of {', '.join(map(repr, allowed))}, got {value!r}",
                          key=name)
    return value


def _as_samples(samples) -> np.ndarray:
    """View the input as a 1-D complex128 array (no copy when it already is one)."""
    x = np.asarray(samples, dtype=np.complex128)
    if x.ndim != 1:
        raise ConfigError(f"expected a 1-D array of complex samples, got shape {x.shape}",
                          key="samples")
    return x


def _set(obj, name: str, value) -> None:
    object.__setattr__(obj, name, value)  # frozen dataclasses normalise fields this way


# --------------------------------------------------------------------------------------------
# AWGN

#: floats of noise drawn per chunk (64 KiB of float32, 128 KiB of float64: in L2 cache)
NOISE_CHUNK = 1 << 14
NOISE_PRECISIONS = ("float64", "float32")
#: the smallest BER at which float32 noise is used by default. numpy's float32 ziggurat
#: (``random_standard_normal_f`` in numpy/random/src/distributions/distributions.c; its
#: construction from memory, not read for this) builds a normal from one 32-bit word: 8 bits
#: pick the layer, 1 the sign and 23 the position, and its tail beyond r = 3.654 uses 24-bit
#: uniforms ``u``, so ``-ln u`` <= 16.6 and no draw exceeds about 8.2 sigma
#: (P(|Z| > 8.2) = 2e-16), while the resolution of a tail probability near z is one 2^-24 step
#: of ``u`` against ``u = exp(-r (z - r))``: at 6.4 sigma (the per-axis distance behind a BER
#: of 1e-10 for BPSK and QPSK) about 1e-3 of the probability, a bias far inside any 0.1 dB.
#: Below this BER the default is float64. tests/unit/test_channels.py checks the float32 tail
#: against scipy's normal survival function at 3 to 5 sigma.
FLOAT32_NOISE_MIN_BER = 1e-10


@dataclass(frozen=True)
class Awgn:
    r"""Complex white Gaussian noise calibrated to Eb/N0.

    Parameters
    ----------
    ebn0_db : float
        Energy per bit over noise spectral density, in dB.
    bits_per_symbol : int
        ``k``; ``Eb = Es / k``.
    samples_per_symbol : int, optional
        ``sps``: how many consecutive samples carry one symbol (default 1).
    energy : {'nominal', 'measured'}, optional
        Where ``Es`` comes from. ``'nominal'`` (default): ``Es = nominal_es``, the scheme's
        normalisation, independent of the block. ``'measured'``: ``Es = mean(abs(x)**2) * sps``
        over the block passed to :meth:`apply`.
    nominal_es : float, optional
        Energy per symbol for ``energy='nominal'`` (default 1.0: every bundled convention has unit
        average symbol energy).
    precision : {'float64', 'float32'}, optional
        The floats the standard normals are drawn as (the sum is always complex128).
        ``'float32'`` draws faster; see :data:`FLOAT32_NOISE_MIN_BER` for where its tail is
        accurate enough.

    Notes
    -----
    **Energy convention.** A symbol occupies ``sps`` consecutive samples and its energy is the sum
    of their squared magnitudes, so on average ``Es = sps * mean(abs(x)**2)``. This is what a
    unit-energy pulse shaper produces from unit-energy symbols: the sample power is then
    ``1 / sps`` and ``Es = 1 = nominal_es``. (A shaper that instead repeats each symbol ``sps``
    times unscaled has ``Es = sps``; use ``energy='measured'`` or ``nominal_es=sps`` with it.)

    **Calibration.** ``Eb = Es / k`` and ``N0 = Eb / 10**(ebn0_db / 10)``. Each sample receives
    independent complex noise ``w`` with ``E[abs(w)**2] = N0``, i.e. variance ``N0 / 2`` on each
    of I and Q, whatever ``sps`` is. Derivation: let one symbol be ``s * p[i]`` over its ``sps``
    samples, with ``Es = abs(s)**2 * sum(abs(p)**2)``. The matched filter (correlation with ``p``;
    integrate-and-dump when ``p`` is rectangular) outputs signal ``s * sum(abs(p)**2)`` and noise
    of variance ``E[abs(w)**2] * sum(abs(p)**2)``, so its SNR is
    ``abs(s)**2 * sum(abs(p)**2) / E[abs(w)**2] = Es / E[abs(w)**2]``. Asking for ``Es / N0``
    gives ``E[abs(w)**2] = N0``. Equivalently the per-sample SNR is
    ``mean(abs(x)**2) / N0 = (Es / N0) / sps``, ``10 log10(sps)`` dB below Es/N0
    (common practice).

    **Soft demappers** see, after a unit-energy matched filter sampled once per symbol, points of
    energy ``Es`` in complex noise of variance ``N0``: that is :meth:`noise_variance`.

    Examples
    --------
    >>> a = Awgn(ebn0_db=3.0, bits_per_symbol=2)
    >>> round(a.noise_variance(), 6)        # Es = 1, Eb = 1/2, N0 = Eb / 10**0.3
    0.250594
    """

    ebn0_db: float
    bits_per_symbol: int
    samples_per_symbol: int = 1
    energy: str = "nominal"
    nominal_es: float = 1.0
    precision: str = "float64"

    kind: ClassVar[str] = "awgn"

    def __post_init__(self):
        _set(self, "ebn0_db", _real(self.ebn0_db, "ebn0_db"))
        _set(self, "bits_per_symbol",
             _check_int(self.bits_per_symbol, "bits_per_symbol", 1, MAX_BITS_PER_SYMBOL))
        _set(self, "samples_per_symbol",
             _check_int(self.samples_per_symbol, "samples_per_symbol", 1))
        _set(self, "energy", _choice(self.energy, "energy", ("nominal", "measured")))
        _set(self, "precision", _choice(self.precision, "precision", NOISE_PRECISIONS))
        es = _real(self.nominal_es, "nominal_es")
        if es <= 0:
            raise ConfigError(f"expected a positive number, got {self.nominal_es!r}",
                              key="nominal_es")
        _set(self, "nominal_es", es)

    def symbol_energy(self, samples=None) -> float:
        """``Es``: ``nominal_es``, or ``mean(abs(samples)**2) * sps`` for ``energy='measured'``."""
        if self.energy == "nominal":
            return self.nominal_es
        if samples is None:
            raise ConfigError("energy='measured' needs the signal block to measure Es from",
                              key="samples")
        x = _as_samples(samples)
        if x.size == 0:
            raise ConfigError("energy='measured' cannot measure Es of an empty block",
                              key="samples")
        # sum(abs(x)**2) as a dot product of the float view, without a temporary array. einsum's
        # own loop rather than BLAS: a threaded BLAS sums in a thread-count-dependent order (the
        # noise scale would then differ in the last bit between machines) and its thread
        # wake-ups made this line cost milliseconds on a loaded 2-core runner.
        v = x.view(np.float64) if x.flags.c_contiguous else np.ascontiguousarray(x).view(np.float64)
        es = float(np.einsum("i,i->", v, v)) / x.size * self.samples_per_symbol
        if not es > 0:
            raise ConfigError("energy='measured' needs a block with non-zero power",
                              key="samples")
        return float(es)

    def noise_variance(self, samples=None) -> float:
        """``N0``: the complex noise variance per sample, and at symbol rate after a unit-energy
        matched filter.

        Parameters
        ----------
        samples : array_like, optional
            The clean block; required only for ``energy='measured'``.
        """
        eb = self.symbol_energy(samples) / self.bits_per_symbol
        return eb / 10.0 ** (self.ebn0_db / 10.0)

    def apply(self, samples, rng: np.random.Generator, *, out: np.ndarray | None = None
              ) -> np.ndarray:
        """``samples + noise``.

        Parameters
        ----------
        samples : array_like
            1-D complex block.
        rng : numpy.random.Generator
            Source of the noise: ``2 * len(samples)`` standard normals (of :attr:`precision`),
            taken as interleaved (I, Q) pairs, drawn in chunks of :data:`NOISE_CHUNK` floats
            (the stream does not depend on the chunking: a chunked draw equals one draw).
        out : numpy.ndarray, optional
            A C-contiguous complex128 buffer of the same length to write into (no allocation).
            It may be ``samples`` itself (in-place noise).

        Returns
        -------
        numpy.ndarray
            ``out`` if given, else a new array.
        """
        x = _as_samples(samples)
        scale = math.sqrt(self.noise_variance(x) / 2.0) if x.size else 0.0
        if out is None:
            y = np.empty(x.shape, dtype=np.complex128)
        else:
            y = out
            if (not isinstance(y, np.ndarray) or y.dtype != np.complex128
                    or y.shape != x.shape or not y.flags.c_contiguous or not y.flags.writeable):
                raise ConfigError(f"expected a writeable C-contiguous complex128 array of "
                                  f"shape {x.shape}", key="out")
            if np.shares_memory(y, x) and not (y.ctypes.data == x.ctypes.data
                                               and y.strides == x.strides):
                raise ConfigError("partly overlaps samples; pass samples itself or a "
                                  "separate buffer", key="out")
        xf = np.ascontiguousarray(x).view(np.float64)
        yf = y.view(np.float64)
        # Fused and chunked: draw a cache-sized chunk, scale it into the output, add the
        # signal; every array stays in cache, and no temporary is as long as the block.
        dtype = np.float32 if self.precision == "float32" else np.float64
        # In place, the scaled noise goes through a float64 scratch first; either way each
        # float is fl(fl(noise * scale) + signal), so both give the same bits.
        size = min(NOISE_CHUNK, yf.size)
        scratch = np.empty(size, dtype=dtype)
        in_place = np.shares_memory(y, x)
        noise = np.empty(size) if in_place else None
        for s in range(0, yf.size, NOISE_CHUNK):
            e = min(s + NOISE_CHUNK, yf.size)
            chunk = scratch[:e - s]
            rng.standard_normal(out=chunk, dtype=dtype)
            seg = yf[s:e]
            if in_place:
                seg += np.multiply(chunk, scale, out=noise[:e - s])
            else:
                np.multiply(chunk, scale, out=seg)  # a real multiply per float
                seg += xf[s:e]
        return y

    def describe(self) -> str:
        es = ("Es measured" if self.energy == "measured" else f"Es = {self.nominal_es:g}")
        return (f"AWGN Eb/N0 = {self.ebn0_db:g} dB (k = {self.bits_per_symbol}, "
                f"sps = {self.samples_per_symbol}, {es})")


# --------------------------------------------------------------------------------------------
# deterministic impairments


@dataclass(frozen=True)
class PhaseOffset:
    """Constant carrier phase rotation: ``y = x * exp(j * degrees * pi / 180)``.

    Examples
    --------
    >>> PhaseOffset(90).apply(np.array([1 + 0j]), None).round(12).tolist()
    [1j]
    """

    degrees: float

    kind: ClassVar[str] = "phase_offset"

    def __post_init__(self):
        _set(self, "degrees", _real(self.degrees, "degrees"))

    def apply(self, samples, rng=None) -> np.ndarray:
        x = _as_samples(samples)
        return x * np.exp(1j * math.radians(self.degrees))

    def describe(self) -> str:
        return f"phase offset {self.degrees:g} deg"


@dataclass(frozen=True)
class FrequencyOffset:
    """Carrier frequency offset: ``y[i] = x[i] * exp(j 2 pi f (start_sample + i))``.

    Stateless: every call starts the phase ramp at sample index ``start_sample``, so a stream cut
    into blocks stays phase-continuous when block ``b`` is given ``start_sample`` equal to the
    number of samples before it.

    Parameters
    ----------
    cycles_per_sample : float
        Normalised frequency ``f`` in ``[-0.5, 0.5]`` (beyond that it aliases).
    start_sample : int, optional
        Index of the first sample of the block (default 0).
    """

    cycles_per_sample: float
    start_sample: int = 0

    kind: ClassVar[str] = "frequency_offset"

    def __post_init__(self):
        f = _real(self.cycles_per_sample, "cycles_per_sample")
        if abs(f) > 0.5:
            raise ConfigError(f"expected a normalised frequency in [-0.5, 0.5], got {f!r}",
                              key="cycles_per_sample")
        _set(self, "cycles_per_sample", f)
        _set(self, "start_sample", _check_int(self.start_sample, "start_sample"))

    def apply(self, samples, rng=None) -> np.ndarray:
        x = _as_samples(samples)
        index = np.arange(self.start_sample, self.start_sample + x.size, dtype=np.int64)
        # Reduce to a fraction of a cycle first so large start indices keep full precision.
        turns = np.mod(self.cycles_per_sample * index, 1.0)
        return x * np.exp(2j * np.pi * turns)

    def describe(self) -> str:
        return f"frequency offset {self.cycles_per_sample:g} cycles/sample"


@dataclass(frozen=True)
class IqImbalance:
    r"""Receiver IQ imbalance: the I arm is ideal, the Q arm has gain ``g`` and phase error ``phi``.

    ``y = Re(x) + j * g * (sin(phi) * Re(x) + cos(phi) * Im(x))`` with ``g = 10**(gain_db / 20)``
    and ``phi = radians(phase_deg)`` (the one-arm model, common practice).

    Notes
    -----
    Writing ``Re(x) = (x + x*) / 2`` and ``Im(x) = (x - x*) / 2j`` gives the widely linear form
    ``y = mu * x + nu * conj(x)`` with ``mu = (1 + g e^{j phi}) / 2`` and
    ``nu = (1 - g e^{-j phi}) / 2``. A tone ``e^{j w n}`` therefore leaves with an image
    ``nu * e^{-j w n}``, and the image-rejection ratio is

    ``IRR = abs(mu)**2 / abs(nu)**2 = (1 + 2 g cos(phi) + g**2) / (1 - 2 g cos(phi) + g**2)``,

    the textbook expression for gain mismatch ``g`` and phase mismatch ``phi`` (common practice;
    e.g. Razavi, *RF Microelectronics*, from memory). ``g = 1, phi = 0`` is the identity.
    """

    gain_db: float = 0.0
    phase_deg: float = 0.0

    kind: ClassVar[str] = "iq_imbalance"

    def __post_init__(self):
        _set(self, "gain_db", _real(self.gain_db, "gain_db"))
        phase = _real(self.phase_deg, "phase_deg")
        if abs(phase) >= 90:
            # At +-90 degrees the Q arm is parallel to I and the signal is no longer 2-D.
            raise ConfigError(f"expected a phase error strictly between -90 and 90 degrees, "
                              f"got {phase!r}", key="phase_deg")
        _set(self, "phase_deg", phase)

    @property
    def gain(self) -> float:
        """Linear Q-arm gain ``g``."""
        return 10.0 ** (self.gain_db / 20.0)

    @property
    def coefficients(self) -> tuple[complex, complex]:
        """``(mu, nu)`` of ``y = mu * x + nu * conj(x)``."""
        g, phi = self.gain, math.radians(self.phase_deg)
        return (1 + g * complex(math.cos(phi), math.sin(phi))) / 2, \
               (1 - g * complex(math.cos(phi), -math.sin(phi))) / 2

    @property
    def image_rejection_ratio(self) -> float:
        """Linear IRR ``abs(mu)**2 / abs(nu)**2`` (``inf`` for a perfect modulator)."""
        mu, nu = self.coefficients
        return math.inf if nu == 0 else abs(mu) ** 2 / abs(nu) ** 2

    def apply(self, samples, rng=None) -> np.ndarray:
        x = _as_samples(samples)
        g, phi = self.gain, math.radians(self.phase_deg)
        y = np.empty_like(x)
        y.real = x.real
        y.imag = g * (math.sin(phi) * x.real + math.cos(phi) * x.imag)
        return y

    def describe(self) -> str:
        return f"IQ imbalance Q gain {self.gain_db:g} dB, Q phase {self.phase_deg:g} deg"


def _complex(value, name: str) -> complex:
    """A finite complex number from a number, an ``[re, im]`` pair or a string ``"0.1-0.2j"``."""
    if isinstance(value, str):
        try:
            result = complex(value.replace(" ", ""))
        except ValueError:
            raise ConfigError(f"expected a complex number, got {value!r}", key=name) from None
    elif isinstance(value, Sequence) and len(value) == 2:
        result = complex(_real(value[0], name), _real(value[1], name))
    elif isinstance(value, (complex, np.complexfloating)):
        result = complex(value)
    else:
        try:
            result = complex(_real(value, name))
        except ConfigError:
            raise ConfigError(f"expected a complex number (or [re, im]), got {value!r}",
                              key=name) from None
    if not (math.isfinite(result.real) and math.isfinite(result.imag)):
        raise ConfigError(f"expected a finite complex number, got {value!r}", key=name)
    return result


@dataclass(frozen=True)
class DcOffset:
    """Additive constant (carrier leak / DC offset): ``y = x + offset``.

    ``offset`` may be given as a number, an ``[re, im]`` pair or a string such as ``"0.1-0.05j"``.
    """

    offset: complex

    kind: ClassVar[str] = "dc_offset"

    def __post_init__(self):
        _set(self, "offset", _complex(self.offset, "offset"))

    def apply(self, samples, rng=None) -> np.ndarray:
        return _as_samples(samples) + self.offset

    def describe(self) -> str:
        return f"DC offset {self.offset:g}"


@dataclass(frozen=True)
class Quantise:
    """Uniform quantiser with clipping, applied to I and Q separately (an ideal ADC).

    ``2**bits`` levels span ``[-full_scale, +full_scale]`` with step
    ``step = 2 * full_scale / 2**bits``:

    - ``mode='mid-rise'`` (default): levels at odd multiples of ``step/2``, symmetric,
      ``+-step/2 ... +-(full_scale - step/2)``; zero is a decision threshold.
    - ``mode='mid-tread'``: levels at ``m * step`` for ``m = -2**(bits-1) ... 2**(bits-1) - 1``
      (two's-complement codes); zero is a level, the top level is ``full_scale - step``.
      Exact ties round to the even level (numpy's rounding).

    Values beyond the range clip to the outermost level. Inside it the error lies within
    ``+-step/2``, and for a signal spread over many steps its mean square is about ``step**2 / 12``
    (common practice).
    """

    bits: int
    full_scale: float
    mode: str = "mid-rise"

    kind: ClassVar[str] = "quantise"

    def __post_init__(self):
        # 24 bits is beyond any real converter and keeps levels() (2**bits floats) allocatable.
        _set(self, "bits", _check_int(self.bits, "bits", 1, 24))
        fs = _real(self.full_scale, "full_scale")
        if fs <= 0:
            raise ConfigError(f"expected a positive number, got {self.full_scale!r}",
                              key="full_scale")
        _set(self, "full_scale", fs)
        _set(self, "mode", _choice(self.mode, "mode", ("mid-rise", "mid-tread")))

    @property
    def step(self) -> float:
        """Quantisation step (LSB size)."""
        return 2.0 * self.full_scale / 2.0 ** self.bits

    def levels(self) -> np.ndarray:
        """All ``2**bits`` output levels of one rail, increasing."""
        m = np.arange(-(2 ** (self.bits - 1)), 2 ** (self.bits - 1), dtype=np.float64)
        return (m + 0.5) * self.step if self.mode == "mid-rise" else m * self.step

    def _rail(self, v: np.ndarray) -> np.ndarray:
        d = self.step
        if self.mode == "mid-rise":
            q = (np.floor(v / d) + 0.5) * d
            top = self.full_scale - d / 2
            return np.clip(q, -top, top)
        q = np.round(v / d) * d
        return np.clip(q, -self.full_scale, self.full_scale - d)

    def apply(self, samples, rng=None) -> np.ndarray:
        x = _as_samples(samples)
        return self._rail(x.real) + 1j * self._rail(x.imag)

    def describe(self) -> str:
        return f"{self.bits}-bit {self.mode} quantiser, full scale +-{self.full_scale:g}"


# --------------------------------------------------------------------------------------------
# composition and configuration


#: Device-file ``kind`` -> stage class.
CHANNEL_KINDS: dict[str, type] = {
    cls.kind: cls for cls in (Awgn, PhaseOffset, FrequencyOffset, IqImbalance, DcOffset, Quantise)
}

# Fields of Awgn that come from the scheme, not from the channel entry.
_FROM_SCHEME = ("bits_per_symbol", "samples_per_symbol")


@dataclass(frozen=True)
class Channel:
    """A sequence of stages applied in order.

    Examples
    --------
    >>> ch = Channel((PhaseOffset(90), DcOffset(1)))
    >>> ch.apply(np.array([1 + 0j]), np.random.default_rng(0)).round(12).tolist()
    [(1+1j)]
    >>> ch.describe()
    'phase offset 90 deg -> DC offset 1+0j'
    """

    stages: tuple = ()

    def __post_init__(self):
        stages = tuple(self.stages)
        for i, stage in enumerate(stages):
            if not (callable(getattr(stage, "apply", None))
                    and callable(getattr(stage, "describe", None))):
                raise ConfigError(f"expected a channel stage with apply() and describe(), "
                                  f"got {stage!r}", key=f"stages[{i}]")
        _set(self, "stages", stages)

    def apply(self, samples, rng: np.random.Generator) -> np.ndarray:
        """Run ``samples`` through every stage; the input array is not modified."""
        x = _as_samples(samples)
        for stage in self.stages:
            x = stage.apply(x, rng)
        return x

    def describe(self) -> str:
        return " -> ".join(s.describe() for s in self.stages) if self.stages else "identity"


def channel_from_config(entries, *, bits_per_symbol: int, samples_per_symbol: int = 1
                        ) -> Channel:
    """Build a :class:`Channel` from device-file entries.

    Parameters
    ----------
    entries : list of dict or None
        Each entry has ``kind`` (a key of :data:`CHANNEL_KINDS`) and that stage's fields, e.g.
        ``[{"kind": "awgn", "ebn0_db": 6}, {"kind": "phase_offset", "degrees": 10}]``.
        ``None`` or ``[]`` is the identity channel.
    bits_per_symbol, samples_per_symbol : int
        From the scheme; passed to ``awgn`` stages (they may not be set per entry).

    Raises
    ------
    ConfigError
        Naming the entry and key, e.g. ``channel[1].degrees: expected a number, got 'x'``.
    UnknownNameError
        For an unknown ``kind`` (key ``channel[i].kind``).

    Examples
    --------
    >>> channel_from_config([{"kind": "awgn", "ebn0_db": 6}, {"kind": "phase_offset",
    ...                      "degrees": 10}], bits_per_symbol=2).describe()
    'AWGN Eb/N0 = 6 dB (k = 2, sps = 1, Es = 1) -> phase offset 10 deg'
    """
    k = _check_int(bits_per_symbol, "bits_per_symbol", 1, MAX_BITS_PER_SYMBOL)
    sps = _check_int(samples_per_symbol, "samples_per_symbol", 1)
    if entries is None:
        return Channel(())
    if isinstance(entries, (str, bytes, Mapping)) or not isinstance(entries, Sequence):
        raise ConfigError(f"expected a list of stages, got {entries!r}", key="channel")
    stages = []
    for i, entry in enumerate(entries):
        where = f"channel[{i}]"
        if not isinstance(entry, Mapping):
            raise ConfigError(f"expected a mapping with a 'kind' key, got {entry!r}", key=where)
        if "kind" not in entry:
            raise ConfigError(f"missing; expected one of {', '.join(sorted(CHANNEL_KINDS))}",
                              key=f"{where}.kind")
        kind = entry["kind"]
        cls = CHANNEL_KINDS.get(kind) if isinstance(kind, str) else None
        if cls is None:
            raise UnknownNameError("channel kind", kind, CHANNEL_KINDS, key=f"{where}.kind")
        settable = [f for f in fields(cls) if not (cls is Awgn and f.name in _FROM_SCHEME)]
        names = [f.name for f in settable]
        kwargs = {}
        for key, value in entry.items():
            if key == "kind":
                continue
            if cls is Awgn and key in _FROM_SCHEME:
                raise ConfigError("is set by the scheme and cannot be given per stage",
                                  key=f"{where}.{key}")
            if key not in names:
                raise ConfigError(f"unknown key for kind {kind!r}; known keys: "
                                  f"{', '.join(names)}", key=f"{where}.{key}")
            kwargs[key] = value
        for f in settable:
            if f.name not in kwargs and f.default is MISSING:
                raise ConfigError(f"missing; required for kind {kind!r}", key=f"{where}.{f.name}")
        if cls is Awgn:
            kwargs.update(bits_per_symbol=k, samples_per_symbol=sps)
        try:
            stages.append(cls(**kwargs))
        except ConfigError as exc:
            raise ConfigError(exc.raw_message,
                              key=f"{where}.{exc.key}" if exc.key else where) from None
    return Channel(tuple(stages))
