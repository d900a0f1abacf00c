"""``adapter: process``: a device that is a separate, persistent process speaking our protocol.

The process is started once per run, from an argument list (never through a shell), with the
device file's folder as its working directory. It speaks the framed protocol of
:mod:`modemverify.adapters._wire` on stdin/stdout: a hello handshake (capabilities, sample
format), then one request and one reply at a time. The harness

- gives each call ``timeout_s`` seconds, then kills the process (DeviceTimeout);
- reports the process's death while it handles a call as DeviceCrashed with its exit status or
  signal, and a malformed reply as a protocol error;
- quotes what the process wrote to stderr during the call in every such error;
- starts the process again for the next call, so the remaining checks still run;
- starts it in a process group of its own and, whenever it is done with it (a timeout, a
  crash, a protocol error, the end of the run), kills that whole group, so what the device
  started (``/bin/sh -c`` and its children, helpers) ends with it.

Device-file keys: ``command`` (the argument list; a program given as a path is relative to the
device file, ``{python}`` as the program means the interpreter running modemverify) and ``env``
(variables added to the environment). ``params`` travel in the hello as JSON, so they must be
plain JSON data (text, finite numbers, true/false, null, lists, mappings with text keys) of at
most ``MAX_PARAM_VALUES`` values and ``MAX_PARAMS_BYTES`` bytes encoded (a YAML alias repeated
a billion times is refused when the file is loaded, not expanded).
"""

from __future__ import annotations

import io
import json
import math
import os
import selectors
import shutil
import signal
import struct
import subprocess
import sys
import time
from functools import partial

import numpy as np

from ..dsp.formats import SAMPLE_FORMATS, encode_samples, from_format
from ..errors import (
    AdapterError,
    ConfigError,
    DeviceCrashed,
    DeviceOutputError,
    DeviceTimeout,
)
from ..options import Opt
from . import _wire
from .base import ModemAdapter, max_output, summarise_bits, summarise_samples
from .isolated import OPEN_TIMEOUT_S, STDERR_QUOTE, HangGuard, describe_exit

__all__ = [
    "ADAPTER", "PYTHON_PLACEHOLDER", "STDERR_KEEP", "CHUNK", "MAX_PARAM_VALUES",
    "MAX_PARAMS_BYTES", "ProcessAdapter",
]

PYTHON_PLACEHOLDER = "{python}"
#: how much of the process's stderr is kept (the tail)
STDERR_KEEP = 1 << 16
#: bytes moved per read or write system call
CHUNK = 1 << 20
#: values (every list item, mapping value and key counted, an alias each time it is used) and
#: encoded bytes ``params`` may hold; the device's hello is held to the same 1 MiB
MAX_PARAM_VALUES = 100_000
MAX_PARAMS_BYTES = 1 << 20


def _grow_pipe(fd: int) -> None:
    """Linux: a 1 MiB pipe buffer means fewer wake-ups per megabyte moved (best effort)."""
    try:
        import fcntl

        fcntl.fcntl(fd, getattr(fcntl, "F_SETPIPE_SZ", 1031), 1 << 20)
    except (OSError, ImportError):
        pass


def _argv(spec) -> list[str]:
    """The validated argument list, the program resolved."""
    file = spec.file
    command = spec.extra.get("command")
    if command is None:
        raise ConfigError("missing key 'command': the argument list that starts the device, "
                          "e.g. [./qpsk-device, --verbose]", file=file, key="command")
    if isinstance(command, str):
        raise ConfigError(f"command={command!r}: expected a list of arguments (the device is "
                          f"started without a shell), e.g. {command.split()!r}", file=file,
                          key="command")
    if (not isinstance(command, list) or not command
            or not all(isinstance(a, (str, int, float)) and not isinstance(a, bool)
                       for a in command)):
        raise ConfigError(f"command={command!r}: expected a non-empty list of text arguments",
                          file=file, key="command")
    argv = [str(a) for a in command]
    prog = argv[0]
    if prog == PYTHON_PLACEHOLDER:
        argv[0] = sys.executable
    elif os.sep in prog or (os.altsep and os.altsep in prog):
        path = spec.resolve(prog)
        if not path.is_file():
            raise ConfigError(f"command[0]={prog!r}: no such file {path}", file=file,
                              key="command")
        if not os.access(path, os.X_OK):
            raise ConfigError(f"command[0]={prog!r}: {path} is not executable", file=file,
                              key="command")
        argv[0] = str(path)
    else:
        found = shutil.which(prog)
        if found is None:
            raise ConfigError(f"command[0]={prog!r}: not found on PATH (give a path such as "
                              f"./{prog} for a program beside the device file)", file=file,
                              key="command")
        argv[0] = found
    return argv


