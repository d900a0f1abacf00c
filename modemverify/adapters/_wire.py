"""The framed binary protocol between modemverify and a device process, and the sample formats.

Both ends of the pipe use this module: the harness (``adapter: process``, in
:mod:`modemverify.adapters.process`) and Python device processes, through :func:`serve`. It
needs the standard library, numpy and :mod:`modemverify.dsp.formats` only (the sample codec,
itself numpy only), so a device process imports no more than that.

Frames
------
Every message, in both directions, is one frame: a 16-byte header, then the payload.

======  ====  ===========================================================================
offset  size  field
======  ====  ===========================================================================
0       2     magic ``b"MV"``
2       1     protocol version, 1
3       1     frame type, one ASCII letter (below)
4       4     sequence number, uint32 little-endian; a reply repeats its request's number
8       8     payload length in bytes, uint64 little-endian
======  ====  ===========================================================================

=====  ================  ==================================================================
type   direction         payload
=====  ================  ==================================================================
``H``  both              hello: UTF-8 JSON (see below)
``M``  harness -> dev    modulate: the bits, one uint8 (0 or 1) per bit
``D``  harness -> dev    demodulate: samples in the device's sample format
``S``  harness -> dev    soft demodulate: float64 LE noise variance, then samples
``R``  dev -> harness    result: samples (for ``M``), uint8 bits (``D``), float32 LE LLRs (``S``)
``E``  dev -> harness    error: int32 LE error code, then a UTF-8 message
``Q``  harness -> dev    quit: no reply; the device exits with status 0 (so it does on EOF)
=====  ================  ==================================================================

Handshake: the harness sends ``H`` with ``{"protocol": 1, "modulation": ..., "convention":
..., "bits_per_symbol": k, "samples_per_symbol": sps, "params": {...}}`` (``params`` from the
device file); the device answers ``H`` with ``{"protocol": 1, "capabilities": [...],
"sample_format": "float32" | "int16", "full_scale": 1.0, "name": "..."}`` (``capabilities`` a
non-empty subset of modulate, demodulate, demodulate_soft; ``full_scale`` and ``name``
optional). Then requests and replies alternate, one at a time. The device reads a whole request
before it replies, writes nothing else to stdout, and may write anything to stderr.

Sample formats
--------------
``float32``
    interleaved I, Q as little-endian float32; 8 bytes per complex sample.
``int16``
    interleaved I, Q as little-endian int16 in Q15: value = integer * full_scale / 32768;
    4 bytes per complex sample. Encoding rounds to nearest and saturates at -32768..32767, as
    an ADC would.

Both ends encode and decode them with :mod:`modemverify.dsp.formats`, the one sample codec.
"""

from __future__ import annotations

import json
import os
import struct
import sys
from typing import BinaryIO

import numpy as np

from ..dsp.formats import (
    WIRE_FORMATS,
    check_format,
    check_full_scale,
    encode_samples,
    from_format,
)
from ..errors import ConfigError

PROTOCOL_VERSION = 1
MAGIC = b"MV"
HEADER = struct.Struct("<2sBcIQ")
HEADER_SIZE = HEADER.size  # 16

HELLO, MODULATE, DEMODULATE, SOFT, RESULT, ERROR, QUIT = (b"H", b"M", b"D", b"S", b"R", b"E",
                                                          b"Q")
FRAME_NAMES = {HELLO: "hello", MODULATE: "modulate", DEMODULATE: "demodulate",
               SOFT: "demodulate_soft", RESULT: "result", ERROR: "error", QUIT: "quit"}
REQUEST_OF_CALL = {"modulate": MODULATE, "demodulate": DEMODULATE, "demodulate_soft": SOFT}


class WireError(Exception):
    """A frame that breaks the protocol (bad magic, version, type or length)."""


def pack_header(ftype: bytes, seq: int, length: int) -> bytes:
    return HEADER.pack(MAGIC, PROTOCOL_VERSION, ftype, seq & 0xFFFFFFFF, length)


def unpack_header(raw: bytes) -> tuple[bytes, int, int]:
    """``(type, sequence number, payload length)``; raises WireError for a malformed header."""
    magic, version, ftype, seq, length = HEADER.unpack(bytes(raw))
    if magic != MAGIC:
        text = bytes(raw)[:16].decode("latin-1").encode("unicode_escape").decode()
        raise WireError(f"expected a frame header starting with b'MV' on stdout, got "
                        f"{text!r} (stdout carries the protocol only; write diagnostics to "
                        f"stderr)")
    if version != PROTOCOL_VERSION:
        raise WireError(f"frame of protocol version {version}; this harness speaks version "
                        f"{PROTOCOL_VERSION}")
    if ftype not in FRAME_NAMES:
        raise WireError(f"unknown frame type {ftype!r}")
    return ftype, seq, length


# -- hello -----------------------------------------------------------------------------------

def parse_device_hello(payload: bytes) -> dict:
    """Validate the device's hello; returns it with defaults filled in. Raises WireError."""
    try:
        info = json.loads(bytes(payload).decode("utf-8"))
    except (UnicodeDecodeError, ValueError) as exc:
        raise WireError(f"the hello payload is not UTF-8 JSON ({exc})") from None
    if not isinstance(info, dict):
        raise WireError(f"the hello payload is {type(info).__name__}, expected a JSON object")
    if info.get("protocol") != PROTOCOL_VERSION:
        raise WireError(f"hello says protocol={info.get('protocol')!r}; this harness speaks "
                        f"protocol {PROTOCOL_VERSION}")
    caps = info.get("capabilities")
    known = tuple(REQUEST_OF_CALL)
    if (not isinstance(caps, list) or not caps or not all(c in known for c in caps)):
        raise WireError(f"hello capabilities={caps!r}: expected a non-empty list drawn from "
                        f"{', '.join(known)}")
    try:
        fmt = check_format(info.get("sample_format", "float32"), WIRE_FORMATS)
        full_scale = check_full_scale(info.get("full_scale", 1.0))
    except ConfigError as exc:
        raise WireError(f"hello {exc.raw_message}") from None
    name = info.get("name", "")
    return {**info, "capabilities": caps, "sample_format": fmt, "full_scale": full_scale,
            "name": str(name)}


