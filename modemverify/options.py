"""Typed options and argument checks, validated with messages that name the key.

:class:`Opt` and :func:`validate_options` check device-file values (every key of a device file,
every check option, every adapter key declared as an Opt); :func:`whole_number`,
:func:`number_in` and :func:`as_1d_complex` check the arguments of the numeric layers (dsp,
stats, vectors). Either way a bad value raises ConfigError naming the key or argument.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from operator import index
from typing import Any, Callable

import numpy as np

from .errors import ConfigError

__all__ = ["Opt", "validate_options", "whole_number", "as_1d_complex", "number_in"]


@dataclass(frozen=True)
class Opt:
    """One option: its kind, default and a one-line description.

    ``kind`` is one of ``"number"``, ``"int"``, ``"bool"``, ``"str"``, ``"numbers"`` (a list of
    numbers or one number), ``"choice"`` (with ``choices``), ``"list"``, ``"mapping"`` or
    ``"any"`` (checked by its owner, such as an adapter's ``validate_spec``). ``also`` lists
    literal values accepted as they are beside the kind (``"auto"``, ``None``); ``expected``
    replaces the kind's own words in the message for a value of the wrong type; ``required``
    makes a missing key an error that quotes ``help``; ``check`` returns a problem (text) or
    None for a value of the right kind; ``parse(value, file=, key=)`` replaces the kind's own
    conversion with a domain's validator (the sample codec's ``check_full_scale``, say), which
    returns the value or raises ConfigError. Numbers must be finite: NaN and infinities are
    refused with the key named.
    """

    kind: str
    default: Any
    help: str
    minimum: float | None = None
    maximum: float | None = None
    exclusive_minimum: bool = False
    choices: tuple = ()
    check: Callable[[Any], str | None] | None = None
    also: tuple = ()
    expected: str | None = None
    required: bool = False
    parse: Callable[..., Any] | None = None

    def validate(self, value: Any, *, file: str | None, key: str) -> Any:
        if any(value is a or (type(value) is type(a) and value == a) for a in self.also):
            return value
        if self.parse is not None:
            v = self.parse(value, file=file, key=key)
        else:
            v = _coerce(self, value, file=file, key=key)
        for x in (v if self.kind == "numbers" else [v] if self.kind in ("number", "int") else []):
            if not math.isfinite(x):
                raise ConfigError(f"{key.rsplit('.', 1)[-1]}={value!r}: expected a finite "
                                  f"number", file=file, key=key)
        for x in (v if self.kind == "numbers" else [v] if self.kind in ("number", "int") else []):
            if self.minimum is not None and (x < self.minimum or
                                             (self.exclusive_minimum and x == self.minimum)):
                rel = ">" if self.exclusive_minimum else ">="
                raise ConfigError(f"{key.rsplit('.', 1)[-1]}={value!r}: expected a value "
                                  f"{rel} {_bound(self.minimum)}", file=file, key=key)
            if self.maximum is not None and x > self.maximum:
                raise ConfigError(f"{key.rsplit('.', 1)[-1]}={value!r}: expected a value "
                                  f"<= {_bound(self.maximum)}", file=file, key=key)
        if self.check is not None:
            problem = self.check(v)
            if problem:
                raise ConfigError(f"{key.rsplit('.', 1)[-1]}={value!r}: {problem}",
                                  file=file, key=key)
        return v


def _bound(x: float) -> str:
    """A range bound as a person reads it: whole numbers in full, others in %g."""
    return str(int(x)) if float(x).is_integer() and abs(x) < 1e16 else f"{x:g}"


def _is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def _yaml_number(x):
    """YAML 1.1 reads ``2e7`` as text: accept numeric text as a number."""
    if isinstance(x, str):
        try:
            return float(x)
        except ValueError:
            return x
    return x


#: kinds checked by type alone: (accepts the value?, what was expected)
_SIMPLE = {
    "bool": (lambda v: isinstance(v, bool), "true or false"),
    "str": (lambda v: isinstance(v, str), "text"),
    "list": (lambda v: isinstance(v, list), "a list"),
    "mapping": (lambda v: isinstance(v, dict), "a mapping"),
    "any": (lambda v: True, "anything"),  # checked by its owner (an adapter's validate_spec)
}


def _coerce(opt: Opt, value, *, file, key):
    short = key.rsplit(".", 1)[-1]

    def bad(expected):
        if opt.expected:
            expected = opt.expected
        elif opt.also:
            expected += "".join(f" or {a}" for a in opt.also if a is not None)
        return ConfigError(f"{short}={value!r}: expected {expected}", file=file, key=key)

    if opt.kind in _SIMPLE:
        accepts, expected = _SIMPLE[opt.kind]
        if not accepts(value):
            raise bad(expected)
        return value
    if opt.kind == "number":
        v = _yaml_number(value)
        if not _is_number(v):
            raise bad("a number")
        return float(v)
    if opt.kind == "int":
        v = _yaml_number(value)
        if not _is_number(v) or not math.isfinite(v) or float(v) != int(v):
            raise bad("a whole number")
        return int(v)
    if opt.kind == "choice":
        if value not in opt.choices:
            raise bad(f"one of {', '.join(map(str, opt.choices))}")
        return value
    if opt.kind == "numbers":
        items = [_yaml_number(x) for x in (value if isinstance(value, list) else [value])]
        if not all(_is_number(x) for x in items):
            raise bad("a number or a list of numbers")
        if not items:
            raise bad("at least one number")
        return [float(x) for x in items]
    raise AssertionError(opt.kind)


def validate_options(spec: dict[str, Opt], given: Any, *, file: str | None, key: str) -> dict:
    """Defaults overlaid with ``given`` (a mapping), each value validated."""
    if given is None or given is True:
        given = {}
    if not isinstance(given, dict):
        raise ConfigError(f"{key.rsplit('.', 1)[-1]}={given!r}: expected a mapping of options "
                          f"(or true / false)", file=file, key=key)
    for name, opt in spec.items():
        if opt.required and name not in given:
            raise ConfigError(f"missing key {name!r}: {opt.help}", file=file,
                              key=f"{key}.{name}" if key else name)
    unknown = sorted(set(given) - set(spec), key=str)
    if unknown:
        known = ", ".join(sorted(spec)) or "none"
        raise ConfigError(f"unknown option {unknown[0]!r}; known options: {known}",
                          file=file, key=f"{key}.{unknown[0]}")
    out = {name: opt.default for name, opt in spec.items()}
    for name, value in given.items():
        out[name] = spec[name].validate(value, file=file, key=f"{key}.{name}" if key else name)
    return out


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
