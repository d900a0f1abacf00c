"""Argument checks shared by the numeric layers (dsp, stats, vectors); errors name the argument."""

from __future__ import annotations

from operator import index

import numpy as np

from .errors import ConfigError


def whole_number(value, name: str, minimum: int | None = None,
                 maximum: int | None = None) -> int:
    """Return ``value`` as an int in ``[minimum, maximum]`` or raise ConfigError naming it.

    Booleans and floats are refused even when integral (``True``, ``4.0``): in a device file they
    are almost always a typo for something else.
    """
    if minimum is not None and maximum is not None:
        expected = f"an integer from {minimum} to {maximum}"
    elif minimum is not None:
        expected = f"an integer >= {minimum}"
    elif maximum is not None:
        expected = f"an integer <= {maximum}"
    else:
        expected = "an integer"
    if isinstance(value, (bool, np.bool_)):
        raise ConfigError(f"expected {expected}, got {value!r}", key=name)
    try:
        result = index(value)
    except TypeError:
        raise ConfigError(f"expected {expected}, got {value!r}", key=name) from None
    if (minimum is not None and result < minimum) or (maximum is not None and result > maximum):
        raise ConfigError(f"expected {expected}, got {value!r}", key=name)
    return result


def as_1d_complex(x, name: str, *, non_empty: bool = False, finite: bool = True) -> np.ndarray:
    """``x`` as a contiguous 1-D complex128 array, or ConfigError naming ``name``."""
    a = np.asarray(x)
    if a.ndim != 1 or (non_empty and a.size == 0):
        what = "a non-empty 1-D array" if non_empty else "a 1-D array"
        raise ConfigError(f"expected {what}, got shape {a.shape}", key=name)
    if a.size and not (np.issubdtype(a.dtype, np.number) or a.dtype == np.bool_):
        raise ConfigError(f"expected numbers, got dtype {a.dtype}", key=name)
    a = np.ascontiguousarray(a, dtype=np.complex128)
    if finite and not np.all(np.isfinite(a)):
        raise ConfigError("expected finite samples (found NaN or inf)", key=name)
    return a


def number_in(value, name: str, low: float, high: float, *, open_low: bool = False,
              open_high: bool = False, expected: str) -> float:
    """``value`` as a float in the interval from ``low`` to ``high`` (open or closed ends), or
    ConfigError ``name=value: expected <expected>`` (anything float() refuses is out of range)."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        v = float("nan")
    above = v > low if open_low else v >= low
    below = v < high if open_high else v <= high
    if not (above and below):
        raise ConfigError(f"{name}={value!r}: expected {expected}")
    return v
