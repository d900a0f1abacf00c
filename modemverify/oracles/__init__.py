"""The oracles: one module per property, each returning Verdicts.

``ORACLES`` lists them in the order they run. A new oracle is a module of this package with an
``ORACLE`` instance of an :class:`~modemverify.oracles.base.Oracle` subclass: adding the module
is adding the check (its ``order`` says where it runs).
"""

from __future__ import annotations

import importlib
import pkgutil

from ..errors import ConfigError, UnknownNameError
from ..options import validate_options
from .base import Oracle


def _discover() -> dict[str, Oracle]:
    """Every module of this package that defines ``ORACLE``, in the oracles' ``order``."""
    found = [getattr(importlib.import_module(f"{__name__}.{info.name}"), "ORACLE", None)
             for info in pkgutil.iter_modules(__path__) if not info.name.startswith("_")]
    ranked = sorted((o for o in found if o is not None), key=lambda o: (o.order, o.name))
    return {o.name: o for o in ranked}


#: every check, in the order it runs
ORACLES: dict[str, Oracle] = _discover()


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
        if out[name] is not None:
            oracle.validate(out[name], spec, file=file)
    return out

