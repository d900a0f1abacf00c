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

A device that keeps state between calls (``scheme.streaming: true``) may also offer
``reset()`` (back to the initial state) and ``flush() -> samples`` (the modulator's remaining
filter tail, after which it is idle). With streaming, the guard makes every call a *burst*:
``reset()`` first, and for ``modulate`` the ``flush()`` output appended, so that every check
sees a call from the initial state, as it would from a device without state; the
``streaming`` check calls with ``burst=False`` to send chunks.

Adapters know nothing of oracles. The harness never calls an adapter directly: it calls a
:class:`GuardedDevice`, which turns whatever the device does wrong (raises, returns the wrong
type, shape or length, NaN) into an :class:`~modemverify.errors.AdapterError` that names the call
and the input, so an oracle can report it as a verdict and the run goes on.
:meth:`GuardedDevice.opening` puts the opening of a device (importing it, constructing it)
under the same guard.

What the guard turns into an ``AdapterError`` (and so an ``error`` verdict): any exception,
``SystemExit`` (``sys.exit`` inside the device), any other ``BaseException`` subclass, and a
``KeyboardInterrupt`` the device raises itself. A ``KeyboardInterrupt`` that comes from Ctrl-C
or SIGTERM reaching the harness still stops the run: while a device is open the guard counts
those signals (it wraps the Python handlers of SIGINT and SIGTERM, calling the previous
handler unchanged), so it can tell the two apart; where it cannot see the signals (a handler
installed after the device opened), every ``KeyboardInterrupt`` is taken for the user's.
What no guard in the harness's own process can survive: ``os._exit``, a crash of native code
(SIGSEGV, ``abort``), and a call or a constructor that never returns; ``isolate: true`` (a
worker process, :mod:`~modemverify.adapters.isolated`) turns those into error verdicts too.

