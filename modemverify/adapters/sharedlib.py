"""``adapter: sharedlib``: a modem in a C shared library, called through this ABI.

.. code-block:: c

    /* returns the complex samples written, < 0 on error */
    long modulate(const uint8_t *bits, size_t n_bits, float *iq, size_t capacity);
    /* returns the bits written, < 0 on error */
    long demodulate(const float *iq, size_t n_samples, uint8_t *bits, size_t capacity);
    /* optional: returns the LLRs written, < 0 on error */
    long demodulate_soft(const float *iq, size_t n_samples, double noise_var,
                         float *llr, size_t capacity);

``bits`` holds one bit per byte (0 or 1), in the order they are fed. ``iq`` is interleaved
I, Q; ``capacity`` counts complex samples (modulate) or bits / LLRs (demodulate). With
``sample_format: int16`` the ``iq`` pointers are ``int16_t *`` in Q15: value = integer *
``full_scale`` / 32768. The capacity the harness gives is at least twice the expected count, so a
device that writes too many samples is reported by the ``length`` check rather than overrunning
its buffer; a device that reports more than its capacity is reported as a buffer overrun.

Every buffer the library is given (the input bits or samples and the output) lies between two
canaries of ``CANARY_BYTES`` each, a fixed pseudo-random byte pattern, checked after every
call: a write up to that far past the end of a buffer is a buffer overrun, one before its
start a buffer underrun, reported on the call that made it, naming the buffer and how far the
damage reaches. What the canaries cannot see: a write farther than ``CANARY_BYTES`` from every
buffer, writes into the library's own memory (globals, heap, stack) or into the buffer itself
beyond what the call returns, a write that stores the pattern's own bytes, reads out of
bounds, and writes after the call has returned (a thread). In process (``isolate: false``)
such a write may corrupt the harness silently; in a worker (the default) one that reaches
unmapped memory is a crash (SIGSEGV) reported as such.

Device-file keys: ``library`` (path, relative to the device file), ``symbols`` (``{modulate:
NAME, demodulate: NAME, demodulate_soft: NAME}``, at least one of the first two),
``sample_format`` (``float32`` or ``int16``) and ``full_scale`` (int16 only, default 1).

The library runs in a worker process by default (``isolate: true``), so a segfault is an error
verdict; ``isolate: false`` calls it in the harness's own process (fastest, but a crash ends
the run).
"""

from __future__ import annotations

import ctypes
import re

import numpy as np

from ..dsp.formats import (
    SAMPLE_FORMATS,
    WIRE_FORMATS,
    encode_samples,
    from_format,
    full_scale_opt,
    sample_format_opt,
)
from ..errors import AdapterError, ConfigError, DeviceOutputError
from ..options import Opt
from .base import ModemAdapter, summarise_bits, summarise_samples

__all__ = ["ADAPTER", "SYMBOL_KEYS", "GUARD", "CANARY_BYTES", "SharedLibAdapter"]

SYMBOL_KEYS = ("modulate", "demodulate", "demodulate_soft")
_C_IDENTIFIER = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")
#: elements of slack in every capacity given (beyond twice the expected count)
GUARD = 64
#: bytes of canary before and after every buffer given to the library (a multiple of 64, so
#: the buffer between them keeps numpy's alignment)
CANARY_BYTES = 16 << 10
#: the canary: fixed pseudo-random bytes (no constant a device might write by chance)
_CANARY = np.random.default_rng(0x6D76_6361).integers(0, 256, CANARY_BYTES, dtype=np.uint8)


