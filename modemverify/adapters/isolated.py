"""Run any adapter in a worker process, so a crashing or hanging device cannot take the run down.

With ``isolate: true`` in the device file (the default for ``sharedlib``; ``process`` isolates
itself), :func:`open_adapter` returns an :class:`IsolatedAdapter`: the adapter's ``from_spec``
and every call run in a worker process. The harness side

- enforces ``timeout_s`` on every call by killing the worker when it does not answer;
- turns the worker's death (a signal such as SIGSEGV or SIGABRT, ``os._exit``, ``sys.exit``)
  into :class:`~modemverify.errors.DeviceCrashed` and a timeout into
  :class:`~modemverify.errors.DeviceTimeout`, naming the call and its input and quoting what
  the device wrote to stdout/stderr during the call;
- starts a fresh worker for the next call, so the remaining checks still run.

Arrays cross the pipe as raw bytes with their dtype and shape (no pickling of results), so the
:class:`~modemverify.adapters.base.GuardedDevice` in the harness sees exactly what the device
returned and judges dtype, shape, length and NaN as it does in process.

Workers come from the ``forkserver`` start method where the platform has it (the server imports
numpy and modemverify once; a restart is a fork, tens of milliseconds), else ``spawn``.

A device that times out on ``MAX_CONSECUTIVE_TIMEOUTS`` calls in a row is taken to be hung: later
calls in the run fail at once with DeviceTimeout saying so, instead of each waiting
``timeout_s`` (hypothesis searches would otherwise wait minutes on a device that never answers).

The worker

- runs in its own process group, and whenever the harness is done with a worker (a timeout, a
  crash, the end of the run) it kills that whole group, so processes the device started go
  with it (a process that leaves the group with ``setsid`` is beyond reach);
- imports with the harness's path, the working folder moved to its end (a ``random.py`` there
  cannot shadow the standard library); the fork server starts from the standard library's
  folder for the same reason, and each worker then works in the harness's working folder;
- reads nothing from the harness's stdin (``/dev/null``) and writes into the capture file;
- refuses to send an answer larger than the cap the harness gives with each call
  (:func:`~modemverify.adapters.base.max_output`); the harness checks the announced size
  again before it allocates anything.
"""

from __future__ import annotations

import multiprocessing as mp
import os
import signal
import sys
import tempfile
import traceback
import weakref
from contextlib import contextmanager
from pathlib import Path

import numpy as np

from .. import errors
from ..errors import (
    AdapterError,
    ConfigError,
    DeviceCrashed,
    DeviceOutputError,
    DeviceTimeout,
)
from .base import (
    STATE_CALLS,
    ModemAdapter,
    describe_raise,
    max_output,
    summarise_bits,
    summarise_samples,
)
from .registry import get_adapter_class

#: opening a device (starting the worker, the adapter's from_spec) may take this long at least
OPEN_TIMEOUT_S = 30.0
#: this many timeouts in a row and the device is treated as hung for the rest of the run
MAX_CONSECUTIVE_TIMEOUTS = 3
#: characters of captured stderr quoted in an error
STDERR_QUOTE = 2000


def open_adapter(spec) -> ModemAdapter:
    """Open the device of ``spec``: in a worker process when ``spec.isolate`` asks for it.

    Adapters that run their device out of process themselves (``isolates_itself``, such as
    ``process``) are never wrapped.
    """
    cls = get_adapter_class(spec.adapter)
    if spec.isolate and not cls.isolates_itself:
        return IsolatedAdapter.from_spec(spec)
    return cls.from_spec(spec)


def describe_exit(returncode: int | None) -> str:
    """``-11`` -> ``"was killed by signal SIGSEGV (Segmentation fault)"``."""
    if returncode is None:
        return "did not exit"
    if returncode < 0:
        sig = -returncode
        try:
            name = signal.Signals(sig).name
        except ValueError:
            name = f"signal {sig}"
        text = signal.strsignal(sig) if hasattr(signal, "strsignal") else None
        return f"was killed by signal {name}" + (f" ({text})" if text else "")
    return f"exited with status {returncode}"


class HangGuard:
    """Counts timeouts in a row; after ``limit`` of them, calls are refused at once."""

    def __init__(self, limit: int = MAX_CONSECUTIVE_TIMEOUTS):
        self.limit = limit
        self.in_a_row = 0
        self.timeout_s = 0.0

    def check(self, call: str, describe) -> None:
        """Raise DeviceTimeout when the device is taken to be hung (``describe()``: the input)."""
        if self.in_a_row >= self.limit:
            raise DeviceTimeout(
                f"not called: the device timed out ({self.timeout_s:g} s) on the last "
                f"{self.in_a_row} calls in a row, so the run treats it as hung",
                call=call, input_summary=describe())

    def timed_out(self, timeout_s: float) -> None:
        self.in_a_row += 1
        self.timeout_s = timeout_s

    def answered(self) -> None:
        self.in_a_row = 0


