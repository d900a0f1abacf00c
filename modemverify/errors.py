"""The exceptions modemverify raises.

A failing oracle is a result (a :class:`~modemverify.Verdict`), never an exception. Exceptions
mean one of three things: the user's input is wrong (:class:`ConfigError`), the device under test
misbehaved (:class:`AdapterError` and its subclasses), or a name was looked up that does not exist
(:class:`UnknownNameError`). :class:`Interrupted` is not an error: a signal stopped the run.
"""

from __future__ import annotations

__all__ = [
    "ModemVerifyError", "ConfigError", "UnknownNameError", "AdapterError", "DeviceOutputError",
    "DeviceTimeout", "DeviceCrashed", "Interrupted",
]


class ModemVerifyError(Exception):
    """Root of every exception modemverify raises on purpose."""


class ConfigError(ModemVerifyError, ValueError):
    """The device file or the command-line arguments are wrong.

    The message names the file, the key (dotted path), the value found and what was expected.
    """

    def __init__(self, message: str, *, file: str | None = None, key: str | None = None):
        self.file = file
        self.key = key
        self.raw_message = message
        where = ": ".join(p for p in (file, key) if p)
        super().__init__(f"{where}: {message}" if where else message)


class UnknownNameError(ConfigError, KeyError):
    """A name (modulation, convention, adapter, check) that is not known.

    Keeps the raw name in ``.name`` and the known names in ``.known``.
    """

    def __init__(self, kind: str, name: object, known, *, file: str | None = None,
                 key: str | None = None):
        self.kind = kind
        self.name = name
        self.known = sorted(known)
        super().__init__(f"no {kind} named {name!r}; known: {', '.join(self.known)}",
                         file=file, key=key)

    def __str__(self) -> str:  # KeyError would repr() the message
        return ConfigError.__str__(self)


class AdapterError(ModemVerifyError):
    """The device under test crashed, hung, or returned something unusable.

    ``call`` names the device function, ``input_summary`` describes the input it was given.
    """

    def __init__(self, message: str, *, call: str | None = None,
                 input_summary: str | None = None, stderr: str | None = None):
        self.call = call
        self.input_summary = input_summary
        self.stderr = stderr
        self.raw_message = message
        parts = [message]
        if call:
            parts.insert(0, f"{call}()")
        if input_summary:
            parts.append(f"on input {input_summary}")
        if stderr:
            parts.append(f"stderr: {stderr.strip()[-500:]}")
        super().__init__(": ".join(parts[:2]) + "".join(f"; {p}" for p in parts[2:]))


class DeviceOutputError(AdapterError):
    """The device returned output of the wrong type, shape, length or with non-finite values."""


class DeviceTimeout(AdapterError):
    """The device did not answer within its per-call timeout."""


class DeviceCrashed(AdapterError):
    """The device's process died (segfault, abort, exit) while handling a call."""


class Interrupted(KeyboardInterrupt):
    """A signal (SIGTERM, Ctrl-C) stopped the run: raised by the run's own signal handler
    (``session``), never by a device. Code that turns a device's exceptions, ``BaseException``
    included, into verdicts must let this one through: the run then keeps the verdicts
    measured so far and writes them. A subclass of KeyboardInterrupt, so code that stops on
    Ctrl-C stops on it too."""

    def __init__(self, signal_name: str = "SIGINT"):
        self.signal_name = signal_name
        super().__init__(signal_name)
