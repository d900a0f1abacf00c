"""The oracles: one module per property, each returning Verdicts.

``ORACLES`` lists them in the order they run. A new oracle is a module with an ``ORACLE``
instance of an :class:`~modemverify.oracles.base.Oracle` subclass, listed in ``_MODULES``.
"""

from __future__ import annotations

from ..errors import ConfigError, UnknownNameError
from ..options import validate_options
from . import (
    alignment,
    ber,
    energy,
    evm,
    finite,
    fixed_point,
    gray,
    length,
    llr,
    mapping,
    roundtrip,
    spectrum,
)
from .base import Oracle

#: the oracle modules, in the order their checks run
_MODULES = (finite, length, alignment, energy, mapping, gray, roundtrip, evm, spectrum,
            fixed_point, ber, llr)

ORACLES: dict[str, Oracle] = {m.ORACLE.name: m.ORACLE for m in _MODULES}


def validate_checks(raw, spec, *, file: str | None) -> dict[str, dict | None]:
    """``checks:`` of a device file -> {check name: options, or None when disabled}.

    Every check runs with its defaults unless the file sets it to ``false`` or gives options.
    """
    if raw is None:
        raw = {}
    if not isinstance(raw, dict):
        raise ConfigError(f"checks={raw!r}: expected a mapping of check names to options "
                          f"(or false to turn a check off)", file=file, key="checks")
    for name in raw:
        if name not in ORACLES:
            raise UnknownNameError("check", name, ORACLES, file=file, key=f"checks.{name}")
    out: dict[str, dict | None] = {}
    for name, oracle in ORACLES.items():
        given = raw.get(name)
        out[name] = None if given is False else validate_options(
            oracle.options, given, file=file, key=f"checks.{name}")
    return out


__all__ = ["ORACLES", "Oracle", "validate_checks"]