Arrays from a device are judged before anything converts them: dimensions, dtype, and a size
cap derived from the input (:func:`max_output`), so a device returning 2e8 samples for a few
bits costs no copy; then they are made contiguous (a strided view is a correct answer).
"""

from __future__ import annotations

import signal
import threading
import time
import traceback
from abc import ABC, abstractmethod
from pathlib import Path
from typing import Callable, ClassVar

import numpy as np

from ..errors import AdapterError, ConfigError, DeviceOutputError
from ..options import Opt
from ..spec import DeviceSpec

__all__ = [
    "CAPABILITIES", "STATE_CALLS", "ModemAdapter", "summarise_bits", "summarise_samples",
    "describe_raise", "max_output", "OUTPUT_SLACK", "OUTPUT_SLACK_SYMBOLS", "GuardedDevice",
]

CAPABILITIES = ("modulate", "demodulate", "demodulate_soft", "reset", "flush")
#: the calls of a device with state (``scheme.streaming``); optional, never enough alone
STATE_CALLS = ("reset", "flush")


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

    def reset(self) -> None:
        """A device with state: back to the initial state (optional)."""
        raise NotImplementedError

    def flush(self) -> np.ndarray:
        """A streaming modulator: the samples still in its filter, then idle (optional)."""
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


#: a device's output may be this many times the expected count (plus OUTPUT_SLACK_SYMBOLS
#: symbols) before it is refused unread; the length checks judge anything below that
OUTPUT_SLACK = 16
OUTPUT_SLACK_SYMBOLS = 64


def max_output(call: str, n_in: int, k: int, sps: int, tail: int = 0) -> int:
    """The most items (samples, bits or LLRs) an answer to ``call`` on ``n_in`` input items
    (bits for ``modulate``, samples otherwise) may hold before it is refused unread.

    The one cap for every way of reaching a device: the guard, the isolated worker's reply and
    the process adapter's frames all use it.

    >>> max_output("modulate", 8, 2, 1), max_output("demodulate", 4, 2, 1)
    (1088, 2176)
    """
    if call == "modulate":
        return OUTPUT_SLACK * (n_in // k + OUTPUT_SLACK_SYMBOLS) * sps + max(tail, 0)
    if call in STATE_CALLS:  # a flushed filter tail
        return OUTPUT_SLACK * OUTPUT_SLACK_SYMBOLS * sps + max(tail, 0)
    return OUTPUT_SLACK * (n_in // sps + OUTPUT_SLACK_SYMBOLS) * k


def _location(exc: BaseException) -> str:
    tb = traceback.extract_tb(exc.__traceback__)
    return f" (at {Path(tb[-1].filename).name} line {tb[-1].lineno})" if tb else ""


def describe_raise(exc: BaseException) -> str:
    """What a device did by raising ``exc``, for an AdapterError's message.

    >>> describe_raise(ValueError("bad"))
    'raised ValueError: bad'
    >>> describe_raise(SystemExit(4))
    'raised SystemExit(4): a device must not end the harness (sys.exit in the device)'
    """
    if isinstance(exc, Exception):
        return f"raised {type(exc).__name__}: {exc}"
    if isinstance(exc, SystemExit):
        text = (f"raised SystemExit({exc.code!r}): a device must not end the harness "
                f"(sys.exit in the device)")
    elif isinstance(exc, KeyboardInterrupt):
        text = ("raised KeyboardInterrupt itself (no interrupt signal reached the harness); "
                "a device must not interrupt the run")
    else:
        text = f"raised {type(exc).__name__}: {exc} (a BaseException, not an Exception)"
    return text + _location(exc)


class _InterruptWatch:
    """Counts SIGINT and SIGTERM reaching the harness while a device is open, so the guard
    can tell the user's interrupt from a ``KeyboardInterrupt`` a device raises itself.

    The first holder wraps the Python handlers in place (each wrapper counts, then calls the
    handler it wraps, so behaviour is unchanged); the last one puts them back, unless someone
    replaced them meanwhile.
    """

    SIGNALS = tuple(getattr(signal, n) for n in ("SIGINT", "SIGTERM") if hasattr(signal, n))

    def __init__(self):
        self.count = 0
        self.holders = 0
        self.wrapped: dict = {}

    def hold(self) -> None:
        if self.holders == 0 and threading.current_thread() is threading.main_thread():
            for sig in self.SIGNALS:
                previous = signal.getsignal(sig)
                if callable(previous) and not getattr(previous, "_modemverify_watch", False):
                    wrapper = self._wrapper(previous)
                    try:
                        signal.signal(sig, wrapper)
                    except (ValueError, OSError):
                        continue
                    self.wrapped[sig] = (wrapper, previous)
        self.holders += 1

    def release(self) -> None:
        self.holders = max(self.holders - 1, 0)
        if self.holders or threading.current_thread() is not threading.main_thread():
            return
        for sig, (wrapper, previous) in self.wrapped.items():
            if signal.getsignal(sig) is wrapper:
                signal.signal(sig, previous)
        self.wrapped.clear()

    def _wrapper(self, previous):
        def counted(signum, frame):
            self.count += 1
            return previous(signum, frame)

        counted._modemverify_watch = True
        return counted

    def from_signal(self, mark: int) -> bool:
        """True unless a KeyboardInterrupt seen now is known to come from the device itself:
        no counted signal since ``mark`` and no handler that could raise one unseen."""
        if threading.current_thread() is not threading.main_thread():
            return False  # signal handlers run in the main thread only
        if self.count != mark:
            return True
        for sig in self.SIGNALS:
            handler = signal.getsignal(sig)
            if callable(handler) and not getattr(handler, "_modemverify_watch", False):
                return True
        return False


_INTERRUPTS = _InterruptWatch()


def _guarded(call: str, summary, fn, *args, opening: bool = False):
    """``fn(*args)``; whatever it raises becomes AdapterError naming ``call``, except the
    user's interrupt (and, when ``opening``, a ConfigError: the device file is wrong)."""
    __tracebackhide__ = True
    mark = _INTERRUPTS.count
    try:
        return fn(*args)
    except AdapterError:
        raise
    except KeyboardInterrupt as exc:
        if _INTERRUPTS.from_signal(mark):
            raise
        error = exc
    except BaseException as exc:
        if opening and isinstance(exc, ConfigError):
            raise
        error = exc
    raise AdapterError(describe_raise(error), call=call,
                       input_summary=None if summary is None else str(summary)) from error


