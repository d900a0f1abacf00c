"""``adapter: python``: a device that is a Python object.

``target`` names a callable as ``FILE.py:NAME`` (the file relative to the device file) or
``package.module:NAME``; it is called with ``params`` as keyword arguments and must return an
object with ``modulate`` and/or ``demodulate`` (and optionally ``demodulate_soft``; a device
with state, ``scheme.streaming: true``, also ``reset`` and ``flush``).
"""

from __future__ import annotations

import hashlib
import importlib
import importlib.util
import inspect
import sys
import traceback
from pathlib import Path

import numpy as np

from ..dsp.formats import (
    PYTHON_FORMATS,
    SAMPLE_FORMATS,
    from_format,
    full_scale_opt,
    sample_format_opt,
    to_format,
)
from ..errors import AdapterError, ConfigError, DeviceOutputError
from .base import CAPABILITIES, ModemAdapter

__all__ = ["ADAPTER", "load_target", "validate_format_keys", "decode_output", "PythonAdapter"]


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
        digest = hashlib.sha1(str(path.resolve()).encode()).hexdigest()[:12]
        mod_name = "_modemverify_target_" + digest
        spec = importlib.util.spec_from_file_location(mod_name, path)
        module = importlib.util.module_from_spec(spec)
        sys.modules[mod_name] = module
        # the device's own folder is importable, so FILE.py can import a module beside it
        folder = str(path.resolve().parent)
        if folder not in sys.path:
            sys.path.append(folder)
        try:
            spec.loader.exec_module(module)
        except Exception as exc:
            sys.modules.pop(mod_name, None)
            raise ConfigError(f"target={target!r}: importing {path.name} raised "
                              f"{type(exc).__name__}: {exc}{_where(exc)}",
                              file=file, key="target") from None
        except BaseException:  # sys.exit at import: the device guard reports it (bench.open_bench)
            sys.modules.pop(mod_name, None)
            raise
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


def validate_format_keys(spec) -> tuple[str, float]:
    """``sample_format`` and ``full_scale`` of a device file, checked."""
    fmt = spec.extra.get("sample_format", "complex128")  # both checked when the file loaded
    full_scale = spec.extra.get("full_scale", 1.0)
    if "full_scale" in spec.extra and not SAMPLE_FORMATS[fmt].integer:
        raise ConfigError(f"full_scale={spec.extra['full_scale']!r} applies to sample_format "
                          f"int16 or int8", file=spec.file, key="full_scale")
    return fmt, full_scale


def decode_output(out, fmt: str, full_scale: float):
    """A device's output in ``fmt`` as complex128 (integer codes must be integers)."""
    arr = np.asarray(out)
    if SAMPLE_FORMATS[fmt].integer and not np.issubdtype(arr.dtype, np.integer):
        raise DeviceOutputError(f"returned dtype {arr.dtype}; sample_format {fmt} expects "
                                f"interleaved integer I, Q codes", call="modulate")
    try:
        return from_format(arr, fmt, full_scale)
    except ConfigError as exc:
        raise DeviceOutputError(f"returned samples not in sample_format {fmt}: "
                                f"{exc.raw_message}", call="modulate") from None


def _signature_problem(factory, params: dict) -> str | None:
    """Why ``params`` do not fit ``factory``'s signature: "" when they do, None when it has no
    signature to ask."""
    try:
        signature = inspect.signature(factory)
    except (TypeError, ValueError):
        return None
    try:
        signature.bind(**params)
    except TypeError as exc:
        return str(exc) or "the keyword arguments do not match its signature"
    return ""


def _where(exc: BaseException) -> str:
    tb = traceback.extract_tb(exc.__traceback__)
    return f" (line {tb[-1].lineno})" if tb else ""


class PythonAdapter(ModemAdapter):
    """Wraps a Python object offering modulate / demodulate / demodulate_soft.

    With ``sample_format: int16`` (or ``int8``) the device returns, and receives, interleaved
    I, Q integer codes in Q15 (Q7): value = code x ``full_scale`` / 32768 (128);
    ``complex64`` devices exchange single-precision samples.
    """

    adapter_id = "python"
    config_keys = {
        "sample_format": sample_format_opt(PYTHON_FORMATS, "complex128", "complex128 (default), "
                                           "complex64, int16 or int8 (interleaved I, Q codes)"),
        "full_scale": full_scale_opt("int16/int8: the value of the code 2**(bits-1) "
                                     "(default 1.0)"),
    }

    def __init__(self, device, sample_format: str = "complex128", full_scale: float = 1.0):
        self.device = device
        self.sample_format = sample_format
        self.full_scale = float(full_scale)
        self.capabilities = frozenset(c for c in CAPABILITIES
                                      if callable(getattr(device, c, None)))

    @classmethod
    def validate_spec(cls, spec) -> None:
        if not spec.target:
            raise ConfigError("missing key 'target': expected FILE.py:NAME or "
                              "package.module:NAME naming a callable that returns the device",
                              file=spec.file, key="target")
        validate_format_keys(spec)

    @classmethod
    def from_spec(cls, spec) -> "PythonAdapter":
        factory = load_target(spec.target, spec.base_dir, file=spec.file)
        if not callable(factory):
            raise ConfigError(f"target={spec.target!r}: {type(factory).__name__} is not "
                              f"callable", file=spec.file, key="target")
        # exit 2 only when the params do not fit the signature; a TypeError raised inside the
        # constructor is the device's (its signature tells the two apart)
        problem = _signature_problem(factory, spec.params)
        if problem:
            raise ConfigError(f"params={spec.params!r}: calling {spec.target} failed: {problem}",
                              file=spec.file, key="params")
        try:
            device = factory(**spec.params)
        except TypeError as exc:
            if problem is None:  # no signature to ask: blame the params, as before
                raise ConfigError(f"params={spec.params!r}: calling {spec.target} failed: "
                                  f"{exc}", file=spec.file, key="params") from None
            raise AdapterError(f"raised TypeError: {exc}{_where(exc)}",
                               call=f"{spec.target} (creating the device)") from exc
        except Exception as exc:
            raise AdapterError(f"raised {type(exc).__name__}: {exc}",
                               call=f"{spec.target} (creating the device)") from exc
        fmt, full_scale = validate_format_keys(spec)
        adapter = cls(device, fmt, full_scale)
        if not adapter.capabilities & {"modulate", "demodulate"}:
            raise ConfigError(f"target={spec.target!r}: the object it returns "
                              f"({type(device).__name__}) has neither modulate nor demodulate",
                              file=spec.file, key="target")
        return adapter

    def modulate(self, bits):
        out = self.device.modulate(bits)
        if self.sample_format == "complex128":
            return out
        return decode_output(out, self.sample_format, self.full_scale)

    def demodulate(self, samples):
        return self.device.demodulate(self._encode(samples))

    def demodulate_soft(self, samples, noise_var):
        return self.device.demodulate_soft(self._encode(samples), noise_var)

    def reset(self):
        self.device.reset()

    def flush(self):
        out = self.device.flush()
        if self.sample_format == "complex128":
            return out
        return decode_output(out, self.sample_format, self.full_scale)

    def _encode(self, samples):
        if self.sample_format == "complex128":
            return samples
        return to_format(samples, self.sample_format, self.full_scale)[0]

    def close(self):
        close = getattr(self.device, "close", None)
        if callable(close):
            close()


#: the adapter this module adds (found by adapters.registry)
ADAPTER = PythonAdapter