def _env(spec) -> dict[str, str]:
    env = spec.extra.get("env") or {}
    if not isinstance(env, dict):
        raise ConfigError(f"env={env!r}: expected a mapping of variable names to values",
                          file=spec.file, key="env")
    out = {}
    for k, v in env.items():
        if not isinstance(k, str) or not k or "=" in k or "\0" in k:
            raise ConfigError(f"env: {k!r} is not a variable name (text, not empty, without "
                              f"'=' or NUL)", file=spec.file, key="env")
        if isinstance(v, (dict, list)) or v is None:
            raise ConfigError(f"env.{k}={v!r}: expected text", file=spec.file, key=f"env.{k}")
        text = str(v).lower() if isinstance(v, bool) else str(v)
        if "\0" in text:
            raise ConfigError(f"env.{k}={v!r}: a NUL character cannot be in an environment "
                              f"variable", file=spec.file, key=f"env.{k}")
        out[k] = text
    return out


def _plain_json(value, key: str, file, budget: list) -> None:
    """Refuse anything in ``params`` that is not plain JSON data, or too much of it."""
    budget[0] -= 1
    if budget[0] < 0:
        raise ConfigError(f"more than {MAX_PARAM_VALUES} values (a YAML alias used over and "
                          f"over?); the hello carries at most that many", file=file,
                          key="params")
    if value is None or isinstance(value, (bool, int, str)):
        return
    if isinstance(value, float):
        if not math.isfinite(value):
            raise ConfigError(f"{key}={value!r}: JSON has no NaN or infinity", file=file,
                              key=key)
        return
    if isinstance(value, list):
        for i, item in enumerate(value):
            _plain_json(item, f"{key}[{i}]", file, budget)
        return
    if isinstance(value, dict):
        for k, item in value.items():
            if not isinstance(k, str):
                raise ConfigError(f"{key}: the key {k!r} is {type(k).__name__}; JSON keys are "
                                  f"text", file=file, key=key)
            budget[0] -= 1
            _plain_json(item, f"{key}.{k}", file, budget)
        return
    raise ConfigError(f"{key}={value!r}: {type(value).__name__} is not JSON data (expected "
                      f"text, a number, true/false, null, a list or a mapping)", file=file,
                      key=key)


def _check_params(spec) -> None:
    """The device file's ``params`` are plain JSON data and their encoding fits the hello
    (checked before anything encodes them: an alias repeated a billion times is refused after
    ``MAX_PARAM_VALUES`` visits, never expanded)."""
    params = spec.params
    if not isinstance(params, dict):
        raise ConfigError(f"params={params!r}: expected a mapping", file=spec.file,
                          key="params")
    _plain_json(params, "params", spec.file, [MAX_PARAM_VALUES])
    size = len(json.dumps(params, allow_nan=False).encode("utf-8"))
    if size > MAX_PARAMS_BYTES:
        raise ConfigError(f"{size} bytes as JSON; the hello carries at most "
                          f"{MAX_PARAMS_BYTES}", file=spec.file, key="params")


class _Protocol(Exception):
    """A reply that breaks the protocol."""


class _Died(Exception):
    """stdout reached EOF or stdin broke: the process is gone."""


class _TimedOut(Exception):
    pass


