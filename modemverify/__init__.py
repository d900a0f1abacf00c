"""modemverify: property-based verification of modem implementations.

The public API: load a device file, run its checks, read the Verdicts. Names are imported on
first use, so that ``import modemverify`` stays cheap for worker and device processes.

>>> import modemverify
>>> sorted(modemverify.MODULATIONS)[:3]
['16qam', '256qam', '64qam']
"""

from __future__ import annotations

import importlib

from ._version import __version__

_EXPORTS = {
    "AdapterError": "errors", "ConfigError": "errors", "DeviceCrashed": "errors",
    "DeviceOutputError": "errors", "DeviceTimeout": "errors", "ModemVerifyError": "errors",
    "UnknownNameError": "errors",
    "DeviceSpec": "spec", "load_device": "config", "parse_device": "config",
    "identify": "identify",
    "RunResult": "runner", "check": "runner", "check_object": "runner",
    "CONVENTIONS": "schemes.conventions", "MODULATIONS": "schemes.conventions",
    "Convention": "schemes.conventions", "get_convention": "schemes.conventions",
    "Verdict": "verdict",
}
#: classes shown as ``modemverify.X`` in reprs and docs
_PUBLIC_CLASSES = {"Verdict", "DeviceSpec", "RunResult", "Convention"}

__all__ = ["__version__", *sorted(_EXPORTS)]


def __getattr__(name: str):
    if name not in _EXPORTS:
        raise AttributeError(f"module 'modemverify' has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{_EXPORTS[name]}", __name__), name)
    if name in _PUBLIC_CLASSES:
        value.__module__ = "modemverify"
    globals()[name] = value
    return value


def __dir__():
    return __all__
