"""Adapter lookup: the built-in adapters and those plugins register.

A plugin adds an adapter through the entry-point group ``modemverify.adapters``::

    [project.entry-points."modemverify.adapters"]
    my-rig = "my_package.mv_adapter:RigAdapter"

The class is imported on first use. ``MODEMVERIFY_NO_PLUGINS=1`` turns plugin loading off.
"""

from __future__ import annotations

import importlib
import os
from importlib.metadata import entry_points

from ..errors import ConfigError, UnknownNameError
from .base import ModemAdapter

__all__ = ["ENTRY_POINT_GROUP", "BUILTIN", "available_adapters", "get_adapter_class"]

ENTRY_POINT_GROUP = "modemverify.adapters"

#: built-in adapters, "module:Class", imported lazily
BUILTIN: dict[str, str] = {
    "python": "modemverify.adapters.python:PythonAdapter",
    "reference": "modemverify.adapters.reference:ReferenceAdapter",
    "sharedlib": "modemverify.adapters.sharedlib:SharedLibAdapter",
    "process": "modemverify.adapters.process:ProcessAdapter",
    "recorded": "modemverify.adapters.recorded:RecordedAdapter",
}


def _plugins() -> dict[str, object]:
    if os.environ.get("MODEMVERIFY_NO_PLUGINS") == "1":
        return {}
    return {ep.name: ep for ep in entry_points(group=ENTRY_POINT_GROUP)}


def available_adapters() -> list[str]:
    return sorted(set(BUILTIN) | set(_plugins()))


def get_adapter_class(name: str):
    """The adapter class registered as ``name``.

    Raises
    ------
    UnknownNameError
        Naming the installed adapters.
    """
    if name in BUILTIN:
        module, _, attr = BUILTIN[name].partition(":")
        return getattr(importlib.import_module(module), attr)
    plugins = _plugins()
    if name not in plugins:
        raise UnknownNameError("adapter", name, available_adapters())
    try:
        cls = plugins[name].load()
    except Exception as exc:
        raise ConfigError(f"adapter plugin {name!r} ({plugins[name].value}) failed to load: "
                          f"{type(exc).__name__}: {exc}", key="adapter") from None
    if not (isinstance(cls, type) and issubclass(cls, ModemAdapter)):
        raise ConfigError(f"adapter plugin {name!r} ({plugins[name].value}) is not a "
                          f"ModemAdapter subclass", key="adapter")
    return cls
