"""How the harness reaches a device: the adapter contract, the guard, and adapter lookup.

Plugin authors subclass :class:`ModemAdapter`; :class:`GuardedDevice` checks what a device
returns; :func:`get_adapter_class` finds built-in and plugin adapters by name. The built-in
adapters live in their own modules (``python``, ``reference``, ``sharedlib``, ``process``,
``recorded``), found through the registry. Names are imported on first use, so that a device
process importing the frame protocol (``adapters._wire``) loads no more than it needs.
"""

from __future__ import annotations

from .._door import lazy_door

_EXPORTS = {
    "CAPABILITIES": "base",
    "STATE_CALLS": "base",
    "ModemAdapter": "base",
    "summarise_bits": "base",
    "summarise_samples": "base",
    "describe_raise": "base",
    "max_output": "base",
    "OUTPUT_SLACK": "base",
    "OUTPUT_SLACK_SYMBOLS": "base",
    "GuardedDevice": "base",
    "ENTRY_POINT_GROUP": "registry",
    "builtin_adapters": "registry",
    "available_adapters": "registry",
    "get_adapter_class": "registry",
}

__all__ = sorted(_EXPORTS)
__getattr__, __dir__ = lazy_door(__name__, _EXPORTS)
