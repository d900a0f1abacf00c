"""Typed options for checks and adapters, validated with messages that name the key."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

from .errors import ConfigError


@dataclass(frozen=True)
class Opt:
    """One option: its kind, default and a one-line description.

    ``kind`` is one of ``"number"``, ``"int"``, ``"bool"``, ``"str"``, ``"numbers"`` (a list of
    numbers or one number), ``"choice"`` (with ``choices``), ``"list"`` or ``"mapping"``.
    """

    kind: str
    default: Any
    help: str
    minimum: float | None = None
    maximum: float | None = None
    exclusive_minimum: bool = False
    choices: tuple = ()
    check: Callable[[Any], str | None] | None = None

    def validate(self, value: Any, *, file: str | None, key: str) -> Any:
        v = _coerce(self, value, file=file, key=key)
        for x in (v if self.kind == "numbers" else [v] if self.kind in ("number", "int") else []):
            if self.minimum is not None and (x < self.minimum or
                                             (self.exclusive_minimum and x == self.minimum)):
                rel = ">" if self.exclusive_minimum else ">="
                raise ConfigError(f"{key.rsplit('.', 1)[-1]}={value!r}: expected a value "
                                  f"{rel} {self.minimum:g}", file=file, key=key)
            if self.maximum is not None and x > self.maximum:
                raise ConfigError(f"{key.rsplit('.', 1)[-1]}={value!r}: expected a value "
                                  f"<= {self.maximum:g}", file=file, key=key)
        if self.check is not None:
            problem = self.check(v)
            if problem:
                raise ConfigError(f"{key.rsplit('.', 1)[-1]}={value!r}: {problem}",
                                  file=file, key=key)
        return v


def _is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def _coerce(opt: Opt, value, *, file, key):
    short = key.rsplit(".", 1)[-1]
    bad = ConfigError
    if opt.kind == "number":
        if isinstance(value, str):  # YAML reads 2e7 as a string
            try:
                value = float(value)
            except ValueError:
                pass
        if not _is_number(value):
            raise bad(f"{short}={value!r}: expected a number", file=file, key=key)
        return float(value)
    if opt.kind == "int":
        if isinstance(value, str):
            try:
                value = float(value)
            except ValueError:
                pass
        if not _is_number(value) or float(value) != int(value):
            raise bad(f"{short}={value!r}: expected a whole number", file=file, key=key)
        return int(value)
    if opt.kind == "bool":
        if not isinstance(value, bool):
            raise bad(f"{short}={value!r}: expected true or false", file=file, key=key)
        return value
    if opt.kind == "str":
        if not isinstance(value, str):
            raise bad(f"{short}={value!r}: expected text", file=file, key=key)
        return value
    if opt.kind == "choice":
        if value not in opt.choices:
            raise bad(f"{short}={value!r}: expected one of {', '.join(map(str, opt.choices))}",
                      file=file, key=key)
        return value
    if opt.kind == "numbers":
        items = value if isinstance(value, list) else [value]
        out = []
        for x in items:
            if isinstance(x, str):
                try:
                    x = float(x)
                except ValueError:
                    pass
            if not _is_number(x):
                raise bad(f"{short}={value!r}: expected a number or a list of numbers",
                          file=file, key=key)
            out.append(float(x))
        if not out:
            raise bad(f"{short}=[]: expected at least one number", file=file, key=key)
        return out
    if opt.kind == "list":
        if not isinstance(value, list):
            raise bad(f"{short}={value!r}: expected a list", file=file, key=key)
        return value
    if opt.kind == "mapping":
        if not isinstance(value, dict):
            raise bad(f"{short}={value!r}: expected a mapping", file=file, key=key)
        return value
    raise AssertionError(opt.kind)


def validate_options(spec: dict[str, Opt], given: Any, *, file: str | None, key: str) -> dict:
    """Defaults overlaid with ``given`` (a mapping), each value validated."""
    if given is None or given is True:
        given = {}
    if not isinstance(given, dict):
        raise ConfigError(f"{key.rsplit('.', 1)[-1]}={given!r}: expected a mapping of options "
                          f"(or true / false)", file=file, key=key)
    unknown = sorted(set(given) - set(spec))
    if unknown:
        known = ", ".join(sorted(spec)) or "none"
        raise ConfigError(f"unknown option {unknown[0]!r}; known options: {known}",
                          file=file, key=f"{key}.{unknown[0]}")
    out = {name: opt.default for name, opt in spec.items()}
    for name, value in given.items():
        out[name] = spec[name].validate(value, file=file, key=f"{key}.{name}")
    return out