# -- the device side -------------------------------------------------------------------------

def _read_exact(stream: BinaryIO, n: int) -> bytes | None:
    """n bytes, or None at a clean EOF before the first byte."""
    buf = bytearray(n)
    view = memoryview(buf)
    got = 0
    while got < n:
        r = stream.readinto(view[got:])
        if not r:
            if got == 0:
                return None
            raise WireError(f"stream ended inside a frame ({got} of {n} bytes)")
        got += r
    return bytes(buf)


def read_frame(stream: BinaryIO) -> tuple[bytes, int, bytes] | None:
    """Blocking read of one frame; None at EOF."""
    head = _read_exact(stream, HEADER_SIZE)
    if head is None:
        return None
    ftype, seq, length = unpack_header(head)
    payload = _read_exact(stream, length) if length else b""
    if payload is None:
        raise WireError("stream ended before the payload")
    return ftype, seq, payload


def write_frame(stream: BinaryIO, ftype: bytes, seq: int, *parts) -> None:
    """Write one frame made of ``parts`` (bytes-like objects) and flush."""
    views = [memoryview(p).cast("B") for p in parts]
    stream.write(pack_header(ftype, seq, sum(v.nbytes for v in views)))
    for v in views:
        stream.write(v)
    stream.flush()


def serve(factory, *, sample_format: str = "float32", full_scale: float = 1.0,
          name: str | None = None, stdin: BinaryIO | None = None,
          stdout: BinaryIO | None = None) -> int:
    """Run a Python device as a device process: answer the harness's frames until it quits.

    Parameters
    ----------
    factory : callable
        Called with the device file's ``params`` as keyword arguments; returns an object with
        ``modulate(bits)``, ``demodulate(samples)`` and/or ``demodulate_soft(samples,
        noise_var)`` (the methods present are the capabilities announced in the hello).
    sample_format : {"float32", "int16"}
        How samples cross the pipe.
    full_scale : float
        For ``int16``: the value of the integer 32768.
    name : str, optional
        Announced in the hello.

    Returns
    -------
    int
        Exit status for ``sys.exit``: 0 after ``Q`` or end of input.

    Notes
    -----
    Anything the device prints goes to stderr: file descriptor 1 is pointed at stderr while the
    device runs, so a stray ``print`` cannot corrupt the protocol. An exception raised by a call
    becomes an ``E`` frame with code -1 and the exception's text; the process keeps serving.
    """
    check_format(sample_format, WIRE_FORMATS)
    full_scale = check_full_scale(full_scale)
    rd = stdin or os.fdopen(os.dup(0), "rb", buffering=0)
    if stdout is None:
        wr = os.fdopen(os.dup(1), "wb")
        os.dup2(2, 1)  # fd 1 now reaches stderr: prints (also from C code) stay off the pipe
        sys.stdout = sys.stderr
    else:
        wr = stdout
    first = read_frame(rd)
    if first is None:
        return 0
    ftype, seq, payload = first
    if ftype != HELLO:
        raise WireError(f"expected the harness's hello, got a {FRAME_NAMES[ftype]} frame")
    hello = json.loads(payload.decode("utf-8"))
    device = factory(**(hello.get("params") or {}))
    calls = [c for c in REQUEST_OF_CALL if callable(getattr(device, c, None))]
    reply = {"protocol": PROTOCOL_VERSION, "capabilities": calls, "sample_format": sample_format,
             "full_scale": full_scale, "name": name or type(device).__name__}
    write_frame(wr, HELLO, seq, json.dumps(reply).encode("utf-8"))
    while True:
        frame = read_frame(rd)
        if frame is None or frame[0] == QUIT:
            close = getattr(device, "close", None)
            if callable(close):
                close()
            return 0
        ftype, seq, payload = frame
        try:
            if ftype == MODULATE and "modulate" in calls:
                bits = np.frombuffer(payload, dtype=np.uint8).copy()
                out = encode_samples(np.asarray(device.modulate(bits), dtype=np.complex128),
                                     sample_format, full_scale)
            elif ftype == DEMODULATE and "demodulate" in calls:
                z = from_format(payload, sample_format, full_scale)
                out = np.asarray(device.demodulate(z)).astype(np.uint8)
            elif ftype == SOFT and "demodulate_soft" in calls:
                noise_var = struct.unpack("<d", payload[:8])[0]
                z = from_format(payload[8:], sample_format, full_scale)
                out = np.asarray(device.demodulate_soft(z, noise_var)).astype("<f4")
            else:
                raise WireError(f"this device does not handle {FRAME_NAMES[ftype]} frames")
        except Exception as exc:  # report it to the harness and keep serving
            msg = f"{type(exc).__name__}: {exc}".encode("utf-8", "replace")
            write_frame(wr, ERROR, seq, struct.pack("<i", -1), msg)
            continue
        finally:
            sys.stderr.flush()
        write_frame(wr, RESULT, seq, np.ascontiguousarray(out))