class _Fenced:
    """``n`` items of ``dtype`` between two canaries; ``array`` is what the library gets."""

    __slots__ = ("raw", "array", "nbytes", "role")

    def __init__(self, n: int, dtype, role: str, fill=None):
        dtype = np.dtype(dtype)
        self.role = role
        self.nbytes = n * dtype.itemsize
        raw = np.empty(2 * CANARY_BYTES + self.nbytes, np.uint8)
        raw[:CANARY_BYTES] = _CANARY
        raw[CANARY_BYTES + self.nbytes:] = _CANARY
        self.raw = raw
        self.array = raw[CANARY_BYTES:CANARY_BYTES + self.nbytes].view(dtype)
        if fill is not None:
            self.array[:] = fill

    @property
    def address(self) -> int:
        return self.array.ctypes.data

    def damage(self, size: str = "") -> str | None:
        """What the library did to the canaries, or None when both are whole (``size``: the
        buffer's capacity, for the message)."""
        before = np.flatnonzero(self.raw[:CANARY_BYTES] != _CANARY)
        if before.size:
            return (f"wrote before the start of its {self.role} (up to {CANARY_BYTES - before[0]}"
                    f" bytes before it): a buffer underrun")
        after = np.flatnonzero(self.raw[CANARY_BYTES + self.nbytes:] != _CANARY)
        if after.size:
            return (f"wrote past the end of its {self.role}{size}: a buffer overrun "
                    f"(changed bytes up to {after[-1] + 1} past the end)")
        return None


def _options(spec):
    """(library path, symbols, sample_format, full_scale) of a spec, validated."""
    x = spec.extra
    file = spec.file
    if "library" not in x:
        raise ConfigError("missing key 'library': the path of the shared library (relative to "
                          "the device file)", file=file, key="library")
    lib = x["library"]
    if not isinstance(lib, str) or not lib:
        raise ConfigError(f"library={lib!r}: expected a path such as build/libmodem.so",
                          file=file, key="library")
    path = spec.resolve(lib)
    if not path.is_file():
        raise ConfigError(f"library={lib!r}: no such file {path}", file=file, key="library")
    symbols = x.get("symbols")
    if not isinstance(symbols, dict) or not symbols:
        raise ConfigError(f"symbols={symbols!r}: expected a mapping such as {{modulate: "
                          f"qpsk_mod, demodulate: qpsk_demod}}", file=file, key="symbols")
    for key, name in symbols.items():
        if key not in SYMBOL_KEYS:
            raise ConfigError(f"unknown function {key!r}; expected some of "
                              f"{', '.join(SYMBOL_KEYS)}", file=file, key=f"symbols.{key}")
        if not isinstance(name, str) or not _C_IDENTIFIER.match(name):
            raise ConfigError(f"{key}={name!r}: expected the name of a C function",
                              file=file, key=f"symbols.{key}")
    if not set(symbols) & {"modulate", "demodulate"}:
        raise ConfigError("symbols: name at least one of modulate and demodulate", file=file,
                          key="symbols")
    fmt = x.get("sample_format", "float32")  # both checked when the file loaded
    full_scale = x.get("full_scale", 1.0)
    if "full_scale" in x and fmt != "int16":
        raise ConfigError(f"full_scale={full_scale!r} applies to sample_format: int16 only",
                          file=file, key="full_scale")
    return path, dict(symbols), fmt, full_scale


