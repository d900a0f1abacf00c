r"""Sample formats: the one codec between complex samples and what a device exchanges.

One table, :data:`SAMPLE_FORMATS`, describes every way modemverify carries complex samples to or
from a device (names as numpy spells the dtypes, plus ``float32`` for interleaved floats):

``'complex128'``, ``'complex64'``
    Complex floating point arrays; no scaling, no rails.
``'float32'``
    Interleaved ``I, Q, I, Q, ...`` little-endian float32 (8 bytes a sample); the same bytes as
    ``complex64``, handed over as a real array of twice the length.
``'int16'``
    Interleaved signed 16-bit integers in Q15: value = code x ``full_scale`` / 32768, so one
    code is ``full_scale / 32768`` and the codes span ``[-full_scale, full_scale)`` (common
    practice for Q15).
``'int8'``
    Interleaved signed 8-bit integers in Q7: value = code x ``full_scale`` / 128.

Which formats each interface accepts: :data:`PYTHON_FORMATS` (a Python device's
``sample_format``) and :data:`WIRE_FORMATS` (byte buffers: the frame protocol of ``adapter:
process``, the C ABI of ``adapter: sharedlib``, the raw sample file of a vector set).

Conversion to an integer format rounds to the nearest code (ties to even, numpy's ``rint``) and
saturates at the format's range, ``-32768 .. 32767`` (``-128 .. 127``), as a two's-complement
fixed-point datapath (or an ADC) does. Raw ``bytes`` are read, and arrays written, little-endian.

:func:`encode_samples` converts without checking its input (the harness's own buffers);
:func:`to_format` checks it (1-D, finite) and counts the saturated samples; :func:`from_format`
decodes arrays or bytes. :func:`check_format` and :func:`check_full_scale` validate the
``sample_format`` and ``full_scale`` keys wherever they are read.

This module depends on numpy and modemverify's errors and argument checks only: Python device
processes import it through :mod:`modemverify.adapters._wire`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from numbers import Real

import numpy as np

from ..errors import ConfigError, UnknownNameError
from ..options import Opt, as_1d_complex

__all__ = [
    "SampleFormat", "SAMPLE_FORMATS", "PYTHON_FORMATS", "WIRE_FORMATS", "parse_format",
    "check_format", "check_full_scale", "encode_samples", "to_format", "from_format",
    "clip_count", "sqnr_db", "sample_format_opt", "full_scale_opt",
]


@dataclass(frozen=True)
class SampleFormat:
    """One way of carrying complex samples.

    ``dtype`` is the little-endian dtype of the array: complex for the complex formats, of one
    of I or Q for the interleaved ones. ``top`` is ``2**(bits-1)`` for an integer format (the
    code ``full_scale`` stands for) and 0 for a floating-point one.
    """

    name: str
    dtype: np.dtype
    top: int = 0

    @property
    def interleaved(self) -> bool:
        """I and Q as consecutive real elements (else one complex element a sample)."""
        return self.dtype.kind != "c"

    @property
    def integer(self) -> bool:
        return self.top > 0

    @property
    def bits(self) -> int:
        """Bits of one of I or Q."""
        return 8 * self.dtype.itemsize if self.interleaved else 4 * self.dtype.itemsize

    @property
    def bytes_per_sample(self) -> int:
        """Bytes of one complex sample."""
        return self.dtype.itemsize * (2 if self.interleaved else 1)


#: Every sample format, by name.
SAMPLE_FORMATS: dict[str, SampleFormat] = {
    "complex128": SampleFormat("complex128", np.dtype("<c16")),
    "complex64": SampleFormat("complex64", np.dtype("<c8")),
    "float32": SampleFormat("float32", np.dtype("<f4")),
    "int16": SampleFormat("int16", np.dtype("<i2"), 32768),
    "int8": SampleFormat("int8", np.dtype("i1"), 128),
}
#: What a Python device may exchange (``adapter: python``, key ``sample_format``).
PYTHON_FORMATS: tuple[str, ...] = ("complex128", "complex64", "int16", "int8")
#: What a byte buffer may hold: the frame protocol, the sharedlib ABI, a vector set's raw file.
WIRE_FORMATS: tuple[str, ...] = ("float32", "int16")

_INTEGER_BY_DTYPE = {f.dtype: f.name for f in SAMPLE_FORMATS.values() if f.integer}


def parse_format(name) -> str:
    """Canonical format name (case and surrounding spaces ignored).

    Raises
    ------
    UnknownNameError
        Listing :data:`SAMPLE_FORMATS`.

    Examples
    --------
    >>> parse_format(" INT16 ")
    'int16'
    """
    key = name.strip().lower() if isinstance(name, str) else name
    if not isinstance(key, str) or key not in SAMPLE_FORMATS:
        raise UnknownNameError("sample format", name, tuple(SAMPLE_FORMATS), key="format")
    return key


def check_format(value, allowed: tuple[str, ...], *, key: str = "sample_format",
                 file: str | None = None) -> str:
    """``value`` if it is one of ``allowed`` (spelled exactly), or ConfigError naming ``key``.

    Examples
    --------
    >>> check_format("int16", WIRE_FORMATS)
    'int16'
    """
    if not isinstance(value, str) or value not in allowed:
        raise ConfigError(f"sample_format={value!r}: expected one of {', '.join(allowed)}",
                          file=file, key=key)
    return value


def check_full_scale(value, *, key: str = "full_scale", file: str | None = None) -> float:
    """``value`` as a float if it is a finite number > 0, or ConfigError naming ``key``.

    ``full_scale`` is the value of the integer code ``2**(bits-1)`` (32768 in int16, 128 in
    int8). Booleans are refused.

    Examples
    --------
    >>> check_full_scale(2)
    2.0
    """
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, Real) or \
            not 0 < value < math.inf:
        raise ConfigError(f"full_scale={value!r}: expected a finite number > 0 (the value of "
                          f"the integer code 2**(bits-1))", file=file, key=key)
    return float(value)


def _encode(z: np.ndarray, fmt: SampleFormat, full_scale, count: bool) -> tuple[np.ndarray, int]:
    """(array, samples saturated or overflowed if ``count`` else 0) of 1-D complex128 ``z``."""
    if not fmt.integer:
        if fmt.interleaved:  # float32: the bytes of complex64, seen as I, Q
            out = z.astype(np.dtype(f"<c{2 * fmt.dtype.itemsize}")).view(fmt.dtype)
        else:
            out = z.astype(fmt.dtype)
        if not count:
            return out, 0
        finite = np.isfinite(out.reshape(-1, 2)).all(axis=1) if fmt.interleaved else \
            np.isfinite(out)
        return out, int(finite.size - np.count_nonzero(finite))
    top = fmt.top
    codes = z.view(np.float64) * (top / check_full_scale(full_scale))  # interleaved I, Q
    np.rint(codes, out=codes)
    clipped = 0
    if count:
        over = (codes > top - 1) | (codes < -top)
        clipped = int(np.count_nonzero(over.reshape(-1, 2).any(axis=1)))
    np.clip(codes, -top, top - 1, out=codes)
    return codes.astype(fmt.dtype), clipped


def encode_samples(samples, fmt: str, full_scale: float = 1.0) -> np.ndarray:
    r"""Complex samples in a sample format, unchecked: for buffers the harness fills itself.

    Parameters
    ----------
    samples : array_like
        Complex samples (flattened). Not checked: NaN passes through to the float formats
        (and becomes an undefined code in the integer ones).
    fmt : str
        One of :data:`SAMPLE_FORMATS`.
    full_scale : float, optional
        Integer formats: the value of the code 2**(bits-1) (default 1.0).

    Returns
    -------
    numpy.ndarray
        Little-endian: ``complex128``/``complex64`` of the same length, or the interleaved
        ``float32``/``int16``/``int8`` array of twice the length (rounded and saturated).
        ``.tobytes()`` gives the bytes a buffer carries.

    Examples
    --------
    >>> encode_samples([0.5 - 0.25j, 2.0], "int16").tolist()
    [16384, -8192, 32767, 0]
    """
    z = np.ascontiguousarray(np.asarray(samples).reshape(-1), dtype=np.complex128)
    return _encode(z, SAMPLE_FORMATS[parse_format(fmt)], full_scale, False)[0]


def to_format(samples, fmt: str, full_scale: float = 1.0) -> tuple[np.ndarray, int]:
    r"""Convert complex samples to a sample format, checked, counting saturation.

    The conversion of :func:`encode_samples`, for samples that must be 1-D and finite.

    Parameters
    ----------
    samples : array_like
        1-D complex samples.
    fmt : str
        One of :data:`SAMPLE_FORMATS`.
    full_scale : float, optional
        Value of the code 2**(bits-1) of an integer format (default 1.0): codes span
        ``[-full_scale, full_scale)``; ignored by the floating-point formats.

    Returns
    -------
    array : numpy.ndarray
        ``complex128``/``complex64`` of the same length, or the interleaved real array of
        twice the length.
    clip_count : int
        Number of complex samples whose I or Q had to be saturated (for ``complex64`` and
        ``float32``: whose I or Q overflowed to infinity).

    Examples
    --------
    >>> a, clipped = to_format(np.array([0.5 - 0.25j, 2.0 + 0j]), "int8")
    >>> a.tolist(), clipped
    ([64, -32, 127, 0], 1)
    """
    f = SAMPLE_FORMATS[parse_format(fmt)]
    x = as_1d_complex(samples, "samples")
    with np.errstate(over="ignore"):
        return _encode(x, f, full_scale, True)


def from_format(array, fmt: str, full_scale: float = 1.0) -> np.ndarray:
    r"""Decode a sample-format array (or raw little-endian bytes) to ``complex128``.

    Parameters
    ----------
    array : array_like or bytes
        For an interleaved format: ``I, Q`` values (1-D of even length, or shape ``(n, 2)``);
        integer formats take any integer dtype whose values fit the format, ``float32`` any
        real dtype (rounded to float32). For a complex format: complex values.
        ``bytes``/``bytearray``/``memoryview`` are read with the format's little-endian dtype.
    fmt : str
    full_scale : float, optional
        Value of the code 2**(bits-1) (integer formats): value = code x full_scale / 2**(bits-1).

    Returns
    -------
    numpy.ndarray of complex128

    Raises
    ------
    ConfigError
        Bytes that are not a whole number of samples, an array of the wrong shape or dtype,
        codes outside the format's range.

    Examples
    --------
    >>> from_format(np.array([64, -32, 127, 0], dtype=np.int8), "int8", 1.0).round(4).tolist()
    [(0.5-0.25j), (0.9922+0j)]
    """
    f = SAMPLE_FORMATS[parse_format(fmt)]
    if isinstance(array, (bytes, bytearray, memoryview)):
        nbytes = memoryview(array).nbytes
        if nbytes % f.bytes_per_sample:
            raise ConfigError(f"expected a whole number of {f.name} samples "
                              f"({f.bytes_per_sample} bytes each), got {nbytes} bytes",
                              key="array")
        a = np.frombuffer(array, dtype=f.dtype)
    else:
        a = np.asarray(array)
    if not f.interleaved:
        if a.ndim != 1 or not np.issubdtype(a.dtype, np.number):
            raise ConfigError(f"expected a 1-D array of complex samples, got {a.dtype} array of "
                              f"shape {a.shape}", key="array")
        return a.astype(np.complex128)
    if a.ndim == 2 and a.shape[1] == 2:
        a = a.reshape(-1)
    if f.integer:
        kind_ok, what = np.issubdtype(a.dtype, np.integer), "integer I/Q codes"
    else:
        kind_ok = np.issubdtype(a.dtype, np.number) and a.dtype.kind != "c"
        what = "real I/Q values"
    if a.ndim != 1 or a.size % 2 or not kind_ok:
        raise ConfigError(f"expected interleaved {what} (1-D, even length, or shape (n, 2)), "
                          f"got {a.dtype} array of shape {np.shape(array)}", key="array")
    if not f.integer:
        # I + 1j Q, as the frame protocol has always decoded (an infinite Q makes I NaN)
        a = a.astype(f.dtype, copy=False)
        return a[0::2].astype(np.float64) + 1j * a[1::2].astype(np.float64)
    top = f.top
    if a.size and a.dtype != f.dtype and (int(a.min()) < -top or int(a.max()) > top - 1):
        raise ConfigError(f"codes outside the {f.name} range [{-top}, {top - 1}]: "
                          f"min {int(a.min())}, max {int(a.max())}", key="array")
    out = a.astype(np.float64)
    out *= check_full_scale(full_scale) / top
    return out.view(np.complex128)


def clip_count(array, fmt: str) -> int:
    """Number of complex samples with I or Q at a rail of an integer format.

    A code is at a rail when it is ``32767`` or ``-32768`` (int16), ``127`` or ``-128`` (int8).
    Floating-point formats have no rails: the count is 0.

    Parameters
    ----------
    array : array_like
        Interleaved codes as for :func:`from_format` (or samples for floating-point formats).
    fmt : str
    """
    f = SAMPLE_FORMATS[parse_format(fmt)]
    if not f.integer:
        return 0
    top = f.top
    a = np.asarray(array)
    if a.ndim == 2 and a.shape[1] == 2:
        a = a.reshape(-1)
    if a.ndim != 1 or a.size % 2 or not np.issubdtype(a.dtype, np.integer):
        raise ConfigError(f"expected interleaved integer I/Q codes, got {a.dtype} array of "
                          f"shape {a.shape}", key="array")
    a32 = a.astype(np.int32)
    at_rail = (a32 >= top - 1) | (a32 <= -top)
    return int(np.count_nonzero(at_rail.reshape(-1, 2).any(axis=1)))


def sqnr_db(fixed, reference) -> float:
    r"""Signal-to-quantisation-noise ratio of a fixed-point signal against its float reference.

    The fixed-point signal is first matched to the reference by the least-squares complex gain
    ``g = sum(y conj(r)) / sum(abs(r)**2)`` (so its full-scale convention does not matter);
    then ``SQNR = 10 log10(sum(abs(g r)**2) / sum(abs(y - g r)**2))``.

    Parameters
    ----------
    fixed : array_like
        Complex samples decoded from the fixed-point format, or the raw interleaved ``int16`` /
        ``int8`` codes (decoded here; dtype ``int16`` or ``int8`` required).
    reference : array_like
        Complex float samples of the same length.

    Returns
    -------
    float
        dB; ``inf`` when the fixed-point signal is an exact multiple of the reference.

    Notes
    -----
    For an ideal rounding quantiser of step ``D`` and a signal spread over many steps, the
    error on each of I and Q is uniform with power ``D**2 / 12`` (common practice). A real
    full-scale sine of amplitude ``A = 2**(b-1) D`` then gives the textbook
    ``6.02 b + 1.76 dB``; a complex exponential of amplitude ``A`` on both I and Q gives the
    same value (signal ``A**2``, noise ``D**2 / 6``). A signal that must stay inside the
    saturating range reaches at most ``2**(b-1) - 1`` codes on the positive side,
    ``20 log10((2**(b-1) - 1) / 2**(b-1))`` dB lower (-0.0003 dB for int16, -0.068 dB for int8).
    """
    y = np.asarray(fixed)
    if y.dtype in _INTEGER_BY_DTYPE:
        y = from_format(y, _INTEGER_BY_DTYPE[y.dtype])
    y = as_1d_complex(y, "fixed")
    r = as_1d_complex(reference, "reference")
    if y.size != r.size or y.size == 0:
        raise ConfigError(f"expected fixed and reference of the same non-zero length, got "
                          f"{y.size} and {r.size}", key="fixed")
    e_r = float(np.vdot(r, r).real)
    if e_r == 0:
        raise ConfigError("the reference has zero power", key="reference")
    g = complex(np.vdot(r, y)) / e_r
    noise = y - g * r
    e_n = float(np.vdot(noise, noise).real)
    signal_power = abs(g) ** 2 * e_r
    if e_n == 0:
        return math.inf
    if signal_power == 0:
        return -math.inf
    return 10.0 * math.log10(signal_power / e_n)


def sample_format_opt(allowed: tuple[str, ...], default: str, help: str) -> Opt:
    """The device-file key ``sample_format``, one of ``allowed`` (for an adapter's
    ``config_keys``)."""
    return Opt("choice", default, help, choices=allowed,
               parse=lambda v, *, file, key: check_format(v, allowed, file=file, key=key))


def full_scale_opt(help: str) -> Opt:
    """The device-file key ``full_scale``, checked by :func:`check_full_scale`."""
    return Opt("number", 1.0, help, parse=check_full_scale)