def _as_1d(out, call: str, summary, kinds: str, wanted: str, cap: int, unit: str,
           for_what) -> np.ndarray:
    """The device's answer as a 1-D array, judged before any conversion: dimensions, dtype
    (``kinds``) and the size cap; a list longer than the cap is refused before numpy sees it."""
    def too_many(size):
        return DeviceOutputError(f"returned {size} {unit} {for_what()}; more than {cap} are "
                                 f"refused unread", call=call, input_summary=str(summary))

    if isinstance(out, np.ndarray):
        arr = out
    else:
        if isinstance(out, (list, tuple)) and len(out) > cap:
            raise too_many(len(out))
        try:
            arr = np.asarray(out)
        except Exception as exc:  # a device returning an unconvertible object
            raise DeviceOutputError(f"returned {type(out).__name__}, not an array ({exc})",
                                    call=call, input_summary=str(summary)) from None
    if arr.ndim != 1:
        raise DeviceOutputError(f"returned an array of shape {arr.shape}; expected 1-D",
                                call=call, input_summary=str(summary))
    if arr.dtype.kind not in kinds:
        raise DeviceOutputError(f"returned dtype {arr.dtype}; expected {wanted}",
                                call=call, input_summary=str(summary))
    if arr.size > cap:
        raise too_many(arr.size)
    return arr