class _Child:
    """One running device process, with non-blocking pipes."""

    def __init__(self, argv, cwd, env):
        # a process group of its own (a new session before Python 3.11), killed as a group
        group = {"process_group": 0} if sys.version_info >= (3, 11) else \
            {"start_new_session": True}
        self.popen = subprocess.Popen(argv, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                      stderr=subprocess.PIPE, cwd=cwd, env=env, bufsize=0,
                                      close_fds=True, **(group if os.name == "posix" else {}))
        self.fd_in = self.popen.stdin.fileno()
        self.fd_out = self.popen.stdout.fileno()
        self.fd_err = self.popen.stderr.fileno()
        for fd in (self.fd_in, self.fd_out, self.fd_err):
            os.set_blocking(fd, False)
        _grow_pipe(self.fd_in)
        _grow_pipe(self.fd_out)
        self.reader = io.FileIO(self.fd_out, "rb", closefd=False)
        self.stderr = bytearray()
        self.stderr_mark = 0
        self.stderr_eof = False
        self.seq = 0

    # stderr ------------------------------------------------------------------------------
    def _take_stderr(self) -> None:
        try:
            data = os.read(self.fd_err, CHUNK)
        except BlockingIOError:
            return
        except OSError:
            data = b""
        if not data:
            self.stderr_eof = True
            return
        self.stderr += data
        if len(self.stderr) > STDERR_KEEP:
            cut = len(self.stderr) - STDERR_KEEP
            del self.stderr[:cut]
            self.stderr_mark = max(0, self.stderr_mark - cut)

    def stderr_since_mark(self) -> str | None:
        text = bytes(self.stderr[self.stderr_mark:]).decode("utf-8", "replace").strip()
        return text[-STDERR_QUOTE:] if text else None

    def drain_stderr(self, seconds: float, *, until_exit: bool = False) -> None:
        """Read what the process still writes to stderr, until EOF or ``seconds`` (or, with
        ``until_exit``, until the device has exited: what it started may hold stderr open)."""
        end = time.monotonic() + seconds
        sel = selectors.DefaultSelector()
        try:
            if not self.stderr_eof:
                sel.register(self.fd_err, selectors.EVENT_READ)
            while not self.stderr_eof:
                left = end - time.monotonic()
                if until_exit:
                    if self.exited():
                        break
                    left = min(left, 0.05)
                if left <= 0:
                    break
                if sel.select(left):
                    self._take_stderr()
                elif not until_exit:
                    break
        finally:
            sel.close()

    # one exchange ------------------------------------------------------------------------
    def exchange(self, ftype: bytes, parts: list, deadline: float, max_reply: int):
        """Send one request, return ``(type, payload)`` of the reply."""
        self.seq = (self.seq + 1) & 0xFFFFFFFF
        views = [memoryview(p).cast("B") for p in parts]
        views.insert(0, memoryview(_wire.pack_header(ftype, self.seq,
                                                     sum(v.nbytes for v in views))))
        self.stderr_mark = len(self.stderr)
        sel = selectors.DefaultSelector()
        try:
            return self._exchange(sel, views, deadline, max_reply)
        finally:
            sel.close()

    def _exchange(self, sel, views, deadline, max_reply):
        pending = [v for v in views if v.nbytes]
        if pending:
            sel.register(self.fd_in, selectors.EVENT_WRITE)
        sel.register(self.fd_out, selectors.EVENT_READ)
        if not self.stderr_eof:
            sel.register(self.fd_err, selectors.EVENT_READ)
        head = bytearray(_wire.HEADER_SIZE)
        got = 0
        payload = None
        rtype = None
        while True:
            left = deadline - time.monotonic()
            if left <= 0:
                raise _TimedOut
            for key, _ in sel.select(left):
                fd = key.fd
                if fd == self.fd_in:
                    try:
                        while pending:
                            n = os.write(self.fd_in, pending[0][:CHUNK])
                            if n == pending[0].nbytes:
                                pending.pop(0)
                            else:
                                pending[0] = pending[0][n:]
                    except BlockingIOError:
                        pass
                    except (BrokenPipeError, ConnectionResetError):
                        raise _Died from None
                    if not pending:
                        sel.unregister(self.fd_in)
                elif fd == self.fd_err:
                    self._take_stderr()
                    if self.stderr_eof:
                        sel.unregister(self.fd_err)
                else:
                    while True:
                        if payload is None:
                            n = self.reader.readinto(memoryview(head)[got:])
                        else:
                            n = self.reader.readinto(memoryview(payload)[got:])
                        if n is None:
                            break
                        if n == 0:
                            raise _Died
                        got += n
                        if payload is None and got == len(head):
                            try:
                                rtype, seq, length = _wire.unpack_header(head)
                            except _wire.WireError as exc:
                                raise _Protocol(str(exc)) from None
                            if seq != self.seq:
                                raise _Protocol(f"reply numbered {seq} to request {self.seq}")
                            if rtype not in (_wire.RESULT, _wire.ERROR, _wire.HELLO):
                                raise _Protocol(f"a {_wire.FRAME_NAMES[rtype]} frame is not a "
                                                f"reply")
                            if length > max_reply:
                                raise _Protocol(f"announced a reply of {length} bytes; at most "
                                                f"{max_reply} make sense for this request")
                            payload = bytearray(length)
                            got = 0
                        if payload is not None and got == len(payload):
                            if pending:
                                raise _Protocol("replied before reading the whole request")
                            self._take_stderr()
                            return rtype, payload

    def exited(self) -> bool:
        """Whether the device process has ended. It is not reaped here, so its process group
        id cannot be reused by another process before :meth:`kill` has used it."""
        if self.popen.returncode is not None:
            return True
        if not hasattr(os, "waitid"):
            return self.popen.poll() is not None
        try:
            return os.waitid(os.P_PID, self.popen.pid,
                             os.WEXITED | os.WNOHANG | os.WNOWAIT) is not None
        except ChildProcessError:
            return True

    def wait(self, seconds: float) -> bool:
        """Whether the process ended within ``seconds`` (not reaped: see :meth:`exited`)."""
        end = time.monotonic() + seconds
        while not self.exited():
            if time.monotonic() >= end:
                return False
            time.sleep(0.005)
        return True

    def kill(self) -> int | None:
        """SIGKILL the device's process group (the device and whatever it started) and reap
        the device; returns its exit status (its own, if it had ended already)."""
        if os.name == "posix":
            try:
                os.killpg(self.popen.pid, signal.SIGKILL)
            except OSError:  # the group is gone already
                pass
        if self.popen.poll() is None:
            self.popen.kill()
        try:
            return self.popen.wait(5)
        except subprocess.TimeoutExpired:
            return None

    def end_of_life(self) -> int | None:
        """The device died (its stdout closed, or its stdin): collect what it still writes to
        stderr and its exit status, then kill what it left running in its group."""
        self.drain_stderr(2.0, until_exit=True)
        self.wait(5)
        code = self.kill()
        self.drain_stderr(0.5)
        return code

    def close_pipes(self) -> None:
        for f in (self.popen.stdin, self.popen.stdout, self.popen.stderr):
            try:
                f.close()
            except OSError:
                pass


