"""Lazy package doors: names imported from their submodules on first use.

The root package and the packages that light processes import (``adapters`` for a device
process's frame protocol, ``dsp`` for its sample codec) must not load everything else when they
are imported; their ``__init__`` lists the names it offers and this makes them appear on first
access, as ``modemverify.X`` does.
"""

from __future__ import annotations

import importlib
import sys

__all__ = ["lazy_door"]


def lazy_door(package: str, exports: dict[str, str], *, public_module: str | None = None):
    """``(__getattr__, __dir__)`` for ``package``, whose ``exports`` map a name to the
    submodule (relative to the package) that defines it. Classes get ``__module__ =
    public_module`` when it is given (so reprs and docs show the public path)."""

    def __getattr__(name: str):
        if name not in exports:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        value = getattr(importlib.import_module(f"{package}.{exports[name]}"), name)
        if public_module and isinstance(value, type):
            value.__module__ = public_module
        setattr(sys.modules[package], name, value)
        return value

    def __dir__():
        return sorted(exports)

    return __getattr__, __dir__
