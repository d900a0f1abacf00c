"""modemverify: property-based verification of modem implementations.

The public API: load a device file, run its checks, read the Verdicts.

>>> import modemverify
>>> sorted(modemverify.MODULATIONS)[:3]
['16qam', '256qam', '64qam']
"""

__version__ = "0.1.0"

from .config import DeviceSpec, load_device, parse_device  # noqa: E402
from .errors import (AdapterError, ConfigError, DeviceCrashed, DeviceOutputError,  # noqa: E402
                     DeviceTimeout, ModemVerifyError, UnknownNameError)
from .identify import identify  # noqa: E402
from .runner import RunResult, check, check_object  # noqa: E402
from .schemes.conventions import CONVENTIONS, MODULATIONS, Convention, get_convention  # noqa: E402
from .verdict import Verdict  # noqa: E402

__all__ = ["__version__", "AdapterError", "CONVENTIONS", "ConfigError", "Convention",
           "DeviceCrashed", "DeviceOutputError", "DeviceSpec", "DeviceTimeout", "MODULATIONS",
           "ModemVerifyError", "RunResult", "UnknownNameError", "Verdict", "check",
           "check_object", "get_convention", "identify", "load_device", "parse_device"]

for _cls in (Verdict, DeviceSpec, RunResult, Convention):
    _cls.__module__ = "modemverify"
del _cls
