"""The device protocol every adapter implements, and the guard the harness calls it through.

An adapter wraps one device under test. It offers any of three calls:

``modulate(bits) -> samples``
    bits: 1-D uint8 array of 0/1, a whole number of labels; samples: 1-D complex,
    ``samples_per_symbol`` samples per label.
``demodulate(samples) -> bits``
    hard decisions, one 0/1 per label bit.
``demodulate_soft(samples, noise_var) -> llrs``
    one float per label bit, positive meaning bit 0 unless the device file sets
    ``scheme.llr_positive_bit: 1``; ``noise_var`` is the complex noise variance per sample of
    ``samples`` (E|w|^2; N0 at one sample per symbol).

Adapters know nothing of oracles. The harness never calls an adapter directly: it calls a
:class:`GuardedDevice`, which turns whatever the device does wrong (raises, returns the wrong
type, shape or length, NaN) into an :class:`~modemverify.errors.AdapterError` that names the call
and the input, so an oracle can report it as a verdict and the run goes on.
"""

from __future__ import annotations

import time
from abc import ABC, abstractmethod
from typing import ClassVar

import numpy as np

from ..errors import AdapterError, DeviceOutputError
from ..options import Opt
from ..spec import DeviceSpec

__all__ = ["CAPABILITIES", "ModemAdapter", "summarise_bits", "summarise_samples", "GuardedDevice"]

CAPABILITIES = ("modulate", "demodulate", "demodulate_soft")


class ModemAdapter(ABC):
    """Base class of adapters. Subclasses set ``adapter_id`` and implement :meth:`from_spec`.

    ``config_keys`` maps the extra top-level device-file keys the adapter reads to an
    :class:`~modemverify.options.Opt`, which the device-file loader validates with every other
    key (a plain description is accepted too: the value is then the adapter's own to check in
    :meth:`validate_spec`). The loader accepts exactly those keys beside the common ones.
    """

    adapter_id: ClassVar[str]
    config_keys: ClassVar[dict[str, Opt | str]] = {}
    #: default of the device file's ``isolate`` key: run the device in a worker process
    isolate_default: ClassVar[bool] = False
    #: true when the adapter itself runs the device out of process and enforces ``timeout_s``
    #: (the harness then never wraps it in a worker)
    isolates_itself: ClassVar[bool] = False

    @property
    def capabilities(self) -> frozenset[str]:
        """The calls this device offers, a subset of :data:`CAPABILITIES`.

        By default, the operations the adapter's class implements (overrides); an adapter
        whose device decides at run time (a wrapped object, a library's symbols, a process's
        hello) assigns ``self.capabilities`` instead.
        """
        given = self.__dict__.get("_capabilities")
        if given is not None:
            return given
        return frozenset(op for op in CAPABILITIES
                         if getattr(type(self), op) is not getattr(ModemAdapter, op))

    @capabilities.setter
    def capabilities(self, value) -> None:
        ops = frozenset(value)
        unknown = sorted(ops - set(CAPABILITIES))
        if unknown:
            raise ValueError(f"capabilities={sorted(ops)}: {unknown[0]!r} is not one of "
                             f"{', '.join(CAPABILITIES)}")
        self.__dict__["_capabilities"] = ops

    #: True for devices that can only replay what was recorded (``recorded``): checks that
    #: draw fresh vectors (roundtrip, ber, llr) are then skipped, with that reason
    replays_only: ClassVar[bool] = False

    @classmethod
    def validate_spec(cls, spec: "DeviceSpec") -> None:
        """Check the adapter's own keys when the device file is loaded (raise ConfigError)."""

    @classmethod
    @abstractmethod
    def from_spec(cls, spec: "DeviceSpec") -> "ModemAdapter":
        """Open the device described by a validated device file."""

    def modulate(self, bits: np.ndarray) -> np.ndarray:
        raise NotImplementedError

    def demodulate(self, samples: np.ndarray) -> np.ndarray:
        raise NotImplementedError

    def demodulate_soft(self, samples: np.ndarray, noise_var: float) -> np.ndarray:
        raise NotImplementedError

    def close(self) -> None:
        """Release the device (processes, libraries). Called once at the end of a run."""