#: bytes per system call when moving array payloads
CHUNK = 1 << 22
_RAW = os.name == "posix" and hasattr(os, "readv")


def _tune(conn) -> None:
    """Larger socket buffers: fewer wake-ups per megabyte moved (best effort)."""
    if not _RAW:
        return
    import socket

    try:
        sock = socket.socket(fileno=os.dup(conn.fileno()))
    except OSError:
        return
    try:
        for opt in (socket.SO_SNDBUF, socket.SO_RCVBUF):
            sock.setsockopt(socket.SOL_SOCKET, opt, 1 << 22)
    except OSError:
        pass
    finally:
        sock.close()


def _send_array(conn, arr: np.ndarray) -> None:
    """Send the bytes of a contiguous array (after a header message giving dtype and shape).

    On POSIX the bytes go straight to the socket: the Connection object adds no framing to a
    message it did not send, and the other side reads exactly this many bytes.
    """
    view = memoryview(arr.reshape(-1).view(np.uint8))
    if not _RAW:
        conn.send_bytes(view)
        return
    fd = conn.fileno()
    while view.nbytes:
        n = os.write(fd, view[:CHUNK])
        view = view[n:]


def _recv_array(conn, arr: np.ndarray) -> None:
    """Fill ``arr`` with the bytes :func:`_send_array` sent (no intermediate copies)."""
    view = memoryview(arr.reshape(-1).view(np.uint8))
    if not _RAW:
        conn.recv_bytes_into(view)
        return
    fd = conn.fileno()
    while view.nbytes:
        n = os.readv(fd, [view[:CHUNK]])
        if n == 0:
            raise EOFError("the other side closed the pipe inside a payload")
        view = view[n:]


def _context():
    if "forkserver" in mp.get_all_start_methods():
        ctx = mp.get_context("forkserver")
        # the server imports these once; each worker is then a fork of it
        ctx.set_forkserver_preload(["numpy", "modemverify.adapters.isolated"])
        return ctx
    return mp.get_context("spawn")


def worker_path(path: list[str], cwd: str) -> list[str]:
    """The import path a worker gets: ``path`` with the working folder (``''`` or ``cwd``)
    moved to the end, so a file there (``random.py``) cannot shadow the standard library or an
    installed package, while a package found only there is still found.

    >>> worker_path(["", "/usr/lib/python3.11", "/work"], "/work")
    ['/usr/lib/python3.11', '/work']
    """
    here = os.path.realpath(cwd)
    kept = [p for p in path if p != "" and os.path.realpath(p) != here]
    return kept + [here] if len(kept) < len(path) else kept


#: where a new interpreter of the worker machinery starts: ``python -c`` puts its working
#: folder first on its path, and the standard library's own folder holds only itself
_SAFE_START_DIR = os.path.dirname(os.__file__)


@contextmanager
def _safe_launch():
    """While the fork server (or a spawned worker) starts: the harness's working folder is the
    standard library's and its sys.path the workers', so the new interpreter imports nothing
    from the user's folder (it inherits both)."""
    try:
        cwd = os.getcwd()
    except OSError:  # the working folder was removed: nothing there to shadow anything
        yield
        return
    saved = sys.path[:]
    sys.path[:] = worker_path(saved, cwd)
    os.chdir(_SAFE_START_DIR)
    try:
        yield
    finally:
        os.chdir(cwd)
        sys.path[:] = saved


def _kill_group(pid: int | None) -> None:
    """SIGKILL the process group a worker leads (it and what it started); best effort."""
    if pid is None or not hasattr(os, "killpg"):
        return
    try:
        os.killpg(pid, signal.SIGKILL)
    except (ProcessLookupError, PermissionError, OSError):
        pass


class _Capture:
    """A file the worker's stdout and stderr go to; read back to quote them in errors."""

    def __init__(self):
        fd, path = tempfile.mkstemp(prefix="modemverify-worker-", suffix=".log")
        os.close(fd)
        self.path = path
        self.mark = 0

    def start_call(self) -> None:
        try:
            self.mark = os.path.getsize(self.path)
        except OSError:
            self.mark = 0

    def since_mark(self) -> str | None:
        try:
            with open(self.path, "rb") as f:
                f.seek(self.mark)
                data = f.read()
        except OSError:
            return None
        text = data.decode("utf-8", "replace").strip()
        return text[-STDERR_QUOTE:] if text else None

    def remove(self) -> None:
        Path(self.path).unlink(missing_ok=True)