class ProcessAdapter(ModemAdapter):
    """A device process speaking the modemverify frame protocol (see the module docstring)."""

    adapter_id = "process"
    isolate_default = True
    isolates_itself = True
    config_keys = {
        # the argument list is checked with the device file's folder at hand (_argv)
        "command": Opt("any", None, "argument list that starts the device process (no shell); "
                       "a program path is relative to the device file; {python} means this "
                       "Python"),
        "env": Opt("mapping", {}, "environment variables added for the device process",
                   also=(None,), expected="a mapping of variable names to values"),
    }

    def __init__(self, spec):
        self.spec = spec
        self.argv = _argv(spec)
        self.env = {**os.environ, **_env(spec)}
        _check_params(spec)  # plain JSON data, bounded (validate_spec checked it already)
        scheme = spec.scheme
        self.tail = max(scheme.tail_samples or 0, scheme.pulse.tail)  # as the guard's cap
        self.cwd = str(spec.base_dir)
        self.timeout_s = float(spec.timeout_s)
        self.k = spec.scheme.bits_per_symbol
        self.sps = spec.scheme.samples_per_symbol
        self.hello: dict = {}
        self.capabilities = frozenset()
        self.starts = 0
        self._child: _Child | None = None
        self._guard = HangGuard()

    @classmethod
    def validate_spec(cls, spec) -> None:
        if spec.isolate is False:
            raise ConfigError("isolate=false: the process adapter always runs the device in its "
                              "own process", file=spec.file, key="isolate")
        _argv(spec)
        _env(spec)
        _check_params(spec)

    @classmethod
    def from_spec(cls, spec) -> "ProcessAdapter":
        adapter = cls(spec)
        adapter._start("open", None)
        return adapter

    # -- process life ---------------------------------------------------------------------
    def _start(self, call: str, summary: str | None) -> None:
        try:
            child = _Child(self.argv, self.cwd, self.env)
        except OSError as exc:
            raise AdapterError(f"could not start {self.argv[0]}: {exc}", call=call,
                               input_summary=summary) from None
        self.starts += 1
        scheme = self.spec.scheme
        hello = {"protocol": _wire.PROTOCOL_VERSION, "modulation": scheme.modulation,
                 "convention": scheme.convention, "bits_per_symbol": self.k,
                 "samples_per_symbol": self.sps, "params": self.spec.params}  # checked, bounded
        timeout = max(self.timeout_s, OPEN_TIMEOUT_S)
        what = "start" if self.starts == 1 else "restart"
        try:
            rtype, payload = child.exchange(_wire.HELLO,
                                            [json.dumps(hello, allow_nan=False).encode("utf-8")],
                                            time.monotonic() + timeout, 1 << 20)
            if rtype != _wire.HELLO:
                raise _Protocol(f"answered the hello with a {_wire.FRAME_NAMES[rtype]} frame")
            info = _wire.parse_device_hello(payload)
        except _TimedOut:
            child.kill()
            child.drain_stderr(0.5)
            child.close_pipes()
            raise DeviceTimeout(f"the device process sent no hello within {timeout:g} s of its "
                                f"{what}", call=call, input_summary=summary,
                                stderr=child.stderr_since_mark()) from None
        except _Died:
            code = child.end_of_life()
            child.close_pipes()
            raise DeviceCrashed(f"the device process {describe_exit(code)} during the "
                                f"handshake of its {what}", call=call, input_summary=summary,
                                stderr=child.stderr_since_mark()) from None
        except (_Protocol, _wire.WireError) as exc:
            child.kill()
            child.drain_stderr(0.5)
            child.close_pipes()
            raise AdapterError(f"protocol error in the handshake: {exc}", call=call,
                               input_summary=summary, stderr=child.stderr_since_mark()) from None
        except BaseException:  # Ctrl-C during the handshake: the device goes with the run
            child.kill()
            child.close_pipes()
            raise
        if self.capabilities and frozenset(info["capabilities"]) != self.capabilities:
            self._drop(child)
            raise AdapterError(f"the restarted device announced capabilities "
                               f"{sorted(info['capabilities'])}, not {sorted(self.capabilities)}",
                               call=call, input_summary=summary)
        self.hello = info
        self.capabilities = frozenset(info["capabilities"])
        self._child = child

    def _drop(self, child: _Child) -> None:
        child.kill()
        child.close_pipes()
        if self._child is child:
            self._child = None

    # -- one call -------------------------------------------------------------------------
    def _call(self, call: str, parts: list, describe, max_reply: int) -> bytearray:
        """One request; ``describe()`` summarises the input for an error message."""
        __tracebackhide__ = True
        self._guard.check(call, describe)
        if self._child is None or self._child.exited():
            if self._child is not None:
                self._drop(self._child)
            try:
                self._start(call, describe())
            except AdapterError as exc:
                raise type(exc)(f"the device process could not be restarted after the previous "
                                f"failure: {exc.raw_message}", call=call, input_summary=describe(),
                                stderr=exc.stderr) from None
        child = self._child
        try:
            rtype, payload = child.exchange(_wire.REQUEST_OF_CALL[call], parts,
                                            time.monotonic() + self.timeout_s, max_reply)
        except _TimedOut:
            child.kill()
            child.drain_stderr(0.2)
            self._drop(child)
            self._guard.timed_out(self.timeout_s)
            raise DeviceTimeout(f"did not answer within timeout_s={self.timeout_s:g} s; the "
                                f"device process was killed (the next call starts it again)",
                                call=call, input_summary=describe(),
                                stderr=child.stderr_since_mark()) from None
        except _Died:
            code = child.end_of_life()
            self._drop(child)
            raise DeviceCrashed(f"the device process {describe_exit(code)} while handling the "
                                f"call (the next call starts it again)", call=call,
                                input_summary=describe(),
                                stderr=child.stderr_since_mark()) from None
        except _Protocol as exc:
            child.kill()
            child.drain_stderr(0.2)
            self._drop(child)
            raise AdapterError(f"protocol error: {exc} (the device process was killed; the next "
                               f"call starts it again)", call=call, input_summary=describe(),
                               stderr=child.stderr_since_mark()) from None
        except BaseException:  # Ctrl-C mid-call: the frames are out of step, so stop the device
            self._drop(child)
            raise
        self._guard.answered()
        if rtype == _wire.ERROR:
            code = struct.unpack("<i", bytes(payload[:4]))[0] if len(payload) >= 4 else None
            message = bytes(payload[4:]).decode("utf-8", "replace").strip()
            raise AdapterError(f"returned error code {code}" + (f": {message}" if message else ""),
                               call=call, input_summary=describe(),
                               stderr=child.stderr_since_mark())
        if rtype != _wire.RESULT:
            self._drop(child)
            raise AdapterError(f"protocol error: a {_wire.FRAME_NAMES[rtype]} frame in reply to "
                               f"{call}", call=call, input_summary=describe())
        return payload

    def _samples(self, payload, call: str, describe) -> np.ndarray:
        size = SAMPLE_FORMATS[self.hello["sample_format"]].bytes_per_sample
        if len(payload) % size:
            raise DeviceOutputError(f"returned {len(payload)} bytes, not a whole number of "
                                    f"{self.hello['sample_format']} samples ({size} bytes each)",
                                    call=call, input_summary=describe())
        return from_format(payload, self.hello["sample_format"], self.hello["full_scale"])

    def _encode(self, samples) -> np.ndarray:
        return encode_samples(samples, self.hello["sample_format"], self.hello["full_scale"])

    def modulate(self, bits):
        bits = np.ascontiguousarray(bits, dtype=np.uint8)
        describe = partial(summarise_bits, bits)  # formatted only for an error message
        size = SAMPLE_FORMATS[self.hello["sample_format"]].bytes_per_sample
        max_reply = 16 * (bits.size // self.k + 64) * self.sps * size
        payload = self._call("modulate", [bits], describe, max_reply)
        return self._samples(payload, "modulate", describe)

    def demodulate(self, samples):
        max_reply = max_output("demodulate", len(samples), self.k, self.sps)
        payload = self._call("demodulate", [self._encode(samples)],
                             lambda: summarise_samples(samples), max_reply)
        return np.frombuffer(payload, dtype=np.uint8)

    def demodulate_soft(self, samples, noise_var):
        def describe():
            return summarise_samples(samples) + f", noise_var={noise_var:.4g}"

        max_reply = max_output("demodulate_soft", len(samples), self.k, self.sps) * 4
        payload = self._call("demodulate_soft",
                             [struct.pack("<d", float(noise_var)), self._encode(samples)],
                             describe, max_reply)
        if len(payload) % 4:
            raise DeviceOutputError(f"returned {len(payload)} bytes, not a whole number of "
                                    f"float32 LLRs", call="demodulate_soft",
                                    input_summary=describe())
        return np.frombuffer(payload, dtype="<f4").astype(np.float64)

    def close(self) -> None:
        child, self._child = self._child, None
        if child is None:
            return
        if child.popen.poll() is None:
            try:  # an idle device has drained its stdin, so these 16 bytes fit in the pipe
                os.write(child.fd_in, _wire.pack_header(_wire.QUIT, child.seq + 1, 0))
            except OSError:
                pass
            child.close_pipes()
            child.wait(2)
        child.kill()  # the device's whole group: what it started ends with the run
        child.close_pipes()


#: the adapter this module adds (found by adapters.registry)
ADAPTER = ProcessAdapter