def summarise_bits(bits: np.ndarray, limit: int = 24) -> str:
    s = "".join("1" if b else "0" for b in np.asarray(bits[:limit]).tolist())
    return f"bits[{len(bits)}]={s}{'...' if len(bits) > limit else ''}"


def summarise_samples(samples: np.ndarray, limit: int = 2) -> str:
    head = ", ".join(f"{complex(x):.3g}" for x in np.asarray(samples[:limit]))
    return f"samples[{len(samples)}]=[{head}{', ...' if len(samples) > limit else ''}]"


class _Summary:
    """Formats an input summary only when a message needs it (the BER loop calls millions of
    times and never fails)."""

    __slots__ = ("fn", "arg", "extra")

    def __init__(self, fn, arg, extra=""):
        self.fn, self.arg, self.extra = fn, arg, extra

    def __str__(self) -> str:
        return self.fn(self.arg) + self.extra

    def __format__(self, spec) -> str:
        return format(str(self), spec)


def _as_1d(out, call: str, summary) -> np.ndarray:
    try:
        arr = np.asarray(out)
    except Exception as exc:  # a device returning an unconvertible object
        raise DeviceOutputError(f"returned {type(out).__name__}, not an array ({exc})",
                                call=call, input_summary=str(summary)) from None
    if arr.ndim != 1:
        raise DeviceOutputError(f"returned an array of shape {arr.shape}; expected 1-D",
                                call=call, input_summary=str(summary))
    return arr