class IsolatedAdapter(ModemAdapter):
    """Any adapter, run in a worker process (see the module docstring).

    Parameters
    ----------
    spec : DeviceSpec
        The device; ``spec.adapter`` names the adapter the worker runs, ``spec.timeout_s``
        the per-call timeout.
    """

    adapter_id = "isolated"

    def __init__(self, spec):
        self.spec = spec
        self.timeout_s = float(spec.timeout_s)
        scheme = spec.scheme
        self.k, self.sps = scheme.bits_per_symbol, scheme.samples_per_symbol
        self.tail = max(scheme.tail_samples or 0, scheme.pulse.tail)  # as the guard's cap
        self.capabilities = frozenset()
        self.restarts = 0
        self._proc = None
        self._conn = None
        self._capture = _Capture()
        # the capture file goes even if the adapter is never closed
        weakref.finalize(self, Path(self._capture.path).unlink, missing_ok=True)
        self._guard = HangGuard()
        self._busy = False  # true while a call is out: an interrupted call leaves it set

    @classmethod
    def from_spec(cls, spec) -> "IsolatedAdapter":
        adapter = cls(spec)
        adapter.replays_only = get_adapter_class(spec.adapter).replays_only
        try:
            adapter._start()
        except BaseException:
            adapter.close()
            raise
        return adapter

    # -- worker life ----------------------------------------------------------------------
    def _start(self) -> None:
        ctx = _context()
        parent, child = ctx.Pipe(duplex=True)
        self._capture.start_call()
        try:
            cwd = os.getcwd()
        except OSError:
            cwd = None
        proc = ctx.Process(target=_worker_main,
                           args=(child, self.spec, self._capture.path,
                                 worker_path(sys.path, cwd or "/"), cwd,
                                 os.environ.get("MODEMVERIFY_NO_PLUGINS")),
                           name=f"modemverify-worker[{self.spec.name}]", daemon=True)
        with _safe_launch():
            if ctx.get_start_method() == "forkserver":
                from multiprocessing import forkserver

                forkserver.ensure_running()  # a no-op once the server runs
            proc.start()
        child.close()
        _tune(parent)
        self._proc, self._conn = proc, parent
        timeout = max(self.timeout_s, OPEN_TIMEOUT_S)
        if not parent.poll(timeout):
            self._kill()
            raise DeviceTimeout(f"the device was not open after {timeout:g} s; the worker was "
                                f"stopped", call="open", stderr=self._capture.since_mark())
        try:
            msg = parent.recv()
        except (EOFError, OSError):
            code = self._reap()
            raise DeviceCrashed(f"the worker process {describe_exit(code)} while opening the "
                                f"device", call="open", stderr=self._capture.since_mark()) from None
        if msg[0] == "ready":
            self.capabilities = frozenset(msg[1])
            return
        self._kill()
        raise _rebuild_open_error(msg, self._capture.since_mark())

    def _kill(self) -> None:
        """Stop the worker and every process in its group (what the device started)."""
        proc, conn = self._proc, self._conn
        self._proc = self._conn = None
        self._busy = False
        if conn is not None:
            conn.close()
        if proc is not None:
            _kill_group(proc.pid)  # the worker leads its group (set first thing in the worker)
            if proc.is_alive():
                proc.kill()
            proc.join(5)

    def _reap(self) -> int | None:
        proc = self._proc
        if proc is not None:
            proc.join(5)
            code = proc.exitcode
        else:
            code = None
        self._kill()
        return code

    def _ensure_worker(self, call: str, describe) -> None:
        if self._proc is not None and self._proc.is_alive():
            return
        if self._proc is not None:  # died between calls
            self._reap()
        try:
            self._start()
        except AdapterError as exc:
            raise type(exc)(f"the worker could not be restarted after the previous failure: "
                            f"{exc.raw_message}", call=call, input_summary=describe(),
                            stderr=exc.stderr) from None
        self.restarts += 1

    # -- calls ----------------------------------------------------------------------------
    def _call(self, call: str, arr: np.ndarray, describe, noise_var=None) -> np.ndarray:
        """One call in the worker; ``describe()`` summarises the input for an error message."""
        __tracebackhide__ = True
        self._guard.check(call, describe)
        self._ensure_worker(call, describe)
        conn = self._conn
        arr = np.ascontiguousarray(arr)
        cap = max_output(call, arr.size, self.k, self.sps, self.tail)
        self._capture.start_call()
        self._busy = True
        try:
            conn.send(("call", call, arr.dtype.str, arr.shape, noise_var, cap))
            _send_array(conn, arr)
            ready = conn.poll(self.timeout_s)
        except (BrokenPipeError, ConnectionResetError, EOFError, OSError):
            ready = True  # the worker is gone: reading below reports how it died
        if not ready:
            self._kill()
            self._guard.timed_out(self.timeout_s)
            raise DeviceTimeout(f"did not return within timeout_s={self.timeout_s:g} s; the "
                                f"worker process was stopped (the next call starts a new one)",
                                call=call, input_summary=describe(),
                                stderr=self._capture.since_mark())
        try:
            head = conn.recv()
            if head[0] == "array":
                _, dtype, shape = head
                size = int(np.prod(shape, dtype=np.int64)) if len(shape) else 1
                if size > cap or size * np.dtype(dtype).itemsize > _MAX_ITEM * cap:
                    self._kill()  # the worker checks first: this is never allocated
                    raise DeviceOutputError(f"the worker announced {size} items of {dtype}; "
                                            f"more than {cap} are refused unread", call=call,
                                            input_summary=describe())
                out = np.empty(shape, dtype=np.dtype(dtype))
                _recv_array(conn, out)
        except (EOFError, OSError):
            code = self._reap()
            raise DeviceCrashed(f"the device {describe_exit(code)} (in its worker process; "
                                f"the next call starts a new one)", call=call,
                                input_summary=describe(),
                                stderr=self._capture.since_mark()) from None
        self._busy = False
        self._guard.answered()
        kind = head[0]
        if kind == "array":
            return out
        if kind == "shape-only":
            # an object array (None, a list of objects) or one above the cap: give the guard
            # one of the same dtype and shape, which costs no memory (it is judged unread)
            _, dtype, shape = head
            dtype = np.dtype(dtype)
            return np.broadcast_to(np.zeros((), dtype if dtype.itemsize <= _MAX_ITEM else object),
                                   shape)
        if kind == "raised":
            raise AdapterError(head[1], call=call, input_summary=describe(),
                               stderr=self._capture.since_mark())
        if kind == "adapter_error":
            _, cls_name, message, e_call, e_input, e_stderr = head
            cls = getattr(errors, cls_name, AdapterError)
            raise cls(message, call=e_call or call, input_summary=e_input or describe(),
                      stderr=e_stderr or self._capture.since_mark())
        raise AdapterError(f"unexpected reply {kind!r} from the worker", call=call,
                           input_summary=describe())

    def modulate(self, bits):
        return self._call("modulate", bits, lambda: summarise_bits(bits))

    def demodulate(self, samples):
        return self._call("demodulate", samples, lambda: summarise_samples(samples))

    def demodulate_soft(self, samples, noise_var):
        return self._call("demodulate_soft", samples,
                          lambda: summarise_samples(samples) + f", noise_var={noise_var:.4g}",
                          noise_var=float(noise_var))

    def reset(self):
        self._call("reset", np.zeros(0, np.uint8), lambda: "no input")

    def flush(self):
        return self._call("flush", np.zeros(0, np.uint8), lambda: "no input")

    def close(self) -> None:
        conn, proc = self._conn, self._proc
        # a worker still inside a call (the run was interrupted) cannot read "close": kill it
        if conn is not None and proc is not None and proc.is_alive() and not self._busy:
            try:
                conn.send(("close",))
                proc.join(min(self.timeout_s, 5.0))
            except (BrokenPipeError, OSError):
                pass
        self._kill()
        self._capture.remove()


