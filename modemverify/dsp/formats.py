r"""Sample formats of a device's waveform input/output, and quantisation measures.

Formats (names as numpy spells the dtypes):

``'complex128'``, ``'complex64'``
    Complex floating point; no scaling, no rails.
``'int16'``
    Interleaved ``I, Q, I, Q, ...`` signed 16-bit integers in Q15: value = code x
    ``full_scale`` / 32768, so one code is ``full_scale / 32768`` and the codes span
    ``[-full_scale, full_scale)`` (common practice for Q15; the same rule as the sharedlib and
    process adapters).
``'int8'``
    Interleaved signed 8-bit integers in Q7: value = code x ``full_scale`` / 128.

Conversion to an integer format rounds to the nearest code (ties to even, numpy's ``rint``) and
saturates at the format's range, ``-32768 .. 32767`` (``-128 .. 127``), as a two's-complement
fixed-point datapath does. Raw ``bytes`` are read little-endian.
"""

from __future__ import annotations

import math
from numbers import Real

import numpy as np

from modemverify._checks import as_1d_complex
from modemverify.errors import ConfigError, UnknownNameError

__all__ = ["SAMPLE_FORMATS", "parse_format", "to_format", "from_format", "clip_count", "sqnr_db"]

#: Known format names.
SAMPLE_FORMATS: tuple[str, ...] = ("complex128", "complex64", "int16", "int8")

# integer formats: (little-endian dtype, 2**(bits-1): the code full_scale would map to)
_INTEGER = {"int16": (np.dtype("<i2"), 32768), "int8": (np.dtype("i1"), 128)}
_FLOAT = {"complex128": np.dtype("<c16"), "complex64": np.dtype("<c8")}


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
    if key not in SAMPLE_FORMATS:
        raise UnknownNameError("sample format", name, SAMPLE_FORMATS, key="format")
    return key


def _full_scale(value) -> float:
    if isinstance(value, bool) or not isinstance(value, Real) or not (0 < value < math.inf):
        raise ConfigError(f"expected a positive finite number, got {value!r}", key="full_scale")
    return float(value)


def to_format(samples, fmt: str, full_scale: float = 1.0) -> tuple[np.ndarray, int]:
    r"""Convert complex samples to a sample format.

    Parameters
    ----------
    samples : array_like
        1-D complex samples.
    fmt : str
        One of :data:`SAMPLE_FORMATS`.
    full_scale : float, optional
        Value of the code 2**(bits-1) of an integer format (default 1.0): codes span
        ``[-full_scale, full_scale)``; ignored by the complex formats.

    Returns
    -------
    array : numpy.ndarray
        ``complex128``/``complex64`` of the same length, or the interleaved integer array of
        twice the length.
    clip_count : int
        Number of complex samples whose I or Q had to be saturated (for ``complex64``: whose
        I or Q overflowed to infinity).

    Examples
    --------
    >>> a, clipped = to_format(np.array([0.5 - 0.25j, 2.0 + 0j]), "int8")
    >>> a.tolist(), clipped
    ([64, -32, 127, 0], 1)
    """
    fmt = parse_format(fmt)
    x = _as_1d_complex(samples, "samples")
    if fmt == "complex128":
        return x.copy(), 0
    if fmt == "complex64":
        with np.errstate(over="ignore"):
            y = x.astype(np.complex64)
        over = ~(np.isfinite(y.real) & np.isfinite(y.imag))
        return y, int(np.count_nonzero(over))
    dtype, top = _INTEGER[fmt]
    scale = top / _full_scale(full_scale)
    codes = np.rint(x.view(np.float64) * scale)  # interleaved I, Q
    over = (codes > top - 1) | (codes < -top)
    np.clip(codes, -top, top - 1, out=codes)
    clipped = int(np.count_nonzero(over.reshape(-1, 2).any(axis=1)))
    return codes.astype(dtype), clipped


def from_format(array, fmt: str, full_scale: float = 1.0) -> np.ndarray:
    r"""Decode a sample-format array (or raw little-endian bytes) to ``complex128``.

    Parameters
    ----------
    array : array_like or bytes
        For an integer format: interleaved ``I, Q`` codes (1-D of even length, or shape
        ``(n, 2)``); any integer dtype is accepted if its values fit the format. For a complex
        format: complex values. ``bytes``/``bytearray``/``memoryview`` are read with the
        format's little-endian dtype.
    fmt : str
    full_scale : float, optional
        Value of the code 2**(bits-1) (integer formats): value = code x full_scale / 2**(bits-1).

    Returns
    -------
    numpy.ndarray of complex128

    Examples
    --------
    >>> from_format(np.array([64, -32, 127, 0], dtype=np.int8), "int8", 1.0).round(4).tolist()
    [(0.5-0.25j), (0.9922+0j)]
    """
    fmt = parse_format(fmt)
    raw = isinstance(array, (bytes, bytearray, memoryview))
    if fmt in _FLOAT:
        a = np.frombuffer(array, dtype=_FLOAT[fmt]) if raw else np.asarray(array)
        if a.ndim != 1 or not np.issubdtype(a.dtype, np.number):
            raise ConfigError(f"expected a 1-D array of complex samples, got {a.dtype} array of "
                              f"shape {a.shape}", key="array")
        return a.astype(np.complex128)
    dtype, top = _INTEGER[fmt]
    scale = _full_scale(full_scale) / top
    if raw:
        nbytes = memoryview(array).nbytes
        if nbytes % (2 * dtype.itemsize):
            raise ConfigError(f"expected a whole number of {fmt} I/Q pairs "
                              f"({2 * dtype.itemsize} bytes each), got {nbytes} bytes",
                              key="array")
        a = np.frombuffer(array, dtype=dtype)
    else:
        a = np.asarray(array)
    if a.ndim == 2 and a.shape[1] == 2:
        a = a.reshape(-1)
    if a.ndim != 1 or a.size % 2 or not np.issubdtype(a.dtype, np.integer):
        raise ConfigError(f"expected interleaved integer I/Q codes (1-D, even length, or shape "
                          f"(n, 2)), got {a.dtype} array of shape {np.shape(array)}",
                          key="array")
    if a.size and (int(a.min()) < -top or int(a.max()) > top - 1):
        raise ConfigError(f"codes outside the {fmt} range [{-top}, {top - 1}]: "
                          f"min {int(a.min())}, max {int(a.max())}", key="array")
    out = a.astype(np.float64) * scale
    return out.view(np.complex128)


def clip_count(array, fmt: str) -> int:
    """Number of complex samples with I or Q at a rail of an integer format.

    A code is at a rail when it is ``32767`` or ``-32768`` (int16), ``127`` or ``-128`` (int8).
    Complex formats have no rails: the count is 0.

    Parameters
    ----------
    array : array_like
        Interleaved codes as for :func:`from_format` (or complex samples for complex formats).
    fmt : str
    """
    fmt = parse_format(fmt)
    if fmt in _FLOAT:
        return 0
    _, top = _INTEGER[fmt]
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
    if y.dtype in (np.dtype(np.int16), np.dtype(np.int8)):
        y = from_format(y, "int16" if y.dtype == np.int16 else "int8")
    y = _as_1d_complex(y, "fixed")
    r = _as_1d_complex(reference, "reference")
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


def _as_1d_complex(x, name: str) -> np.ndarray:
    return as_1d_complex(x, name)
