"""Adapter lookup: the built-in adapters and those plugins register.

A built-in adapter is a module of this package that names its class ``ADAPTER`` (as an oracle
module names its ``ORACLE``); adding one is adding that module. They are imported on the first
lookup.

A plugin adds an adapter through the entry-point group ``modemverify.adapters``::

    [project.entry-points."modemverify.adapters"]
    my-rig = "my_package.mv_adapter:RigAdapter"

The class is imported on first use. ``MODEMVERIFY_NO_PLUGINS=1`` turns plugin loading off.
"""

from __future__ import annotations

import importlib
import os
import pkgutil
from functools import cache
from importlib.metadata import entry_points

from ..errors import ConfigError, UnknownNameError
from .base import ModemAdapter

__all__ = ["ENTRY_POINT_GROUP", "builtin_adapters", "available_adapters", "get_adapter_class"]

ENTRY_POINT_GROUP = "modemverify.adapters"


@cache
def builtin_adapters() -> dict[str, type[ModemAdapter]]:
    """{adapter_id: class} of the modules of this package that define ``ADAPTER``."""
    package = __name__.rpartition(".")[0]
    found: dict[str, type[ModemAdapter]] = {}
    for info in pkgutil.iter_modules(importlib.import_module(package).__path__):
        if info.name.startswith("_"):
            continue
        cls = getattr(importlib.import_module(f"{package}.{info.name}"), "ADAPTER", None)
        if cls is not None:
            found[cls.adapter_id] = cls
    return found


def _plugins() -> dict[str, object]:
    if os.environ.get("MODEMVERIFY_NO_PLUGINS") == "1":
        return {}
    return {ep.name: ep for ep in entry_points(group=ENTRY_POINT_GROUP)}


def available_adapters() -> list[str]:
    return sorted(set(builtin_adapters()) | set(_plugins()))


def get_adapter_class(name: str):
    """The adapter class registered as ``name``.

    Raises
    ------
    UnknownNameError
        Naming the installed adapters.
    """
    builtin = builtin_adapters()
    if name in builtin:
        return builtin[name]
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