def _rebuild_open_error(msg, stderr: str | None) -> Exception:
    kind = msg[1]
    if kind == "config":
        _, _, message, file, key = msg
        return ConfigError(message, file=file, key=key)
    if kind == "adapter":
        _, _, cls_name, message, call, summary, e_stderr = msg
        cls = getattr(errors, cls_name, AdapterError)
        return cls(message, call=call or "open", input_summary=summary,
                   stderr=e_stderr or stderr)
    return AdapterError(msg[2], call="open", stderr=stderr)


# -- the worker side ------------------------------------------------------------------------

def _die_with_parent() -> None:
    """Linux: the worker gets SIGKILL when its parent (the fork server) goes away."""
    if not sys.platform.startswith("linux"):
        return
    try:
        import ctypes

        ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGKILL)  # PR_SET_PDEATHSIG
    except (OSError, AttributeError):
        pass


def _worker_main(conn, spec, capture_path: str, sys_path: list, cwd: str | None,
                 no_plugins) -> None:
    # its own process group: the harness kills the worker with whatever the device starts
    try:
        os.setpgid(0, 0)
    except (AttributeError, OSError):
        pass
    # Ctrl-C is the harness's to handle; the harness, not the worker, decides what stops
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    _die_with_parent()
    fd = os.open(capture_path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o600)
    os.dup2(fd, 1)
    os.dup2(fd, 2)
    os.close(fd)
    fd = os.open(os.devnull, os.O_RDONLY)
    os.dup2(fd, 0)
    os.close(fd)
    _tune(conn)
    # the fork server was started earlier: take the harness's current import path (its working
    # folder last) and plugin setting (a plugin installed into a folder on sys.path at run time
    # must be found here too), and its working folder
    sys.path[:] = sys_path
    if cwd is not None:
        try:
            os.chdir(cwd)
        except OSError:
            pass
    if no_plugins is None:
        os.environ.pop("MODEMVERIFY_NO_PLUGINS", None)
    else:
        os.environ["MODEMVERIFY_NO_PLUGINS"] = no_plugins
    try:
        adapter = get_adapter_class(spec.adapter).from_spec(spec)
    except ConfigError as exc:
        conn.send(("open_error", "config", exc.raw_message, exc.file, exc.key))
        return
    except AdapterError as exc:
        conn.send(("open_error", "adapter", type(exc).__name__, exc.raw_message, exc.call,
                   exc.input_summary, exc.stderr))
        return
    except SystemExit:  # the worker ends with the device's status: reported as its death
        raise
    except BaseException as exc:
        traceback.print_exc()
        conn.send(("open_error", "raised", describe_raise(exc)))
        return
    conn.send(("ready", sorted(adapter.capabilities)))
    while True:
        try:
            msg = conn.recv()
        except EOFError:
            break
        if msg[0] == "close":
            try:
                adapter.close()
            except BaseException:  # closing must not turn a finished run into a crash report
                traceback.print_exc()
            break
        _, call, dtype, shape, noise_var, cap = msg
        arr = np.empty(shape, dtype=np.dtype(dtype))
        _recv_array(conn, arr)
        try:
            fn = getattr(adapter, call)
            if call in STATE_CALLS:  # no input; reset answers an empty array
                out = fn()
                out = np.zeros(0, np.complex128) if call == "reset" else out
            else:
                out = fn(arr) if noise_var is None else fn(arr, noise_var)
        except AdapterError as exc:
            reply = ("adapter_error", type(exc).__name__, exc.raw_message, exc.call,
                     exc.input_summary, exc.stderr)
        except SystemExit:  # the worker ends with the device's status: reported as its death
            raise
        except BaseException as exc:
            traceback.print_exc()
            reply = ("raised", describe_raise(exc))
        else:
            _send_result(conn, out, call, cap)
            reply = None
        finally:
            sys.stdout.flush()
            sys.stderr.flush()
        if reply is not None:
            conn.send(reply)
    sys.stdout.flush()
    sys.stderr.flush()
    # the end of the run: whatever the device started in this group goes with the worker
    if hasattr(os, "killpg") and os.getpgrp() == os.getpid():
        os.killpg(0, signal.SIGKILL)


