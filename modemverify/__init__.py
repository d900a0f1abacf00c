"""modemverify: property-based verification of modem implementations.

The public API: load a device file, run its checks, read the Verdicts. Names are imported on
first use, so that ``import modemverify`` stays cheap for worker and device processes.

>>> import modemverify
>>> sorted(modemverify.MODULATIONS)[:3]
['1024qam', '16apsk', '16qam']
"""

from __future__ import annotations

from ._door import lazy_door
from ._version import __version__

_EXPORTS = {
    # running checks
    "check": "runner", "check_object": "runner", "RunResult": "runner", "Subject": "runner",
    "expected_names": "runner", "DEFAULT_SEED": "runner",
    "identify": "identify", "IdentifyResult": "identify", "compare": "compare",
    "Verdict": "verdict",
    # device files
    "DeviceSpec": "spec", "SchemeSpec": "spec", "load_device": "config",
    "parse_device": "config",
    # conventions
    "CONVENTIONS": "schemes.conventions", "MODULATIONS": "schemes.conventions",
    "Convention": "schemes.conventions", "get_convention": "schemes.conventions",
    # for plugin and check authors: an adapter, an oracle on a bench, typed options
    "ModemAdapter": "adapters.base", "Oracle": "oracles.base", "Bench": "bench",
    "Opt": "options",
    # errors
    "AdapterError": "errors", "ConfigError": "errors", "DeviceCrashed": "errors",
    "DeviceOutputError": "errors", "DeviceTimeout": "errors", "ModemVerifyError": "errors",
    "UnknownNameError": "errors",
}

__all__ = ["__version__", *sorted(_EXPORTS)]
__getattr__, __dir__ = lazy_door(__name__, _EXPORTS, public_module=__name__)
