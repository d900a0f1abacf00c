"""``adapter: python``: a device that is a Python object.

``target`` names a callable as ``FILE.py:NAME`` (the file relative to the device file) or
``package.module:NAME``; it is called with ``params`` as keyword arguments and must return an
object with ``modulate`` and/or ``demodulate`` (and optionally ``demodulate_soft``).
"""

from __future__ import annotations

import hashlib
import importlib
import importlib.util
import sys
import traceback
from pathlib import Path

from ..errors import AdapterError, ConfigError
from .base import CAPABILITIES, ModemAdapter


def load_target(target: str, base_dir: Path, *, file: str | None = None):
    """Import ``FILE.py:NAME`` or ``module:NAME`` and return the named object."""
    mod_part, sep, attr = target.rpartition(":")
    if not sep or not mod_part or not attr:
        raise ConfigError(f"target={target!r}: expected FILE.py:NAME or package.module:NAME",
                          file=file, key="target")
    if mod_part.endswith(".py"):
        path = Path(mod_part)
        path = path if path.is_absolute() else base_dir / path
        if not path.is_file():
            raise ConfigError(f"target={target!r}: no file {path}", file=file, key="target")
        mod_name = "_modemverify_target_" + hashlib.sha1(str(path.resolve()).encode()).hexdigest()[:12]
        spec = importlib.util.spec_from_file_location(mod_name, path)
        module = importlib.util.module_from_spec(spec)
        sys.modules[mod_name] = module
        try:
            spec.loader.exec_module(module)
        except Exception as exc:
            sys.modules.pop(mod_name, None)
            raise ConfigError(f"target={target!r}: importing {path.name} raised "
                              f"{type(exc).__name__}: {exc}{_where(exc)}",
                              file=file, key="target") from None
    else:
        try:
            module = importlib.import_module(mod_part)
        except Exception as exc:
            raise ConfigError(f"target={target!r}: cannot import {mod_part!r} "
                              f"({type(exc).__name__}: {exc})", file=file, key="target") from None
    try:
        return getattr(module, attr)
    except AttributeError:
        names = sorted(n for n in vars(module) if not n.startswith("_") and
                       callable(getattr(module, n)))
        raise ConfigError(f"target={target!r}: {mod_part} has no {attr!r}; callables there: "
                          f"{', '.join(names) or 'none'}", file=file, key="target") from None


def _where(exc: BaseException) -> str:
    tb = traceback.extract_tb(exc.__traceback__)
    return f" (line {tb[-1].lineno})" if tb else ""


class PythonAdapter(ModemAdapter):
    """Wraps a Python object offering modulate / demodulate / demodulate_soft."""

    adapter_id = "python"

    def __init__(self, device):
        self.device = device
        self.capabilities = frozenset(c for c in CAPABILITIES
                                      if callable(getattr(device, c, None)))

    @classmethod
    def validate_spec(cls, spec) -> None:
        if not spec.target:
            raise ConfigError("missing key 'target': expected FILE.py:NAME or "
                              "package.module:NAME naming a callable that returns the device",
                              file=spec.file, key="target")

    @classmethod
    def from_spec(cls, spec) -> "PythonAdapter":
        factory = load_target(spec.target, spec.base_dir, file=spec.file)
        if not callable(factory):
            raise ConfigError(f"target={spec.target!r}: {type(factory).__name__} is not "
                              f"callable", file=spec.file, key="target")
        try:
            device = factory(**spec.params)
        except TypeError as exc:
            raise ConfigError(f"params={spec.params!r}: calling {spec.target} failed: {exc}",
                              file=spec.file, key="params") from None
        except Exception as exc:
            raise AdapterError(f"raised {type(exc).__name__}: {exc}",
                               call=f"{spec.target} (creating the device)") from exc
        adapter = cls(device)
        if not adapter.capabilities & {"modulate", "demodulate"}:
            raise ConfigError(f"target={spec.target!r}: the object it returns "
                              f"({type(device).__name__}) has neither modulate nor demodulate",
                              file=spec.file, key="target")
        return adapter

    def modulate(self, bits):
        return self.device.modulate(bits)

    def demodulate(self, samples):
        return self.device.demodulate(samples)

    def demodulate_soft(self, samples, noise_var):
        return self.device.demodulate_soft(samples, noise_var)

    def close(self):
        close = getattr(self.device, "close", None)
        if callable(close):
            close()