#: bytes per item of the widest answer a device gives (complex128)
_MAX_ITEM = 16


def _send_result(conn, out, call: str, cap: int) -> None:
    """Send the device's answer: an array's bytes, or only its dtype and shape when the guard
    judges it from those alone (objects, or more than ``cap`` items: never converted, never
    sent)."""
    if isinstance(out, (list, tuple)) and len(out) > cap:
        # as in process, refused by its length: any dtype the guard accepts for the call
        conn.send(("shape-only", "c16" if call in ("modulate", "flush") else "f8", (len(out),)))
        return
    try:
        arr = np.asarray(out)
    except Exception:
        arr = np.empty((), dtype=object)
    if arr.dtype.hasobject or arr.dtype.kind == "V":
        conn.send(("shape-only", "O", arr.shape))
        return
    if arr.size > cap or arr.nbytes > _MAX_ITEM * cap:
        conn.send(("shape-only", arr.dtype.str, arr.shape))
        return
    arr = np.ascontiguousarray(arr)
    conn.send(("array", arr.dtype.str, arr.shape))
    _send_array(conn, arr)


__all__ = [
    "IsolatedAdapter", "open_adapter", "describe_exit", "worker_path", "HangGuard",
    "OPEN_TIMEOUT_S", "MAX_CONSECUTIVE_TIMEOUTS", "STDERR_QUOTE", "CHUNK",
]