class SharedLibAdapter(ModemAdapter):
    """Calls a C modem through ctypes (see the module docstring for the ABI)."""

    adapter_id = "sharedlib"
    isolate_default = True
    config_keys = {
        "library": Opt("str", None, "path of the shared library, relative to the device file",
                       expected="a path such as build/libmodem.so"),
        "symbols": Opt("mapping", None, "C function names: {modulate: NAME, demodulate: NAME, "
                       "demodulate_soft: NAME}",
                       expected="a mapping such as {modulate: qpsk_mod, demodulate: qpsk_demod}"),
        "sample_format": sample_format_opt(WIRE_FORMATS, "float32",
                                           "float32 (default) or int16 (Q15, see full_scale)"),
        "full_scale": full_scale_opt("int16 only: the value of the integer 32768 (default 1.0)"),
    }

    def __init__(self, lib, functions: dict, bits_per_symbol: int, samples_per_symbol: int,
                 sample_format: str = "float32", full_scale: float = 1.0, name: str = ""):
        self.lib = lib
        self.functions = functions
        self.k = int(bits_per_symbol)
        self.sps = int(samples_per_symbol)
        self.sample_format = sample_format
        self.full_scale = float(full_scale)
        self.name = name
        self.capabilities = frozenset(functions)
        self._component = SAMPLE_FORMATS[sample_format].dtype

    @classmethod
    def validate_spec(cls, spec) -> None:
        _options(spec)

    @classmethod
    def from_spec(cls, spec) -> "SharedLibAdapter":
        path, symbols, fmt, full_scale = _options(spec)
        try:
            lib = ctypes.CDLL(str(path))
        except OSError as exc:
            raise ConfigError(f"library={spec.extra['library']!r}: cannot be loaded ({exc})",
                              file=spec.file, key="library") from None
        functions = {}
        for key, name in symbols.items():
            try:
                fn = getattr(lib, name)
            except AttributeError:
                raise ConfigError(f"{key}={name!r}: {path.name} exports no such function",
                                  file=spec.file, key=f"symbols.{key}") from None
            fn.restype = ctypes.c_long
            if key == "demodulate_soft":
                fn.argtypes = [ctypes.c_void_p, ctypes.c_size_t, ctypes.c_double,
                               ctypes.c_void_p, ctypes.c_size_t]
            else:
                fn.argtypes = [ctypes.c_void_p, ctypes.c_size_t, ctypes.c_void_p,
                               ctypes.c_size_t]
            functions[key] = fn
        return cls(lib, functions, spec.scheme.bits_per_symbol, spec.scheme.samples_per_symbol,
                   fmt, full_scale, name=path.name)

    # -- helpers ---------------------------------------------------------------------------
    @staticmethod
    def _check(call: str, ret: int, capacity: int, fences, unit: str, describe) -> int:
        """The count ``ret`` once checked (the canaries first: an underrun or overrun is the
        call's, whatever it returned); ``describe()`` summarises the input for an error."""
        for fence in fences:
            damage = fence.damage(f" (capacity {capacity} {unit})"
                                  if fence.role == "output buffer" else "")
            if damage:
                raise DeviceOutputError(damage, call=call, input_summary=describe())
        if ret < 0:
            raise AdapterError(f"returned error code {ret}", call=call,
                               input_summary=describe())
        if ret > capacity:
            raise DeviceOutputError(f"reported {ret} {unit} written into a buffer of {capacity}: "
                                    f"a buffer overrun", call=call, input_summary=describe())
        return ret

    # -- calls -----------------------------------------------------------------------------
    def modulate(self, bits):
        bits = _Fenced(np.size(bits), np.uint8, "input buffer", fill=bits)
        capacity = 2 * (bits.array.size // self.k) * self.sps + GUARD
        out = _Fenced(2 * capacity, self._component, "output buffer")
        ret = self.functions["modulate"](bits.address, bits.array.size, out.address, capacity)
        n = self._check("modulate", ret, capacity, (out, bits), "samples",
                        lambda: summarise_bits(bits.array))
        return from_format(out.array[:2 * n], self.sample_format, self.full_scale)

    def _iq(self, samples) -> _Fenced:
        iq = encode_samples(samples, self.sample_format, self.full_scale)
        return _Fenced(iq.size, iq.dtype, "input buffer", fill=iq)

    def demodulate(self, samples):
        iq = self._iq(samples)
        n_samples = iq.array.size // 2
        capacity = 2 * (n_samples // self.sps) * self.k + GUARD
        out = _Fenced(capacity, np.uint8, "output buffer")
        ret = self.functions["demodulate"](iq.address, n_samples, out.address, capacity)
        n = self._check("demodulate", ret, capacity, (out, iq), "bits",
                        lambda: summarise_samples(samples))
        return out.array[:n].copy()

    def demodulate_soft(self, samples, noise_var):
        iq = self._iq(samples)
        n_samples = iq.array.size // 2
        capacity = 2 * (n_samples // self.sps) * self.k + GUARD
        out = _Fenced(capacity, np.float32, "output buffer")
        ret = self.functions["demodulate_soft"](iq.address, n_samples, float(noise_var),
                                                out.address, capacity)
        n = self._check("demodulate_soft", ret, capacity, (out, iq), "LLRs",
                        lambda: summarise_samples(samples) + f", noise_var={noise_var:.4g}")
        return out.array[:n].astype(np.float64)


#: the adapter this module adds (found by adapters.registry)
ADAPTER = SharedLibAdapter