class GuardedDevice:
    """Calls a device through checks; counts the time spent inside the device.

    Parameters
    ----------
    adapter : ModemAdapter
    bits_per_symbol, samples_per_symbol : int
    name : str
        Device name, for messages.
    """

    def __init__(self, adapter: ModemAdapter, bits_per_symbol: int, samples_per_symbol: int = 1,
                 name: str = "device", *, tail_samples: int | None = 0, input_tail: int = 0):
        self.adapter = adapter
        self.k = int(bits_per_symbol)
        self.sps = int(samples_per_symbol)
        #: samples beyond n x sps that modulate must return (None: any number)
        self.tail_samples = tail_samples
        #: samples beyond n x sps in the waveforms given to demodulate (the reference's tail)
        self.input_tail = int(input_tail)
        self.name = name
        self.capabilities = frozenset(adapter.capabilities)
        self.replays_only = bool(getattr(adapter, "replays_only", False))
        self.device_time_s = 0.0
        self.calls = 0

    def has(self, capability: str) -> bool:
        return capability in self.capabilities

    def bits_for(self, n_samples: int) -> int:
        """Bits carried by a reference waveform of ``n_samples`` samples."""
        return max(n_samples - self.input_tail, 0) // self.sps * self.k

    def _call(self, call: str, summary, fn, *args):
        __tracebackhide__ = True
        t0 = time.perf_counter()
        try:
            return fn(*args)
        except AdapterError:
            raise
        except Exception as exc:
            raise AdapterError(f"raised {type(exc).__name__}: {exc}", call=call,
                               input_summary=str(summary)) from exc
        finally:
            self.device_time_s += time.perf_counter() - t0
            self.calls += 1

    def modulate(self, bits: np.ndarray, *, check_length: bool = True,
                 check_finite: bool = True) -> np.ndarray:
        """Call ``modulate``; return complex128 samples or raise AdapterError."""
        bits = np.ascontiguousarray(bits, dtype=np.uint8)
        summary = _Summary(summarise_bits, bits)
        out = _as_1d(self._call("modulate", summary, self.adapter.modulate, bits.copy()),
                     "modulate", summary)
        if out.dtype.kind not in "biufc":
            raise DeviceOutputError(f"returned dtype {out.dtype}; expected complex samples",
                                    call="modulate", input_summary=str(summary))
        out = out.astype(np.complex128, copy=False)
        if check_length:
            n = bits.size // self.k
            if self.tail_samples is not None:
                expected = n * self.sps + self.tail_samples
                if out.size != expected:
                    tail = f" + {self.tail_samples} tail" if self.tail_samples else ""
                    raise DeviceOutputError(
                        f"returned {out.size} samples; expected {expected} "
                        f"({n} symbols x {self.sps} samples per symbol{tail})",
                        call="modulate", input_summary=str(summary))
            elif n and out.size < n * self.sps // 2:
                raise DeviceOutputError(
                    f"returned {out.size} samples for {n} symbols at {self.sps} samples per "
                    f"symbol", call="modulate", input_summary=str(summary))
        # a sum is finite only if every term is (the full scan runs only to locate a problem)
        if check_finite and not np.isfinite(np.sum(out.view(np.float64))) and \
                not np.all(np.isfinite(out)):
            bad = int(np.argmin(np.isfinite(out)))
            raise DeviceOutputError(f"returned a non-finite sample ({out[bad]}) at index {bad}",
                                    call="modulate", input_summary=str(summary))
        return out

    def demodulate(self, samples: np.ndarray, *, n_bits: int | None = None,
                   check_length: bool = True) -> np.ndarray:
        """Call ``demodulate``; return uint8 bits or raise AdapterError.

        The device gets ``samples`` itself, not a copy: callers pass buffers they do not read
        again (a device that scribbles on its input harms no one).
        """
        samples = np.ascontiguousarray(samples, dtype=np.complex128)
        summary = _Summary(summarise_samples, samples)
        out = _as_1d(self._call("demodulate", summary, self.adapter.demodulate, samples),
                     "demodulate", summary)
        if out.dtype.kind not in "biuf":
            raise DeviceOutputError(f"returned dtype {out.dtype}; expected bits 0/1",
                                    call="demodulate", input_summary=str(summary))
        if out.size and (out.max() > 1 if out.dtype.kind in "bu" else
                         not np.all((out == 0) | (out == 1))):
            bad = out[~((out == 0) | (out == 1))][0]
            raise DeviceOutputError(f"returned the value {bad!r}; expected bits 0/1",
                                    call="demodulate", input_summary=str(summary))
        expected = n_bits if n_bits is not None else self.bits_for(samples.size)
        if check_length and out.size != expected:
            raise DeviceOutputError(f"returned {out.size} bits; expected {expected}",
                                    call="demodulate", input_summary=str(summary))
        return out.astype(np.uint8, copy=False)

    def demodulate_soft(self, samples: np.ndarray, noise_var: float, *,
                        n_bits: int | None = None) -> np.ndarray:
        """Call ``demodulate_soft``; return float64 LLRs or raise AdapterError."""
        samples = np.ascontiguousarray(samples, dtype=np.complex128)
        summary = _Summary(summarise_samples, samples, f", noise_var={noise_var:.4g}")
        out = _as_1d(self._call("demodulate_soft", summary, self.adapter.demodulate_soft,
                                samples.copy(), float(noise_var)),
                     "demodulate_soft", summary)
        if out.dtype.kind not in "iuf":
            raise DeviceOutputError(f"returned dtype {out.dtype}; expected real LLRs",
                                    call="demodulate_soft", input_summary=str(summary))
        expected = n_bits if n_bits is not None else self.bits_for(samples.size)
        if out.size != expected:
            raise DeviceOutputError(f"returned {out.size} LLRs; expected {expected}",
                                    call="demodulate_soft", input_summary=str(summary))
        out = out.astype(np.float64, copy=False)
        if not np.all(np.isfinite(out)):
            bad = int(np.argmin(np.isfinite(out)))
            raise DeviceOutputError(f"returned a non-finite LLR ({out[bad]}) at index {bad}",
                                    call="demodulate_soft", input_summary=str(summary))
        return out

    def close(self) -> None:
        try:
            self.adapter.close()
        except Exception:  # closing a broken device must not lose the verdicts
            pass