class GuardedDevice:
    """Calls a device through checks; counts the time spent inside the device.

    Parameters
    ----------
    adapter : ModemAdapter
    bits_per_symbol, samples_per_symbol : int
    name : str
        Device name, for messages.

    Use :meth:`opening` to open the device under the same guard, and :meth:`close` once at
    the end (it also puts back the signal handlers the guard wrapped).
    """

    def __init__(self, adapter: ModemAdapter, bits_per_symbol: int, samples_per_symbol: int = 1,
                 name: str = "device", *, tail_samples: int | None = 0, input_tail: int = 0,
                 streaming: bool = False):
        self.adapter = adapter
        self.k = int(bits_per_symbol)
        self.sps = int(samples_per_symbol)
        #: samples beyond n x sps that modulate must return (None: any number)
        self.tail_samples = tail_samples
        #: samples beyond n x sps in the waveforms given to demodulate (the reference's tail)
        self.input_tail = int(input_tail)
        self.name = name
        #: the device keeps state between calls: every call is a burst from reset() unless
        #: called with ``burst=False``
        self.streaming = bool(streaming)
        self.capabilities = frozenset(adapter.capabilities)
        self.replays_only = bool(getattr(adapter, "replays_only", False))
        self.device_time_s = 0.0
        self.calls = 0
        _INTERRUPTS.hold()
        self._holding = True

    @classmethod
    def opening(cls, opener: Callable[[], ModemAdapter], bits_per_symbol: int,
                samples_per_symbol: int = 1, name: str = "device", **options) -> "GuardedDevice":
        """Open a device with ``opener()`` (importing and constructing it) under the guard.

        A ConfigError passes unchanged (the device file is wrong); anything else the opening
        raises (an exception, ``sys.exit``, a ``BaseException``, a ``KeyboardInterrupt`` that
        no signal caused) becomes an AdapterError with ``call="open"``.
        """
        __tracebackhide__ = True
        _INTERRUPTS.hold()  # held across the opening, so an interrupt there is told apart
        try:
            adapter = _guarded("open", None, opener, opening=True)
            return cls(adapter, bits_per_symbol, samples_per_symbol, name, **options)
        finally:
            _INTERRUPTS.release()

    def has(self, capability: str) -> bool:
        return capability in self.capabilities

    def bits_for(self, n_samples: int) -> int:
        """Bits carried by a reference waveform of ``n_samples`` samples."""
        return max(n_samples - self.input_tail, 0) // self.sps * self.k

    def _call(self, call: str, summary, fn, *args):
        __tracebackhide__ = True
        t0 = time.perf_counter()
        try:
            return _guarded(call, summary, fn, *args)
        finally:
            self.device_time_s += time.perf_counter() - t0
            self.calls += 1

    def reset(self) -> None:
        """Call ``reset`` (a device with state: back to its initial state)."""
        self._call("reset", None, self.adapter.reset)

    def flush(self) -> np.ndarray:
        """Call ``flush``; return the complex128 samples still in the modulator's filter."""
        cap = max_output("flush", 0, self.k, self.sps,
                         max(self.tail_samples or 0, self.input_tail))
        out = _as_1d(self._call("flush", None, self.adapter.flush), "flush", None, "c",
                     "complex samples", cap, "samples", lambda: "in a flushed tail")
        out = np.ascontiguousarray(out, dtype=np.complex128)
        if not np.all(np.isfinite(out)):
            bad = int(np.argmin(np.isfinite(out)))
            raise DeviceOutputError(f"returned a non-finite sample ({out[bad]}) at index {bad}",
                                    call="flush")
        return out

    def _burst(self, burst: bool) -> bool:
        """True when this call is a burst of a device with state: reset() first."""
        if not (burst and self.streaming):
            return False
        if self.has("reset"):
            self.reset()
        return True

    def modulate(self, bits: np.ndarray, *, check_length: bool = True,
                 check_finite: bool = True, burst: bool = True) -> np.ndarray:
        """Call ``modulate``; return complex128 samples or raise AdapterError.

        For a device with state (``streaming``) the call is a burst unless ``burst=False``:
        ``reset()`` first, and the ``flush()`` output appended (when the device has them).
        """
        bits = np.ascontiguousarray(bits, dtype=np.uint8)
        summary = _Summary(summarise_bits, bits)
        n = bits.size // self.k
        cap = max_output("modulate", bits.size, self.k, self.sps,
                         max(self.tail_samples or 0, self.input_tail))
        flush = self._burst(burst) and self.has("flush")
        out = _as_1d(self._call("modulate", summary, self.adapter.modulate, bits.copy()),
                     "modulate", summary, "c", "complex samples", cap, "samples",
                     lambda: f"for {n} symbols")
        out = np.ascontiguousarray(out, dtype=np.complex128)
        if flush:
            out = np.concatenate([out, self.flush()])
        if check_length:
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
                   check_length: bool = True, burst: bool = True) -> np.ndarray:
        """Call ``demodulate``; return uint8 bits or raise AdapterError.

        The device gets ``samples`` itself, not a copy: callers pass buffers they do not read
        again (a device that scribbles on its input harms no one). A device with state is
        reset first unless ``burst=False``.
        """
        self._burst(burst)
        samples = np.ascontiguousarray(samples, dtype=np.complex128)
        summary = _Summary(summarise_samples, samples)
        expected = n_bits if n_bits is not None else self.bits_for(samples.size)
        cap = max(max_output("demodulate", samples.size, self.k, self.sps), expected)
        out = _as_1d(self._call("demodulate", summary, self.adapter.demodulate, samples),
                     "demodulate", summary, "biuf", "bits 0/1", cap, "bits",
                     lambda: f"for {samples.size} samples")
        out = np.ascontiguousarray(out)
        if out.size and (out.max() > 1 if out.dtype.kind in "bu" else
                         not np.all((out == 0) | (out == 1))):
            bad = out[~((out == 0) | (out == 1))][0]
            raise DeviceOutputError(f"returned the value {bad!r}; expected bits 0/1",
                                    call="demodulate", input_summary=str(summary))
        if check_length and out.size != expected:
            raise DeviceOutputError(f"returned {out.size} bits; expected {expected}",
                                    call="demodulate", input_summary=str(summary))
        return out.astype(np.uint8, copy=False)

    def demodulate_soft(self, samples: np.ndarray, noise_var: float, *,
                        n_bits: int | None = None) -> np.ndarray:
        """Call ``demodulate_soft``; return float64 LLRs or raise AdapterError (a device with
        state is reset first)."""
        self._burst(True)
        samples = np.ascontiguousarray(samples, dtype=np.complex128)
        summary = _Summary(summarise_samples, samples, f", noise_var={noise_var:.4g}")
        expected = n_bits if n_bits is not None else self.bits_for(samples.size)
        cap = max(max_output("demodulate_soft", samples.size, self.k, self.sps), expected)
        out = _as_1d(self._call("demodulate_soft", summary, self.adapter.demodulate_soft,
                                samples.copy(), float(noise_var)),
                     "demodulate_soft", summary, "iuf", "real LLRs", cap, "LLRs",
                     lambda: f"for {samples.size} samples")
        if out.size != expected:
            raise DeviceOutputError(f"returned {out.size} LLRs; expected {expected}",
                                    call="demodulate_soft", input_summary=str(summary))
        out = np.ascontiguousarray(out, dtype=np.float64)
        if not np.all(np.isfinite(out)):
            bad = int(np.argmin(np.isfinite(out)))
            raise DeviceOutputError(f"returned a non-finite LLR ({out[bad]}) at index {bad}",
                                    call="demodulate_soft", input_summary=str(summary))
        return out

    def close(self) -> None:
        """Close the device; what its ``close`` raises is dropped (the verdicts are kept),
        except the user's interrupt."""
        try:
            _guarded("close", None, self.adapter.close)
        except AdapterError:  # closing a broken device must not lose the verdicts
            pass
        finally:
            if self._holding:
                self._holding = False
                _INTERRUPTS.release()
